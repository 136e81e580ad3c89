"""Scoring a denoiser in the field's terms: quality against the reference, the sample count a
plain render needs for the same quality, and the speedup over rendering that many samples.

Equal-quality spp: PSNR of plain renders grows linearly in log2(spp) (about 3.01 dB per
doubling, since Monte Carlo error falls as 1/sqrt(N)). The candidate's PSNR is placed on the
ladder's PSNR-against-log2(spp) polyline by linear interpolation; beyond the ladder's ends the
nearest segment's slope extends it (and the result is flagged as extrapolated).
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..errors import UserError
from .metrics import Scores, score


@dataclass(frozen=True)
class LadderPoint:
    spp: int
    psnr_db: float
    seconds: float | None = None


@dataclass
class ScoreReport:
    scores: Scores
    ladder: list[LadderPoint] = field(default_factory=list)
    equal_quality_spp: float | None = None
    extrapolated: bool = False
    seconds_per_spp: float | None = None
    candidate_seconds: float | None = None
    no_speedup: str | None = None      # why a speedup asked for cannot be given, in words

    @property
    def speedup(self) -> float | None:
        if self.equal_quality_spp is None or self.seconds_per_spp is None or not self.candidate_seconds:
            return None
        return self.equal_quality_spp * self.seconds_per_spp / self.candidate_seconds

    def as_dict(self) -> dict:
        return {"scores": self.scores.as_dict(),
                "ladder": [{"spp": p.spp, "psnr_db": p.psnr_db, "seconds": p.seconds} for p in self.ladder],
                "equal_quality_spp": self.equal_quality_spp, "extrapolated": self.extrapolated,
                "seconds_per_spp": self.seconds_per_spp, "candidate_seconds": self.candidate_seconds,
                "speedup": self.speedup, **({"no_speedup": self.no_speedup} if self.no_speedup else {})}


def equal_quality_spp(spps, psnrs, target: float) -> tuple[float, bool]:
    """The spp at which the ladder reaches ``target`` dB; returns (spp, extrapolated)."""
    points = sorted(zip(spps, psnrs))
    if len(points) < 2:
        raise UserError("ladder: needs renders at two or more different spp")
    x = np.log2([p[0] for p in points])
    y = np.array([p[1] for p in points], dtype=np.float64)
    if len(set(x)) != len(x):
        raise UserError("ladder: two renders have the same spp")
    for k in range(len(x) - 1):
        low, high = min(y[k], y[k + 1]), max(y[k], y[k + 1])
        if low <= target <= high and y[k + 1] != y[k]:
            return float(2 ** (x[k] + (target - y[k]) / (y[k + 1] - y[k]) * (x[k + 1] - x[k]))), False
    if target < y[0]:
        k = 0
    else:
        k = len(x) - 2
    slope = (y[k + 1] - y[k]) / (x[k + 1] - x[k])
    if slope <= 0:
        slope = 10 * math.log10(2)
    anchor = 0 if target < y[0] else len(x) - 1
    return float(2 ** (x[anchor] + (target - y[anchor]) / slope)), True


def read_radiance(path) -> tuple[np.ndarray, dict, dict]:
    """Radiance (H, W, 3) from an NPZ (key ``radiance``) or EXR (``R``, ``G``, ``B``), its other
    arrays and its meta (empty when absent)."""
    path = Path(path)
    if path.suffix.lower() == ".exr":
        from ..outputs.exr import read_exr_channels

        channels, header = read_exr_channels(path)
        if not all(c in channels for c in "RGB"):
            raise UserError(f"{path}: needs R, G and B channels")
        radiance = np.stack([channels[c] for c in "RGB"], axis=-1).astype(np.float64)
        meta = json.loads(header["tracer_meta"]) if "tracer_meta" in header else {}
        others = {"alpha": channels["A"]} if "A" in channels else {}
        if "event1.hit.Y" in channels:
            others["event1_hit"] = channels["event1.hit.Y"]
        return radiance, others, meta
    if path.suffix.lower() != ".npz":
        raise UserError(f"{path}: expected an .npz or .exr image")
    from ..outputs.npz import load_arrays

    contents = load_arrays(path)
    if "radiance" not in contents:
        raise UserError(f"{path}: radiance: missing (an NPZ candidate needs a 'radiance' array of shape (H, W, 3))")
    radiance = contents.pop("radiance")
    if radiance.ndim != 3 or radiance.shape[2] != 3:
        raise UserError(f"{path}: radiance: expected shape (H, W, 3), got {radiance.shape}")
    meta = json.loads(str(contents.pop("meta"))) if "meta" in contents else {}
    return radiance.astype(np.float64), contents, meta


def ladder_paths(entries) -> list[Path]:
    """Expand ``--ladder`` entries: files as given, and a folder's ``spp*.npz`` (a dataset item)."""
    paths = []
    for entry in entries:
        entry = Path(entry)
        if entry.is_dir():
            found = sorted(p for p in entry.glob("spp*.npz") if p.stem[3:].isdigit())   # not the *_pair twins
            if not found:
                raise UserError(f"{entry}: no spp*.npz renders in this folder")
            paths.extend(found)
        else:
            paths.append(entry)
    return paths


