"""``tracer``: the root command; each module registers its commands on it."""

from __future__ import annotations

import os
from pathlib import Path

import typer

from . import datasets, rendering, reporting, scoring, volumes
from .common import MEDICAL_CAUTION

app = typer.Typer(
    name="tracer",
    help=(
        "Path-trace your own volumes on CPUs and write what Monte Carlo denoisers need: radiance at any "
        "spp, its variance, alpha, albedo, and position / normal / depth at the first and second scatter "
        f"events.\n\n{MEDICAL_CAUTION}"
    ),
    no_args_is_help=True,
    pretty_exceptions_show_locals=False,
    add_completion=False,
    rich_markup_mode="markdown",
)
volumes.register(app)
rendering.register(app)
datasets.register(app)
scoring.register(app)
reporting.register(app)
volumes.register_demo_volumes(app)


def _ensure_numba_cache() -> None:
    """Cache compiled kernels somewhere writable, even when site-packages is read-only."""
    if "NUMBA_CACHE_DIR" in os.environ:
        return
    package = Path(__file__).resolve().parents[1]
    if not os.access(package, os.W_OK):
        base = Path(os.environ.get("XDG_CACHE_HOME", Path.home() / ".cache"))
        if not os.access(base.parent if not base.exists() else base, os.W_OK):
            import tempfile

            base = Path(tempfile.gettempdir())
        os.environ["NUMBA_CACHE_DIR"] = str(base / "tracer-numba")


def run() -> None:
    _ensure_numba_cache()
    app(prog_name="tracer")
