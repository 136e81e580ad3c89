"""``info``, ``tf-check`` and ``demo-volumes``: looking at volumes and transfer functions before rendering."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated, Optional

import typer

from rich.markup import escape

from .common import FORMER, console, error_console, former_command, medical_note, reports_user_errors


def register(app: typer.Typer) -> None:
    app.command("info")(info)
    app.command("convert")(convert)
    app.command("tf-check")(tf_check)


def register_demo_volumes(app: typer.Typer) -> None:
    app.command("demo-volumes")(demo_volumes)
    app.command("samples", hidden=True, context_settings=FORMER)(former_command("samples", "demo-volumes"))


VOLUME_HELP = ("Volume: .nrrd/.nhdr, .npy, .nii/.nii.gz, a DICOM series folder, .tif/.tiff (or a folder of pages), "
               ".zarr or .h5 (STORE::ARRAY); all but NRRD and .npy need the formats extra.")


@reports_user_errors
def info(
    volume: Annotated[Path, typer.Argument(help=VOLUME_HELP)],
    spacing_mm: Annotated[Optional[str], typer.Option(help="For .npy, TIFF, zarr and HDF5: voxel spacing 'sx,sy,sz' in mm.")] = None,
    axes: Annotated[Optional[Path], typer.Option("--axes", help="Write an orientation check here (PNG): three small "
                    "renders (the default camera, from +x, from above) with the world axes drawn and labelled.")] = None,
    transfer_function: Annotated[Optional[Path], typer.Option("--tf", help="Transfer function for the --axes "
                                 "renders (default: one made from the value percentiles).")] = None,
):
    """Describe a volume: shape, dtype, spacing, extent, value range, percentiles, histogram, memory, NaN/Inf,
    where each axis points (anatomically too, when the header names a patient space), and what the default
    camera sees.
    """
    from ..scene.camera import default_view
    from ..volumes import load_volume, summarize
    from ..volumes.orientation import anatomical_names, axis_directions, toward

    spacing = _triple(spacing_mm, "--spacing-mm") if spacing_mm else None
    loaded = load_volume(volume, spacing_mm=spacing, allow_nonfinite=True)
    summary = summarize(loaded)
    out = console.print
    out(f"[bold]{escape(str(volume))}[/bold]")
    out(f"  format       {escape(loaded.source_format)}")
    for label, text in loaded.details:
        out(f"  {escape(label):<12s} {escape(text)}")
    out(f"  shape        {' x '.join(map(str, summary.shape))} voxels  \\[x, y, z]")
    kept = loaded.dtype.name != "float32"
    out(f"  dtype        {summary.dtype}" + (" (kept as it is: every value exact in float32)" if kept else
                                             " (held as float32)"))
    out(f"  spacing      {' x '.join(f'{s:.4g}' for s in summary.spacing_mm)} mm")
    out(f"  extent       {' x '.join(f'{e:.4g}' for e in summary.extent_mm)} mm (between outer voxel centres)")
    out(f"  origin       ({', '.join(f'{o:.4g}' for o in summary.origin_mm)}) mm")
    out(f"  value range  {summary.value_min:.6g} .. {summary.value_max:.6g}")
    out("  percentiles  " + "  ".join(f"{k} {v:.5g}" for k, v in summary.percentiles.items()))
    out(f"  memory       {summary.memory_bytes / 2**20:.1f} MiB held (the renderer's bricks; no plain copy is kept)")
    out(f"  NaN/Inf      {summary.n_nonfinite}" + ("  [red](rendering refuses these)[/red]" if summary.n_nonfinite else ""))
    out("  histogram (voxel count, log-scaled bars)")
    counts, edges = summary.histogram_counts, summary.histogram_edges
    import math

    peak = math.log10(max(counts.max(), 1) + 1)
    for count, low, high in zip(counts, edges[:-1], edges[1:]):
        bar = "#" * int(round(40 * math.log10(count + 1) / peak)) if count else ""
        out(f"    {low:>11.5g} .. {high:<11.5g} {count:>10d} {bar}", highlight=False)
    space = loaded.space or "none named"
    names = anatomical_names(loaded.space)
    out(f"  space        {escape(space)}" + (f" (world +x {names[0]}, +y {names[1]}, +z {names[2]})" if names else
                                             " (world axes without anatomical names)" if loaded.space else ""))
    out("  axes         index axis: world step per voxel (mm) -> points toward")
    for axis in axis_directions(loaded):
        step = ", ".join(f"{v:.4g}" for v in axis.step_mm)
        out(f"    {'ijk'[axis.axis]} ({'xyz'[axis.axis]} in the array)  ({step})  -> {axis.toward}", highlight=False)
    import numpy as np

    view = default_view(loaded)
    out(f"  default view camera at ({', '.join(f'{v:.4g}' for v in view.position)}) mm, looking "
        f"{toward(view.forward, loaded.space)}, up {toward(view.up, loaded.space)}; it sees the side of the "
        f"volume that faces {toward(-np.asarray(view.forward), loaded.space)}", highlight=False)
    if axes is not None:
        from ..optics.transfer import load_transfer_function
        from ..outputs.orientation import write_axes_check

        tf = load_transfer_function(transfer_function) if transfer_function is not None else None
        if summary.n_nonfinite:
            from ..errors import UserError

            raise UserError(f"{volume}: data: {summary.n_nonfinite} voxels are NaN or Inf; --axes cannot render it")
        path = write_axes_check(loaded, axes, transfer_function=tf)
        out(f"  wrote {escape(str(path))}")
    medical_note(volume=loaded)


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
    from ..optics.check import check_transfer_function, plot_transfer_check
    from ..optics.transfer import load_transfer_function
    from ..volumes import load_volume

    loaded = load_volume(volume)
    tf = load_transfer_function(transfer_function)
    check = check_transfer_function(loaded, tf)
    console.print(f"[bold]{escape(transfer_function.name)}[/bold] on [bold]{escape(volume.name)}[/bold]")
    for line in check.lines():
        console.print("  " + escape(line), highlight=False)
    for warning in check.warnings:
        error_console.print(f"[yellow]warning:[/yellow] {escape(warning)}", soft_wrap=True)
    if out is not None:
        plot_transfer_check(loaded, tf, check, out)
        console.print(f"  wrote {escape(str(out))}")
    medical_note(volume=loaded, transfer_function=tf)


@reports_user_errors
def demo_volumes(
    out: Annotated[Path, typer.Option("--out", help="Folder to write the demo volumes into.")] = Path("sample_volumes"),
    drifting: Annotated[bool, typer.Option("--drifting", help="Instead, write the drifting plume's 12 time steps "
                        "to OUT/plume_drift/ (for examples/plume_drift.toml).")] = False,
):
    """Regenerate the demo volumes (figurine, lattice, plume, flame) bit-identically as gzip NRRD files."""
    from ..volumes.demo import write_demo_volumes, write_drifting_plume

    report = lambda name, path: console.print(f"  wrote {escape(str(path))}")     # noqa: E731
    if drifting:
        write_drifting_plume(out / "plume_drift", progress=report)
    else:
        write_demo_volumes(out, progress=report)


@reports_user_errors
def convert(
    source: Annotated[Path, typer.Argument(help=VOLUME_HELP)],
    target: Annotated[Path, typer.Argument(help="The NRRD file to write (.nrrd, gzip-compressed).")],
    spacing_mm: Annotated[Optional[str], typer.Option(help="For .npy, TIFF, zarr and HDF5: voxel spacing 'sx,sy,sz' in mm.")] = None,
):
    """Write any readable volume (NIfTI, DICOM series, TIFF, zarr, HDF5, ...) as NRRD with its world geometry.

    Origin, directions and space are kept, so the file can be checked in another program or loaded without
    converting again. Whole-numbered values (stored integers, Hounsfield units after a DICOM rescale) are
    written as the smallest integer type that holds them, others as float32."""
    from ..errors import UserError
    from ..volumes import load_volume
    from ..volumes.nrrd import write_nrrd

    if target.suffix.lower() != ".nrrd":
        raise UserError(f"{target}: the output must be a .nrrd file")
    spacing = _triple(spacing_mm, "--spacing-mm") if spacing_mm else None
    loaded = load_volume(source, spacing_mm=spacing, allow_nonfinite=True)
    import numpy as np

    data = loaded.data
    if np.all(np.isfinite(data)) and np.array_equal(data, np.round(data)):
        # whole numbers (stored integers, or Hounsfield units after a DICOM rescale) stay whole: the smallest
        # integer type that holds them, exact both ways
        low, high = float(data.min()), float(data.max())
        for kind in ("uint8", "int16", "uint16", "int32"):
            if np.iinfo(kind).min <= low and high <= np.iinfo(kind).max:
                data = data.astype(kind)
                break
    write_nrrd(target, data, loaded.origin, loaded.directions, space=loaded.space or "3D-right-handed")
    console.print(f"  wrote {escape(str(target))}  ({loaded.source_format}, {' x '.join(map(str, loaded.shape))} voxels, "
                  f"space {escape(loaded.space or '3D-right-handed')})")
    medical_note(volume=loaded)


def _triple(text: str, option: str) -> tuple[float, float, float]:
    from ..errors import UserError

    try:
        values = tuple(float(part) for part in text.split(","))
    except ValueError:
        raise UserError(f"{option}: expected three numbers like 0.5,0.5,1.0, got {text!r}")
    if len(values) != 3:
        raise UserError(f"{option}: expected three numbers like 0.5,0.5,1.0, got {text!r}")
    return values