def manifest_seconds(path) -> float | None:
    """The render time the dataset manifest records for ``path`` when it is a file of a dataset item
    (``DIR/items/ITEM_ID/NAME``; the files themselves carry no timings), else None."""
    from ..dataset.manifest import read_manifest

    path = Path(path).resolve()
    item_folder = path.parent
    dataset = item_folder.parent.parent
    if item_folder.parent.name != "items" or not (dataset / "manifest.jsonl").is_file():
        return None
    for record in read_manifest(dataset):
        if record.get("id") == item_folder.name:
            entry = record.get("files", {}).get(path.name)
            return None if entry is None else entry.get("seconds")
    return None


def score_files(reference_path, candidate_path, *, ladder=(), seconds: float | None = None, exposure: float = 0.0,
                covered_only: bool = False) -> ScoreReport:
    """Score one candidate against a reference, and place it on ``ladder`` when given.

    Ladder render times come from each file's ``render_seconds``, or, for the files of a dataset
    item, from the dataset's manifest. ``report.no_speedup`` says in words why a speedup asked for
    with ``seconds`` cannot be given.
    """
    reference, reference_arrays, _ = read_radiance(reference_path)
    candidate, _, _ = read_radiance(candidate_path)
    if candidate.shape != reference.shape:
        raise UserError(f"{candidate_path}: shape {candidate.shape} differs from the reference's {reference.shape}")
    mask = _coverage(reference_arrays, reference_path) if covered_only else None
    report = ScoreReport(scores=score(reference, candidate, exposure=exposure, mask=mask))
    paths = ladder_paths(ladder)
    if paths:
        points = []
        for path in paths:
            image, _, meta = read_radiance(path)
            if image.shape != reference.shape:
                raise UserError(f"{path}: shape {image.shape} differs from the reference's {reference.shape}")
            if "spp" not in meta:
                raise UserError(f"{path}: meta: no spp recorded; ladder renders must come from tracer")
            render_seconds = meta.get("render_seconds")
            if render_seconds is None:
                render_seconds = manifest_seconds(path)
            points.append(LadderPoint(int(meta["spp"]), score(reference, image, exposure=exposure, mask=mask).psnr_db,
                                      render_seconds))
        add_ladder(report, points, seconds)
        if seconds is not None and report.seconds_per_spp is None:
            report.no_speedup = ("no speedup: the ladder renders record no render time (neither in their meta "
                                 "nor in a dataset manifest beside them)")
    elif seconds is not None:
        raise UserError("--seconds: needs --ladder to turn quality into a sample count")
    return report


def add_ladder(report: ScoreReport, points: list[LadderPoint], candidate_seconds: float | None) -> None:
    report.ladder = sorted(points, key=lambda p: p.spp)
    report.equal_quality_spp, report.extrapolated = equal_quality_spp(
        [p.spp for p in points], [p.psnr_db for p in points], report.scores.psnr_db)
    timed = [p for p in points if p.seconds]
    if timed:
        report.seconds_per_spp = sum(p.seconds for p in timed) / sum(p.spp for p in timed)
    report.candidate_seconds = candidate_seconds


def _coverage(arrays: dict, path) -> np.ndarray:
    if "event1_hit" in arrays:
        return np.asarray(arrays["event1_hit"]) > 0
    if "alpha" in arrays:
        return np.asarray(arrays["alpha"]) > 0
    raise UserError(f"{path}: --covered-only needs the reference's event1_hit or alpha buffer")


