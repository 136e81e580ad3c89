"""``preview``, ``render`` and ``pool``."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated, Optional

import typer

from rich.markup import escape

from .common import (FORMER, check_cluster_options, console, error_console, former_command, former_option, medical_note,
                     reports_user_errors, threads_option)


def register(app: typer.Typer) -> None:
    app.command("preview")(preview)
    app.command("render")(render)
    app.command("pool")(pool)
    app.command("sequence")(sequence)
    app.command("merge", hidden=True, context_settings=FORMER)(former_command("merge", "pool"))


@reports_user_errors
def render(
    scene: Annotated[Path, typer.Argument(help="Scene TOML file.")],
    spp: Annotated[Optional[int], typer.Option(help="Samples per pixel (the cap when --target-error is given).")] = None,
    seed: Annotated[Optional[int], typer.Option(help="Seed of the counter-based generator.")] = None,
    first_sample: Annotated[int, typer.Option(min=0, help="Index of the first sample; renders of one seed over disjoint ranges pool (`tracer pool`) into the render of their union, to float32 rounding.")] = 0,
    out: Annotated[Path, typer.Option("--out", help="Output folder.")] = Path("renders"),
    name: Annotated[Optional[str], typer.Option(help="Base name of the files (default: the scene's file name).")] = None,
    format: Annotated[str, typer.Option("--format", help="Comma-separated: npz (always written), exr, png.")] = "npz,png",
    width: Annotated[Optional[int], typer.Option(help="Image width in pixels.")] = None,
    height: Annotated[Optional[int], typer.Option(help="Image height in pixels.")] = None,
    bounces: Annotated[Optional[int], typer.Option(help="Most scattering events per path (1 = single scattering; the scene's [render] bounces otherwise).")] = None,
    estimator: Annotated[Optional[str], typer.Option(help='"march" (stratified events, marched shadow rays) or "track" (delta and ratio tracking: no step bias); the scene\'s [render] estimator otherwise.')] = None,
    target_error: Annotated[Optional[float], typer.Option(help="Stop when the mean relative standard error of radiance over covered pixels is at most this (e.g. 0.01).")] = None,
    time_limit: Annotated[Optional[float], typer.Option(help="Stop after the pass that crosses this many seconds.")] = None,
    checkpoint_every: Annotated[Optional[float], typer.Option(help="Write a checkpoint every this many seconds.")] = None,
    resume: Annotated[bool, typer.Option("--resume", help="Continue from the checkpoint in --out (bit-exact).")] = False,
    sheet: Annotated[bool, typer.Option("--sheet", help="Also write NAME.sheet.png with every buffer, labelled.")] = False,
    exposure: Annotated[float, typer.Option(help="Exposure in stops for the PNG preview and sheet.")] = 0.0,
    per_sample: Annotated[Optional[int], typer.Option("--per-sample", help="Also write the first S samples of every "
                          "pixel one by one, to OUT/NAME.samples/ (one .npy per buffer, (S, H, W[, C]), read lazily "
                          "with numpy.load(..., mmap_mode='r')).")] = None,
    workers: Annotated[Optional[int], typer.Option(help="Spread the samples over a local Dask cluster of this many "
                       "worker processes (in chunks of --chunk-spp, pooled in chunk order).")] = None,
    scheduler: Annotated[Optional[str], typer.Option(help="Spread the samples over an existing Dask cluster, "
                         "tcp://HOST:PORT (every worker must see the scene's files at the same paths).")] = None,
    chunk_spp: Annotated[Optional[int], typer.Option(help="Samples per chunk (default: four chunks per worker); "
                         "alone, renders the chunks here, bit-identical to the cluster render with the same chunks.")] = None,
    threads: threads_option = None,
    sample_offset: Annotated[Optional[int], typer.Option("--sample-offset", hidden=True)] = None,
):
    """Path-trace a scene and write its buffers (NPZ always; EXR and PNG as asked).

    Ctrl-C writes what is done as a valid render with its true spp (and a checkpoint to --resume from).
    With --workers or --scheduler the sample range is cut into chunks rendered on the cluster.
    """
    from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn, TimeRemainingColumn

    from ..outputs.save import check_output_folder, parse_formats, save_frame
    from ..rendering.passes import describe_stop
    from ..rendering.passes import render as render_scene
    from ..scene import load_scene

    from ..config import check_threads

    former_option("--sample-offset", sample_offset, "--first-sample")
    check_threads(threads)
    formats = parse_formats(format)
    loaded = load_scene(scene).with_overrides(spp=spp, seed=seed, width=width, height=height, bounces=bounces,
                                              estimator=estimator)
    name = name or scene.stem
    checkpoint = out / f"{name}.checkpoint.npz"
    checkpoint_path = checkpoint      # written every --checkpoint-every seconds, and always on Ctrl-C
    if checkpoint_every is not None and checkpoint_every <= 0:
        from ..errors import UserError

        raise UserError(f"--checkpoint-every: must be > 0 seconds, got {checkpoint_every}")
    check_output_folder(out)
    if resume and not checkpoint.exists():
        from ..errors import UserError

        raise UserError(f"{checkpoint}: no checkpoint to resume from (render with --checkpoint-every first)")
    distributed = workers is not None or scheduler is not None or chunk_spp is not None
    if distributed:
        from ..errors import UserError

        check_cluster_options(workers, scheduler, threads)
        if chunk_spp is not None and chunk_spp < 1:
            raise UserError(f"--chunk-spp: must be at least 1, got {chunk_spp}")
        for given, option in ((per_sample, "--per-sample"), (time_limit, "--time-limit")):
            if given is not None:
                raise UserError(f"{option}: not available for a render in chunks (--workers, --scheduler, --chunk-spp)")
    writer = None
    if per_sample is not None:
        from ..errors import UserError
        from ..outputs.samples import SampleWriter

        if target_error is not None or time_limit is not None:
            raise UserError("--per-sample: needs a fixed --spp, not --target-error or --time-limit")
        writer = SampleWriter(out, name, per_sample)
    if checkpoint_path is not None:
        out.mkdir(parents=True, exist_ok=True)
    cam = loaded.camera
    total = loaded.settings.spp
    columns = [TextColumn("[bold]{task.description}"), BarColumn(), TextColumn("{task.fields[status]}"),
               TimeElapsedColumn(), TextColumn("eta"), TimeRemainingColumn()]
    with Progress(*columns, console=error_console, transient=True) as progress:
        task = progress.add_task(escape(f"{name} {cam.width}x{cam.height}"), total=None if target_error else total,
                                 status="compiling kernels (first run only)")

        def report(state):
            seconds = max(state.elapsed_seconds, 1e-9)
            status = f"{state.spp_done}/{state.spp_total} spp, {state.samples_done / seconds / 1e6:.2f} M paths/s"
            if state.relative_error is not None:
                status += f", rel. error {state.relative_error:.4f}"
            progress.update(task, completed=state.spp_done, status=status)

        if distributed:
            from ..distributed.render import default_chunk_spp, render_chunked
            from ..rendering.passes import spp_cap

            chunk = chunk_spp or default_chunk_spp(spp_cap(loaded.settings.spp, spp, target_error is not None), workers or 1)
            progress.update(task, status="starting the cluster" if workers or scheduler else "")
            frame = render_chunked(scene, overrides=dict(spp=spp, seed=seed, width=width, height=height, bounces=bounces,
                                                         estimator=estimator),
                                   chunk_spp=chunk, first_sample=first_sample, target_error=target_error,
                                   workers=workers, scheduler=scheduler, numba_threads=threads,
                                   checkpoint_path=checkpoint_path, resume=resume, on_progress=report)
        else:
            frame = render_scene(loaded, spp=spp, first_sample=first_sample, target_error=target_error,
                                 time_limit=time_limit, threads=threads, on_progress=report,
                                 checkpoint_path=checkpoint_path, checkpoint_every=checkpoint_every, resume=resume,
                                 per_sample=writer)
        progress.update(task, completed=frame.spp, total=frame.spp if target_error else total)
    paths = save_frame(frame, out, name, formats, exposure, sheet)
    if writer is not None:
        if frame.meta["stopped"] == "interrupted" and writer.written < writer.count:
            writer.abort()
            error_console.print("[yellow]note:[/yellow] the per-sample output was not finished, so it was not written")
        else:
            paths.append(writer.finish())
    medical_note(loaded)
    meta = frame.meta
    if meta["compile_seconds"] >= 0.05:
        console.print(f"compiled kernels in {meta['compile_seconds']:.1f} s (first run only; not in the render time)")
    seconds = meta["render_seconds"]
    line = f"{describe_stop(meta)} in " + (f"{seconds:.2f} s" if seconds >= 0.1 else f"{1000 * seconds:.0f} ms")
    if "relative_error" in meta:
        line += f", mean relative error {meta['relative_error']:.4f}"
    console.print(line)
    for path in paths:
        console.print(f"  wrote {escape(str(path))}")
    if meta["stopped"] == "interrupted":
        error_console.print(f"[yellow]interrupted:[/yellow] wrote the {frame.spp} spp done; "
                            f"continue with --resume (checkpoint {escape(str(checkpoint))})")
        raise typer.Exit(code=130)


@reports_user_errors
def preview(
    scene: Annotated[Path, typer.Argument(help="Scene TOML file.")],
    spp: Annotated[int, typer.Option(min=1, help="Samples per pixel of the preview.")] = 4,
    out: Annotated[Path, typer.Option("--out", help="Output folder.")] = Path("renders"),
    name: Annotated[Optional[str], typer.Option(help="Base name (default: SCENE.preview).")] = None,
    exposure: Annotated[float, typer.Option(help="Exposure in stops for the PNG.")] = 0.0,
    width: Annotated[Optional[int], typer.Option(help="Width of the full render the preview stands for (the preview is a quarter of it).")] = None,
    height: Annotated[Optional[int], typer.Option(help="Height of the full render the preview stands for.")] = None,
    threads: threads_option = None,
):
    """A quarter-resolution, few-spp render in seconds, with the predicted time of the full render."""
    from ..outputs.png import write_preview
    from ..outputs.save import check_output_folder
    from ..rendering.preview import preview_scene
    from ..scene import load_scene

    from ..config import check_threads

    check_threads(threads)
    loaded = load_scene(scene).with_overrides(width=width, height=height)
    check_output_folder(out)
    frame, per_spp, predicted = preview_scene(loaded, spp=spp, threads=threads)
    path = write_preview(out / f"{name or scene.stem + '.preview'}.png", frame["radiance"], exposure)
    cam = loaded.camera
    console.print(f"preview {frame.meta['width']}x{frame.meta['height']} at {spp} spp")
    console.print(f"  cost at full size {cam.width}x{cam.height}: {per_spp:.3f} s per spp")
    console.print(f"  predicted full render at {loaded.settings.spp} spp: {_duration(predicted)}")
    console.print(f"  wrote {escape(str(path))}")
    medical_note(loaded)


@reports_user_errors
def pool(
    inputs: Annotated[list[Path], typer.Argument(help="Render NPZ files of one scene and seed, disjoint sample ranges.")],
    out: Annotated[Path, typer.Option("--out", help="Output path (NAME or NAME.npz); a PNG preview is written beside it.")],
):
    """Pool renders of one scene and seed over disjoint sample ranges into the render of their union.

    The result equals one render over all those samples (up to float32 rounding of the stored means):
    render `--first-sample 0 --spp 64` on one machine and `--first-sample 64 --spp 64` on another, then pool.
    """
    from ..rendering.accumulate import merge_frames
    from ..outputs.npz import read_npz, write_npz
    from ..outputs.png import write_preview

    from ..outputs.save import check_output_folder

    check_output_folder(out.parent)
    frames = [read_npz(path) for path in inputs]
    merged = merge_frames(frames)
    target = out if out.suffix == ".npz" else out.with_name(out.name + ".npz")
    write_npz(target, merged)
    write_preview(target.with_suffix(".png"), merged["radiance"])
    console.print(f"pooled {len(frames)} renders: {merged.spp} spp, samples {merged.meta['merged_from']}")
    console.print(f"  wrote {escape(str(target))}")


def _duration(seconds: float) -> str:
    if seconds < 120:
        return f"{seconds:.1f} s"
    if seconds < 7200:
        return f"{seconds / 60:.1f} min"
    return f"{seconds / 3600:.1f} h"


@reports_user_errors
def sequence(
    scene: Annotated[Path, typer.Argument(help="Scene TOML file with a [sequence] camera path.")],
    out: Annotated[Path, typer.Option("--out", help="Folder for frame0000.npz, frame0001.npz, ...")],
    frames: Annotated[Optional[int], typer.Option(help="Number of frames (default: the path's `frames`).")] = None,
    spp: Annotated[Optional[int], typer.Option(help="Samples per pixel of every frame.")] = None,
    seed: Annotated[Optional[int], typer.Option(help="Seed of the sequence.")] = None,
    width: Annotated[Optional[int], typer.Option(help="Frame width in pixels.")] = None,
    height: Annotated[Optional[int], typer.Option(help="Frame height in pixels.")] = None,
    same_noise: Annotated[bool, typer.Option("--same-noise", help="Give every frame the same sample indices "
                          "(default: each frame its own range, independent noise).")] = False,
    resume: Annotated[bool, typer.Option("--resume", help="Keep the frames a killed run finished and render the rest "
                      "(the same bits as an uninterrupted run).")] = False,
    threads: threads_option = None,
):
    """Render a camera path frame by frame, with motion vectors and disocclusion, for temporal denoisers.

    Each frame holds every buffer of a single render plus `motion` and `motion_event2` (H, W, 2:
    pixel offsets x right, y down, to where the frame's mean event point was on the previous image),
    `disocclusion` (H, W: the fraction of samples not visible on the previous frame), and its camera
    matrices in meta.
    """
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn

    from ..config import check_threads
    from ..io.tomlfile import read_toml
    from ..outputs.save import check_output_folder
    from ..scene.parse import parse_scene
    from ..sequence.path import parse_path
    from ..sequence.render import render_sequence

    check_threads(threads)
    data = read_toml(scene)
    loaded = parse_scene(data, scene).with_overrides(spp=spp, seed=seed, width=width, height=height)
    path = parse_path(data, scene, loaded.camera, frames)
    check_output_folder(out)
    with Progress(TextColumn("[bold]frames"), BarColumn(), MofNCompleteColumn(), TimeElapsedColumn(),
                  console=error_console, transient=True) as progress:
        task = progress.add_task("frames", total=path.frames)
        written = render_sequence(loaded, path, out, spp=spp, same_noise=same_noise, resume=resume, threads=threads,
                                  on_frame=lambda done, total: progress.update(task, completed=done))
    medical_note(loaded)
    console.print(f"{len(written)} frames of {path.kind} path in {escape(str(out))}")
