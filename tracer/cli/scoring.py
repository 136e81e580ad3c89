"""``score``, ``score-dataset`` and ``denoise``."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated, Optional

import typer

from rich.markup import escape

from .common import console, error_console, reports_user_errors, threads_option


def register(app: typer.Typer) -> None:
    app.command("score")(score)
    app.command("score-dataset")(score_dataset)
    app.command("denoise")(denoise)
    app.command("feature-study")(feature_study)
    app.command("score-sequence")(score_sequence)


def aligned_rows(rows) -> list[str]:
    """(label, value, unit, note) rows as lines whose values line up on the right and notes on the left."""
    widths = [max(len(row[k]) for row in rows) for k in range(3)]
    return [f"{label:<{widths[0]}}  {value:>{widths[1]}} {unit:<{widths[2]}}  {note}".rstrip()
            for label, value, unit, note in rows]


def _fmt(value, pattern="{:.2f}"):
    return "n/a" if value is None else pattern.format(value)


@reports_user_errors
def score(
    reference: Annotated[Path, typer.Argument(help="Reference render (.npz or .exr).")],
    candidate: Annotated[Path, typer.Argument(help="Image to score (.npz with 'radiance', or .exr).")],
    ladder: Annotated[Optional[list[Path]], typer.Option(help="Plain renders of the same view at 1, 2, 4, ... spp "
                      "(independent seeds), or a dataset item folder; repeat the option.")] = None,
    seconds: Annotated[Optional[float], typer.Option(help="The candidate's time: its input's render time plus the "
                       "denoiser's, for the speedup.")] = None,
    exposure: Annotated[float, typer.Option(help="Exposure in stops before the sRGB curve (PSNR, SSIM).")] = 0.0,
    covered_only: Annotated[bool, typer.Option("--covered-only", help="Score only pixels where the reference saw a scatter event.")] = False,
    json_out: Annotated[Optional[Path], typer.Option("--json", help="Write the scores as JSON here.")] = None,
    plot: Annotated[Optional[Path], typer.Option(help="Write PSNR against spp and an error heat map here (PNG).")] = None,
):
    """Score a denoised image against a reference: PSNR, SSIM, MSE, relative MSE, equal-quality spp.

    PSNR and SSIM are taken on the display-referred image (exposure, clamp, sRGB curve); MSE and
    relative MSE on linear radiance. With --ladder, the spp a plain render needs for the same PSNR;
    with --seconds, the speedup over rendering that many samples.
    """
    import json

    from ..io.atomic import atomic_path
    from ..scoring.score import plot_report, read_radiance, score_files

    report = score_files(reference, candidate, ladder=ladder or (), seconds=seconds, exposure=exposure,
                         covered_only=covered_only)
    s = report.scores
    console.print(f"[bold]{escape(candidate.name)}[/bold] against {escape(reference.name)} "
                  f"({s.n_pixels} {'covered ' if s.covered_only else ''}pixels, exposure {exposure:+g})")
    rows = [("PSNR", f"{s.psnr_db:.2f}", "dB", "display-referred, sRGB, peak 1"),
            ("SSIM", f"{s.ssim:.4f}", "", "Wang et al. 2004; 11x11 Gaussian window, sigma 1.5, K1 0.01, K2 0.03"),
            ("MSE", f"{s.mse:.4g}", "", "linear radiance"),
            ("relative MSE", f"{s.relative_mse:.4g}", "", "linear, / (reference^2 + 0.01)")]
    if report.ladder:
        rows.append(("equal quality", f"{report.equal_quality_spp:.1f}", "spp",
                     "extrapolated beyond the ladder" if report.extrapolated else "on the ladder's PSNR-log2(spp) line"))
        if report.speedup is not None:
            rows.append(("speedup", f"{report.speedup:.1f}", "x", f"{report.equal_quality_spp:.1f} spp x "
                         f"{report.seconds_per_spp:.3g} s/spp vs {report.candidate_seconds:.3g} s"))
    for line in aligned_rows(rows):
        console.print("  " + escape(line), highlight=False)
    if report.ladder:
        console.print("  ladder: " + ", ".join(f"{p.spp} spp {p.psnr_db:.2f} dB" for p in report.ladder), highlight=False)
    if report.no_speedup:
        console.print(f"  {report.no_speedup}", highlight=False)
    if json_out is not None:
        with atomic_path(json_out) as temporary:
            temporary.write_text(json.dumps(report.as_dict(), indent=2))
        console.print(f"  wrote {escape(str(json_out))}")
    if plot is not None:
        plot_report(report, read_radiance(reference)[0], read_radiance(candidate)[0], plot,
                    title=f"{candidate.name}", exposure=exposure)
        console.print(f"  wrote {escape(str(plot))}")


@reports_user_errors
def score_dataset(
    folder: Annotated[Path, typer.Argument(help="Dataset folder (with manifest.jsonl).")],
    predictions: Annotated[Path, typer.Option(help="Folder with ITEM_ID.npz (key 'radiance') or ITEM_ID.exr per item.")],
    input_spp: Annotated[Optional[int], typer.Option(help="The input spp the predictions were made from (adds its render time).")] = None,
    denoise_seconds: Annotated[Optional[float], typer.Option(help="The denoiser's time per item, for the speedup.")] = None,
    exposure: Annotated[float, typer.Option(help="Exposure in stops before the sRGB curve.")] = 0.0,
    covered_only: Annotated[bool, typer.Option("--covered-only", help="Score only covered pixels.")] = False,
    csv: Annotated[Optional[Path], typer.Option(help="Write per-item and per-split rows here (CSV).")] = None,
    json_out: Annotated[Optional[Path], typer.Option("--json", help="Write the whole result here (JSON): per-item scores "
                        "with their ladders, per-split aggregates; `tracer report` makes a page of it.")] = None,
):
    """Score a denoiser's predictions for every item of a dataset, with per-split aggregates."""
    import io

    from rich.table import Table

    from ..io.atomic import atomic_path
    from ..scoring.score import aggregate, dataset_result
    from ..scoring.score import score_dataset as run

    items = run(folder, predictions, input_spp=input_spp, denoise_seconds=denoise_seconds, exposure=exposure,
                covered_only=covered_only)
    summary = aggregate(items)
    table = Table(title=escape(f"{folder.name}: {len(items)} items"))
    for column in ("split", "items", "PSNR dB", "SSIM", "rel. MSE", "equal-quality spp", "speedup"):
        table.add_column(column, justify="right" if column != "split" else "left")
    for name, row in summary.items():
        table.add_row(name, str(row["items"]), f"{row['psnr_db']:.2f}", f"{row['ssim']:.4f}", f"{row['relative_mse']:.4g}",
                      _fmt(row["equal_quality_spp"], "{:.1f}"), _fmt(row["speedup"], "{:.1f}x"))
    console.print(table)
    if csv is not None:
        buffer = io.StringIO()
        buffer.write("kind,id,split,psnr_db,ssim,mse,relative_mse,equal_quality_spp,extrapolated,speedup\n")
        for item in items:
            r, s = item.report, item.report.scores
            buffer.write(f"item,{item.item_id},{item.split},{s.psnr_db:.4f},{s.ssim:.5f},{s.mse:.6g},{s.relative_mse:.6g},"
                         f"{_fmt(r.equal_quality_spp, '{:.3f}')},{r.extrapolated},{_fmt(r.speedup, '{:.3f}')}\n")
        for name, row in summary.items():
            buffer.write(f"split,,{name},{row['psnr_db']:.4f},{row['ssim']:.5f},,{row['relative_mse']:.6g},"
                         f"{_fmt(row['equal_quality_spp'], '{:.3f}')},,{_fmt(row['speedup'], '{:.3f}')}\n")
        with atomic_path(csv) as temporary:
            temporary.write_text(buffer.getvalue())
        console.print(f"wrote {escape(str(csv))}")
    if json_out is not None:
        import json

        result = dataset_result(folder, predictions, items, summary, input_spp=input_spp, denoise_seconds=denoise_seconds,
                                exposure=exposure, covered_only=covered_only)
        with atomic_path(json_out) as temporary:
            temporary.write_text(json.dumps(result, indent=1))
        console.print(f"wrote {escape(str(json_out))}")