def plot_report(report: ScoreReport, reference, candidate, path, title: str = "", exposure: float = 0.0,
                extra_points: dict | None = None) -> None:
    """PSNR against spp (log axis) with the candidate marked, and an error heat map."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from ..io.atomic import atomic_path
    from ..outputs.png import to_display

    panels = 2 if report.ladder else 1
    figure, axes = plt.subplots(1, panels, figsize=(5.2 * panels, 4.2), squeeze=False, layout="constrained")
    if report.ladder:
        axis = axes[0, 0]
        spps = [p.spp for p in report.ladder]
        axis.plot(spps, [p.psnr_db for p in report.ladder], "o-", color="0.3", label="plain renders")
        if report.equal_quality_spp is not None:
            axis.plot([report.equal_quality_spp], [report.scores.psnr_db], "*", ms=16, color="tab:red",
                      label=f"candidate: as good as {report.equal_quality_spp:.1f} spp"
                            + (" (extrapolated)" if report.extrapolated else ""))
        for label, (spp, psnr_value) in (extra_points or {}).items():
            axis.plot([spp], [psnr_value], "D", ms=9, color="tab:blue", label=f"{label}: {spp:.1f} spp")
        axis.set_xscale("log", base=2)
        axis.set_xlabel("samples per pixel")
        axis.set_ylabel("PSNR against the reference (dB)")
        axis.grid(True, which="both", alpha=0.3)
        axis.legend(fontsize=8, loc="lower right")
    error = np.abs(to_display(candidate, exposure) - to_display(reference, exposure)).mean(axis=2)
    heat = axes[0, -1].imshow(error, cmap="inferno", vmin=0, vmax=max(float(np.percentile(error, 99.5)), 1e-6))
    axes[0, -1].set_title("absolute error (display-referred)", fontsize=9)
    axes[0, -1].set_axis_off()
    figure.colorbar(heat, ax=axes[0, -1], fraction=0.046)
    if title:
        figure.suptitle(title, fontsize=10)
    with atomic_path(path) as temporary:
        figure.savefig(temporary, dpi=100, format="png")
    plt.close(figure)


@dataclass
class ItemScore:
    item_id: str
    split: str
    report: ScoreReport


def score_dataset(folder, predictions, *, input_spp: int | None = None, denoise_seconds: float | None = None,
                  exposure: float = 0.0, covered_only: bool = False) -> list[ItemScore]:
    """Score ``PREDICTIONS/ITEM_ID.npz`` (or ``.exr``) against each item's reference, with the item's
    own input renders as the ladder. The candidate's time is the render time of its ``input_spp``
    input (from the manifest) plus ``denoise_seconds``."""
    from ..dataset.manifest import npz_entries, read_manifest

    folder, predictions = Path(folder), Path(predictions)
    records = read_manifest(folder)
    if not records:
        raise UserError(f"{folder}: no finished items (manifest.jsonl is missing or empty)")
    from ..dataset.manifest import refuse_sequences

    refuse_sequences(folder, records, "score-dataset")
    if not predictions.is_dir():
        raise UserError(f"{predictions}: prediction folder not found")
    results = []
    for record in records:
        candidates = [predictions / f"{record['id']}{suffix}" for suffix in (".npz", ".exr")]
        candidate = next((p for p in candidates if p.is_file()), None)
        if candidate is None:
            raise UserError(f"{candidates[0]}: prediction missing for item {record['id']}")
        reference_entry = npz_entries(record, "reference")[0]
        reference, reference_arrays, _ = read_radiance(folder / reference_entry["path"])
        image, _, _ = read_radiance(candidate)
        if image.shape != reference.shape:
            raise UserError(f"{candidate}: shape {image.shape} differs from the reference's {reference.shape}")
        mask = _coverage(reference_arrays, reference_entry["path"]) if covered_only else None
        report = ScoreReport(scores=score(reference, image, exposure=exposure, mask=mask))
        inputs = npz_entries(record, "input")
        points = [LadderPoint(e["spp"], score(reference, read_radiance(folder / e["path"])[0], exposure=exposure,
                                              mask=mask).psnr_db, e.get("seconds")) for e in inputs]
        seconds = None
        if input_spp is not None:
            match = [e for e in inputs if e["spp"] == input_spp]
            if not match:
                raise UserError(f"--input-spp: item {record['id']} has no {input_spp}-spp input "
                                f"(it has {sorted(e['spp'] for e in inputs)})")
            seconds = match[0]["seconds"] + (denoise_seconds or 0.0)
        elif denoise_seconds is not None:
            seconds = denoise_seconds
        if len(points) >= 2:
            add_ladder(report, points, seconds)
        results.append(ItemScore(record["id"], record["split"], report))
    return results


def dataset_result(folder, predictions, items: list[ItemScore], summary: dict, **settings) -> dict:
    """The JSON document of ``score-dataset --json``: what was scored, how, per item and per split."""
    return {"written_by": "tracer score-dataset", "dataset": str(Path(folder).resolve()),
            "predictions": str(Path(predictions).resolve()), **settings,
            "items": [{"id": item.item_id, "split": item.split, **item.report.as_dict()} for item in items],
            "splits": summary}


def aggregate(items: list[ItemScore]) -> dict[str, dict]:
    """Per split (and ``all``): mean PSNR, SSIM and relative MSE, median equal-quality spp, geometric-mean speedup."""
    groups: dict[str, list[ItemScore]] = {}
    for item in items:
        groups.setdefault(item.split, []).append(item)
    groups["all"] = list(items)
    out = {}
    for name, group in groups.items():
        spp = [i.report.equal_quality_spp for i in group if i.report.equal_quality_spp is not None]
        speedups = [i.report.speedup for i in group if i.report.speedup]
        out[name] = {
            "items": len(group),
            "psnr_db": float(np.mean([i.report.scores.psnr_db for i in group])),
            "ssim": float(np.mean([i.report.scores.ssim for i in group])),
            "relative_mse": float(np.mean([i.report.scores.relative_mse for i in group])),
            "equal_quality_spp": float(np.median(spp)) if spp else None,
            "speedup": float(np.exp(np.mean(np.log(speedups)))) if speedups else None,
        }
    return out
