"""``info``, ``tf-check`` and ``samples``: looking at volumes and transfer functions before rendering."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated, Optional

import typer

from .common import MEDICAL_CAUTION, console, error_console, reports_user_errors


def register(app: typer.Typer) -> None:
    app.command("info")(info)
    app.command("tf-check")(tf_check)


def register_samples(app: typer.Typer) -> None:
    app.command("samples")(samples)


@reports_user_errors
def info(
    volume: Annotated[Path, typer.Argument(help="Volume file: .nrrd, .nhdr or .npy.")],
    spacing_mm: Annotated[Optional[str], typer.Option(help="For .npy: voxel spacing 'sx,sy,sz' in mm.")] = None,
):
    """Describe a volume: shape, dtype, spacing, extent, value range, percentiles, histogram, memory, NaN/Inf."""
    from ..volume import load_volume, summarize

    spacing = _triple(spacing_mm, "--spacing-mm") if spacing_mm else None
    loaded = load_volume(volume, spacing_mm=spacing, allow_nonfinite=True)
    summary = summarize(loaded)
    out = console.print
    out(f"[bold]{volume}[/bold]")
    out(f"  shape        {' x '.join(map(str, summary.shape))} voxels  \\[x, y, z]")
    out(f"  dtype        {summary.dtype} (rendered as float32)")
    out(f"  spacing      {' x '.join(f'{s:.4g}' for s in summary.spacing_mm)} mm")
    out(f"  extent       {' x '.join(f'{e:.4g}' for e in summary.extent_mm)} mm (between outer voxel centres)")
    out(f"  origin       ({', '.join(f'{o:.4g}' for o in summary.origin_mm)}) mm")
    out(f"  value range  {summary.value_min:.6g} .. {summary.value_max:.6g}")
    out("  percentiles  " + "  ".join(f"{k} {v:.5g}" for k, v in summary.percentiles.items()))
    out(f"  memory       {summary.memory_bytes / 2**20:.1f} MiB as float32")
    out(f"  NaN/Inf      {summary.n_nonfinite}" + ("  [red](rendering refuses these)[/red]" if summary.n_nonfinite else ""))
    out("  histogram (voxel count, log-scaled bars)")
    counts, edges = summary.histogram_counts, summary.histogram_edges
    import math

    peak = math.log10(max(counts.max(), 1) + 1)
    for count, low, high in zip(counts, edges[:-1], edges[1:]):
        bar = "#" * int(round(40 * math.log10(count + 1) / peak)) if count else ""
        out(f"    {low:>11.5g} .. {high:<11.5g} {count:>10d} {bar}", highlight=False)


@reports_user_errors
def tf_check(
    volume: Annotated[Path, typer.Argument(help="Volume file: .nrrd, .nhdr or .npy.")],
    transfer_function: Annotated[Path, typer.Argument(metavar="TF", help="Transfer-function TOML file.")],
    out: Annotated[Optional[Path], typer.Option("--out", help="Write the report plot here (PNG).")] = None,
):
    """Check a transfer function against a volume before committing hours to a render.

    Prints the fraction of non-empty voxels, the function's span against the data range, and the optical
    depth a ray meets crossing the volume's longest diagonal through typical non-empty material, with a
    verdict ("nearly invisible", "only the outer shell will show", ...). --out writes a plot of the value
    histogram under the opacity and albedo curves.
    """
    from ..tfcheck import check_transfer_function, plot_transfer_check
    from ..transfer import load_transfer_function
    from ..volume import load_volume

    loaded = load_volume(volume)
    tf = load_transfer_function(transfer_function)
    check = check_transfer_function(loaded, tf)
    console.print(f"[bold]{transfer_function.name}[/bold] on [bold]{volume.name}[/bold]")
    for line in check.lines():
        console.print("  " + line, highlight=False)
    for warning in check.warnings:
        error_console.print(f"[yellow]warning:[/yellow] {warning}", soft_wrap=True)
    if tf.scale == "HU":
        console.print(f"  [dim]{MEDICAL_CAUTION}[/dim]")
    if out is not None:
        plot_transfer_check(loaded, tf, check, out)
        console.print(f"  wrote {out}")


@reports_user_errors
def samples(
    out: Annotated[Path, typer.Option("--out", help="Folder to write the demo volumes into.")] = Path("sample_volumes"),
):
    """Regenerate the demo volumes (figurine, lattice, plume) bit-identically as gzip NRRD files."""
    from ..samples import write_samples

    write_samples(out, progress=lambda name, path: console.print(f"  wrote {path}"))


def _triple(text: str, option: str) -> tuple[float, float, float]:
    from ..errors import UserError

    try:
        values = tuple(float(part) for part in text.split(","))
    except ValueError:
        raise UserError(f"{option}: expected three numbers like 0.5,0.5,1.0, got {text!r}")
    if len(values) != 3:
        raise UserError(f"{option}: expected three numbers like 0.5,0.5,1.0, got {text!r}")
    return values
