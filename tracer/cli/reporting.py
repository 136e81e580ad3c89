"""``report``: a static page to look at a render, a dataset or a dataset's scores."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated, Optional

import typer
from rich.markup import escape

from .common import MEDICAL_CAUTION, console, error_console, reports_user_errors


def register(app: typer.Typer) -> None:
    app.command("report")(report)


@reports_user_errors
def report(
    path: Annotated[Path, typer.Argument(help="A render .npz, a dataset folder, or a `score-dataset --json` result.")],
    out: Annotated[Path, typer.Option("--out", help="Folder to write (index.html, its script, data/ and thumbs/); "
                   "an earlier report there is replaced, any other non-empty folder is refused.")],
    predictions: Annotated[Optional[Path], typer.Option(help="For a dataset: a folder of ITEM_ID.npz / .exr "
                           "predictions to compare as the candidate.")] = None,
    features: Annotated[bool, typer.Option("--features/--no-features", help="Ship the references' feature buffers "
                        "(about 77 bytes per pixel per item; without them about 8 per image).")] = True,
):
    """Write a page to look at renders, datasets and scores: open OUT/index.html from disk, no server needed.

    A render: every buffer, exposure and tone curve on the HDR radiance, pixel read-out, zoom.
    A dataset: the manifest as a filterable table with thumbnails, and per item a compare view
    (input / candidate / reference, divider or flip) with the feature buffers. A score result:
    per-item scores, worst first, and PSNR against spp. Files that are missing or fail their
    checksum are flagged on the page and listed here as a warning.
    """
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn

    from ..report import write_report

    columns = [TextColumn("[bold]items"), BarColumn(), MofNCompleteColumn(), TimeElapsedColumn()]
    with Progress(*columns, console=error_console, transient=True) as progress:
        task = progress.add_task("items", total=None)
        summary = write_report(path, out, predictions=predictions, features=features,
                               on_progress=lambda done, total: progress.update(task, completed=done, total=total))
    what = {"render": "render page", "dataset": f"dataset page, {summary.items} items",
            "score": f"score page, {summary.items} items"}[summary.kind]
    console.print(f"wrote {escape(str(out / 'index.html'))} ({what}, {summary.bytes_written / 1e6:.1f} MB, "
                  f"{summary.seconds:.1f} s); open it in a browser, no server needed")
    if summary.medical:
        console.print(f"[dim]{MEDICAL_CAUTION}[/dim]")
