"""``dataset`` and ``dataset-sheet``."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated, Optional

import typer

from rich.markup import escape

from .common import MEDICAL_CAUTION, check_cluster_options, console, error_console, reports_user_errors



def register(app: typer.Typer) -> None:
    app.command("dataset")(dataset)
    app.command("dataset-sheet")(dataset_sheet)


@reports_user_errors
def dataset(
    plan: Annotated[Path, typer.Argument(help="Dataset plan TOML file.")],
    out: Annotated[Path, typer.Option("--out", help="Dataset folder.")],
    resume: Annotated[bool, typer.Option("--resume", help="Verify what is done (checksums) and render the rest.")] = False,
    workers: Annotated[Optional[int], typer.Option(help="Start a local Dask cluster with this many worker processes.")] = None,
    scheduler: Annotated[Optional[str], typer.Option(help="Use an existing Dask scheduler, tcp://HOST:PORT.")] = None,
    dashboard: Annotated[bool, typer.Option("--dashboard", help="Serve the Dask dashboard on 127.0.0.1:8787.")] = False,
    threads: Annotated[Optional[int], typer.Option(help="numba threads: of this process when serial, of each worker "
                       "with --workers (default: the cores, shared among the workers); the files do not depend on it.")] = None,
):
    """Build a dataset: per view, noisy inputs at every spp of a ladder and a certified reference.

    Inputs and reference have independent noise; a JSON-Lines manifest lists every file with its
    checksum; items are split by view or by volume. Serial by default; --workers N or --scheduler
    ADDRESS for Dask. --resume continues a killed run.
    """
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn, TimeRemainingColumn

    from ..dataset.plan import load_plan
    from ..dataset.run import build_dataset
    from ..outputs.save import check_output_folder

    check_cluster_options(workers, scheduler, threads)
    parsed = load_plan(plan)
    check_output_folder(out)
    columns = [TextColumn("[bold]items"), BarColumn(), MofNCompleteColumn(), TimeElapsedColumn(), TextColumn("eta"),
               TimeRemainingColumn()]
    with Progress(*columns, console=error_console, transient=True) as progress:
        task = progress.add_task("items", total=None)

        def report(done, total):
            progress.update(task, completed=done, total=total)

        summary = build_dataset(plan, out, resume=resume, workers=workers, scheduler=scheduler, dashboard=dashboard,
                                on_progress=report, numba_threads=threads)
    console.print(f"{summary.n_items} items in {escape(str(out))} ({summary.n_done_before} were already done), "
                  f"{summary.seconds:.1f} s")
    console.print("  per split: " + escape(", ".join(f"{name} {count}" for name, count in summary.per_split.items())))
    console.print(f"  samples traced: {summary.total_samples / 1e6:.1f} M paths")
    psnr = "n/a" if summary.worst_reference_psnr_db is None else f"{summary.worst_reference_psnr_db:.1f} dB"
    console.print(f"  worst reference: mean relative error {summary.worst_reference_error:.4f}, "
                  f"PSNR against converged {psnr}")
    if summary.uncertified:
        error_console.print(f"[yellow]warning:[/yellow] {len(summary.uncertified)} references missed the plan's "
                            f"target: {escape(', '.join(summary.uncertified[:5]))}")
    if parsed.medical:
        console.print(f"[dim]{MEDICAL_CAUTION}[/dim]")


@reports_user_errors
def dataset_sheet(
    folder: Annotated[Path, typer.Argument(help="Dataset folder (with manifest.jsonl).")],
    out: Annotated[Optional[Path], typer.Option("--out", help="PNG to write (default FOLDER/sheet.png).")] = None,
    items: Annotated[int, typer.Option(min=1, help="How many items to show.")] = 4,
    exposure: Annotated[float, typer.Option(help="Exposure in stops.")] = 0.0,
):
    """A contact sheet of a few items: lowest- and highest-spp inputs, the reference, albedo, normal, depth."""
    from ..dataset.sheet import write_dataset_sheet

    path = write_dataset_sheet(folder, out or folder / "sheet.png", n_items=items, exposure=exposure)
    console.print(f"wrote {escape(str(path))}")
