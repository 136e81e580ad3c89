"""What every command shares: one-line user errors with exit status 2, warnings, consoles, the medical note."""

from __future__ import annotations

import functools
import warnings
from typing import Annotated, Optional

import typer
from rich.console import Console
from rich.markup import escape

MEDICAL_CAUTION = ("Renders of medical scans are for research and teaching, not diagnosis; transfer functions "
                   "can hide or invent structure. Defer to licensed clinical practice and local regulations.")

console = Console(soft_wrap=True)
error_console = Console(stderr=True, highlight=False, soft_wrap=True)

#: ``--threads`` as every command that runs kernels takes it.
threads_option = Annotated[Optional[int], typer.Option(
    help="numba threads, from 1 to the number of cores (default: all cores); results do not depend on it.")]


def reports_user_errors(function):
    """Turn :class:`tracer.UserError` into one red line on stderr and exit status 2; show warnings in yellow."""

    @functools.wraps(function)
    def wrapper(*args, **kwargs):
        from ..errors import UserError

        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always", UserWarning)
            try:
                result = function(*args, **kwargs)
            except UserError as error:
                _show_warnings(caught)
                error_console.print(f"[red]error:[/red] {escape(str(error))}", soft_wrap=True)
                raise typer.Exit(code=2)
            _show_warnings(caught)
        return result

    return wrapper


def _show_warnings(caught) -> None:
    for item in caught:
        if issubclass(item.category, UserWarning):
            error_console.print(f"[yellow]warning:[/yellow] {escape(str(item.message))}", soft_wrap=True)


def medical_note(scene=None, *, volume=None, transfer_function=None) -> None:
    """Print the medical caution when what is rendered or checked is a medical scan: a transfer function
    marked ``medical = true``, or a volume whose header names a patient space (README, "Conventions")."""
    if scene is not None:
        volume, transfer_function = scene.volume, scene.transfer_function
    medical = (volume is not None and volume.patient_space) or (transfer_function is not None and transfer_function.medical)
    if medical:
        console.print(f"[dim]{MEDICAL_CAUTION}[/dim]")


def former_option(name: str, value, new_name: str) -> None:
    """Refuse an option of an earlier release with a line that names its replacement."""
    if value is not None:
        from ..errors import UserError

        raise UserError(f"{name} is now called {new_name} (same meaning)")


#: Context of a former command's name: it accepts whatever was passed, to answer with its new name.
FORMER = {"allow_extra_args": True, "ignore_unknown_options": True}


def former_command(old: str, new: str):
    """A hidden command under an earlier release's name that says what it is called now."""

    @reports_user_errors
    def command(arguments: Annotated[Optional[list[str]], typer.Argument(hidden=True)] = None):
        from ..errors import UserError

        raise UserError(f"`tracer {old}` is now called `tracer {new}` (same arguments and options)")

    command.__doc__ = f"Now `tracer {new}`."
    return command


def check_cluster_options(workers, scheduler, threads) -> None:
    """``--workers``, ``--scheduler`` and ``--threads`` as every command that can run on Dask takes them."""
    from ..config import check_threads
    from ..distributed.client import check_scheduler_address
    from ..errors import UserError

    if workers is not None and scheduler is not None:
        raise UserError("--workers and --scheduler: give one or the other")
    if workers is not None and workers < 1:
        raise UserError(f"--workers: must be at least 1, got {workers}")
    if scheduler is not None:
        check_scheduler_address(scheduler)
        if threads is not None:
            raise UserError("--threads: an existing cluster's workers keep their own thread count "
                            "(set NUMBA_NUM_THREADS where they start)")
    if workers is None:
        check_threads(threads)
    elif threads is not None and threads < 1:
        raise UserError(f"--threads: must be at least 1 per worker, got {threads}")
