"""What every command shares: one-line user errors with exit status 2, warnings, consoles."""

from __future__ import annotations

import functools
import warnings

import typer
from rich.console import Console
from rich.markup import escape

MEDICAL_CAUTION = ("Renders of medical scans are for research and teaching, not diagnosis; transfer functions "
                   "can hide or invent structure. Defer to licensed clinical practice and local regulations.")

console = Console(soft_wrap=True)
error_console = Console(stderr=True, highlight=False, soft_wrap=True)


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
