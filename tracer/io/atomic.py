"""Write-then-rename, so that no half-written file ever sits under a final name."""

from __future__ import annotations

import contextlib
import os
from pathlib import Path

from ..errors import UserError


@contextlib.contextmanager
def atomic_path(path: str | Path):
    """Yield a temporary path beside ``path``; rename it into place when the body succeeds.

    The temporary name keeps the final suffix (some writers choose a format by it). On any
    error the temporary file is removed and the previous file at ``path``, if any, stays.
    """
    path = Path(path)
    folder = path.parent
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as error:
        raise UserError(f"{folder}: cannot create the output folder: {error.strerror or error}")
    if not os.access(folder, os.W_OK):
        raise UserError(f"{folder}: output folder is not writable")
    temporary = folder / f".{path.stem}.partial-{os.getpid()}{path.suffix}"
    try:
        yield temporary
        os.replace(temporary, path)
    except OSError as error:
        with contextlib.suppress(OSError):
            temporary.unlink()
        reason = error.strerror or str(error) or type(error).__name__
        raise UserError(f"{path}: cannot write: {reason}; the previous file, if any, is unchanged") from None
    except BaseException:
        with contextlib.suppress(OSError):
            temporary.unlink()
        raise