@reports_user_errors
def denoise(
    input: Annotated[Path, typer.Argument(help="A render NPZ with its feature buffers, or a folder of sequence "
                     "frames (frame0000.npz, ... from tracer sequence).")],
    out: Annotated[Path, typer.Option("--out", help="Output NPZ (a PNG preview is written beside it), or a folder "
                   "for a sequence.")],
    color_only: Annotated[bool, typer.Option("--color-only", help="Filter without the feature buffers (radiance and variance only).")] = False,
    iterations: Annotated[int, typer.Option(min=1, max=10, help="a-trous passes (holes 1, 2, 4, ...).")] = 5,
    sigma_luminance: Annotated[float, typer.Option(help="Luminance edge-stopping, in noise standard deviations.")] = 4.0,
    sigma_normal: Annotated[float, typer.Option(help="Normal edge-stopping (0: off).")] = 0.35,
    sigma_albedo: Annotated[float, typer.Option(help="Albedo edge-stopping (0: off).")] = 0.1,
    sigma_depth: Annotated[float, typer.Option(help="Depth edge-stopping, relative to the local depth gradient (0: off).")] = 0.0,
    sigma_position: Annotated[float, typer.Option(help="Position edge-stopping in mm (0: off).")] = 0.0,
    exposure: Annotated[float, typer.Option(help="Exposure in stops for the PNG preview.")] = 0.0,
    temporal_alpha: Annotated[Optional[float], typer.Option(help="For a sequence: blend the previous output, warped "
                              "by the motion vectors, where nothing is disoccluded: alpha x this frame + (1 - alpha) x "
                              "previous (Schied et al. 2017 use 0.2).")] = None,
    threads: threads_option = None,
):
    """Filter a render with the classical feature-guided baseline (edge-avoiding a-trous wavelets).

    The filter of Dammertz et al. (2010) stops at edges of normals, albedo, depth or positions and is
    guided by the variance buffer; --color-only filters with radiance and variance alone. Given a
    folder of sequence frames it filters every frame, and with --temporal-alpha it is the temporal
    baseline: an exponential moving average of the reprojected previous output.
    """
    from ..rendering.buffers import Frame
    from ..scoring.denoise import DenoiseSettings
    from ..scoring.denoise import denoise as run
    from ..outputs.npz import read_npz, write_npz
    from ..outputs.png import write_preview
    from ..outputs.save import check_output_folder

    from ..config import check_threads

    check_threads(threads)
    settings = DenoiseSettings(iterations=iterations, sigma_luminance=sigma_luminance, sigma_normal=sigma_normal,
                               sigma_albedo=sigma_albedo, sigma_depth=sigma_depth, sigma_position_mm=sigma_position,
                               color_only=color_only)
    if input.is_dir():
        from ..sequence.temporal import denoise_sequence, frame_paths

        frame_paths(input)
        check_output_folder(out)
        written = denoise_sequence(input, out, alpha=temporal_alpha, settings=settings, threads=threads)
        kind = "spatial" if temporal_alpha is None else f"spatial, then temporal (alpha {temporal_alpha:g})"
        console.print(f"filtered {len(written)} frames ({kind}) into {escape(str(out))}")
        return
    if temporal_alpha is not None:
        from ..errors import UserError

        raise UserError("--temporal-alpha: needs a folder of sequence frames, not one render")
    frame = read_npz(input)
    target = out if out.suffix == ".npz" else out.with_name(out.name + ".npz")
    check_output_folder(target.parent)
    result = run(frame, settings, threads=threads)
    buffers = dict(frame.buffers)
    buffers["radiance"] = result.radiance
    meta = dict(frame.meta)
    meta.pop("source_file", None)
    meta["denoised"] = {"method": "a-trous (Dammertz et al. 2010)", "color_only": color_only,
                        "seconds": round(result.seconds, 4), "variance": result.variance_source,
                        "settings": settings.__dict__}
    write_npz(target, Frame(buffers=buffers, meta=meta))
    write_preview(target.with_suffix(".png"), result.radiance, exposure)
    if result.compile_seconds >= 0.05:
        console.print(f"compiled the filter in {result.compile_seconds:.1f} s (first run only; not in the filter time)")
    console.print(f"filtered {escape(input.name)} in {result.seconds:.3f} s "
                  f"({'colour only' if color_only else 'feature-guided'}, noise from the {result.variance_source} variance)")
    console.print(f"  wrote {escape(str(target))}")


