"""The one exception class for mistakes a user can fix.

A :class:`UserError` carries a single line that names the file, the field and what is
wrong. The CLI prints that line and exits with status 2; a notebook user sees the same
line in the exception. Anything else that is raised is a bug and keeps its traceback.
"""


class UserError(ValueError):
    """Bad input: a file, a field or a value the user can correct."""

    def __init__(self, message: str):
        super().__init__(" ".join(str(message).split()))