@reports_user_errors
def feature_study(
    folder: Annotated[Path, typer.Argument(help="Dataset folder (with manifest.jsonl).")],
    out: Annotated[Path, typer.Option("--out", help="Folder for study.txt, study.csv, noise.csv, study.json, study.png.")],
    spp: Annotated[int, typer.Option(help="Filter each item's input of this spp (it must be on the ladder).")] = 1,
    sets: Annotated[Optional[Path], typer.Option(help="A TOML file of extra guide sets: [[sets]] name = \"...\", "
                    "buffers = [\"event1_normal\", ...].")] = None,
    threads: threads_option = None,
):
    """Which guide buffers help the baseline filter on this dataset, and how noisy each buffer is.

    Runs the a-trous baseline on every item's input with each guide set (colour only, + normal,
    + albedo, + depth, + event 2, + each candidate feature the inputs hold, all, and --sets),
    scores it against the references (PSNR, SSIM, equal-quality spp, per split) and ranks the
    sets; the noise report gives each feature buffer's relative noise against its converged value
    and how well its edges line up with the reference radiance's.
    """
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn

    from ..config import check_threads
    from ..outputs.save import check_output_folder
    from ..scoring.study import run_study, study_plan, study_text, write_study

    check_threads(threads)
    study_plan(folder, spp, sets)                 # every check before any work
    check_output_folder(out)
    with Progress(TextColumn("[bold]items"), BarColumn(), MofNCompleteColumn(), TimeElapsedColumn(),
                  console=error_console, transient=True) as progress:
        task = progress.add_task("items", total=None)
        result = run_study(folder, spp=spp, sets_path=sets, threads=threads,
                           on_progress=lambda done, total: progress.update(task, completed=done, total=total))
    console.print(escape(study_text(result)), highlight=False)
    for path in write_study(result, out):
        console.print(f"wrote {escape(str(path))}")


@reports_user_errors
def score_sequence(
    reference: Annotated[Path, typer.Argument(help="Folder of reference frames from tracer sequence (with motion).")],
    candidate: Annotated[Path, typer.Argument(help="Folder of candidate frames of the same names (key 'radiance').")],
    exposure: Annotated[float, typer.Option(help="Exposure in stops before the sRGB curve.")] = 0.0,
    json_out: Annotated[Optional[Path], typer.Option("--json", help="Write the per-frame figures here (JSON).")] = None,
    csv: Annotated[Optional[Path], typer.Option(help="Write the per-frame figures here (CSV).")] = None,
    plot: Annotated[Optional[Path], typer.Option(help="Plot PSNR, temporal PSNR and flicker over the frames (PNG).")] = None,
    gif: Annotated[Optional[Path], typer.Option(help="An animated GIF: --inputs (if given), the candidate and the "
                   "reference side by side.")] = None,
    inputs: Annotated[Optional[Path], typer.Option(help="Folder of the noisy input frames, for --gif.")] = None,
):
    """Score a sequence: per-frame PSNR/SSIM, temporal PSNR of frame differences, and reprojected flicker.

    Temporal PSNR compares candidate[t] - candidate[t-1] with reference[t] - reference[t-1] over
    pixels the reference marks as not disoccluded; the flicker figure does the same after warping the
    previous frames by the reference's motion vectors.
    """
    import json

    from ..io.atomic import atomic_path
    from ..sequence.temporal import score_sequence as run
    from ..sequence.temporal import write_preview_gif

    result = run(reference, candidate, exposure=exposure)

    def fmt(value, pattern="{:.2f}"):
        return "n/a" if value is None else pattern.format(value)
    console.print(f"{len(result['frames'])} frames: PSNR {fmt(result['mean']['psnr_db'])} dB, SSIM "
                  f"{fmt(result['mean']['ssim'], '{:.4f}')}, temporal PSNR {fmt(result['mean']['temporal_psnr_db'])} dB, "
                  f"reprojected flicker PSNR {fmt(result['mean']['flicker_psnr_db'])} dB (means over frames)")
    if json_out is not None:
        with atomic_path(json_out) as temporary:
            temporary.write_text(json.dumps(result, indent=1))
        console.print(f"wrote {escape(str(json_out))}")
    if csv is not None:
        lines = ["frame,psnr_db,ssim,temporal_psnr_db,flicker_psnr_db"]
        lines += [f"{f['frame']},{f['psnr_db']:.4f},{f['ssim']:.5f},{fmt(f['temporal_psnr_db'], '{:.4f}')},"
                  f"{fmt(f['flicker_psnr_db'], '{:.4f}')}" for f in result["frames"]]
        with atomic_path(csv) as temporary:
            temporary.write_text("\n".join(lines) + "\n")
        console.print(f"wrote {escape(str(csv))}")
    if plot is not None:
        _plot_sequence(result, plot)
        console.print(f"wrote {escape(str(plot))}")
    if gif is not None:
        columns = ([("input", inputs)] if inputs is not None else []) + [("candidate", candidate), ("reference", reference)]
        write_preview_gif(gif, columns, exposure=exposure)
        console.print(f"wrote {escape(str(gif))} ({', '.join(label for label, _ in columns)}, left to right)")


def _plot_sequence(result: dict, path: Path) -> None:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from ..io.atomic import atomic_path

    frames = [f["frame"] for f in result["frames"]]
    figure, axis = plt.subplots(figsize=(7, 3.6))
    for key, label, colour in (("psnr_db", "PSNR", "#c9822f"), ("temporal_psnr_db", "temporal PSNR", "#2f7f8a"),
                               ("flicker_psnr_db", "reprojected flicker PSNR", "#8a5a9e")):
        values = [f[key] for f in result["frames"]]
        axis.plot([x for x, v in zip(frames, values) if v is not None], [v for v in values if v is not None],
                  marker="o", label=label, color=colour)
    axis.set_xlabel("frame")
    axis.set_ylabel("dB")
    axis.legend()
    figure.tight_layout()
    with atomic_path(path) as temporary:
        figure.savefig(temporary, dpi=100, format="png")
    plt.close(figure)
