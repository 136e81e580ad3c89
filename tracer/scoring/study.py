"""``tracer feature-study``: which guide buffers help the baseline filter on a dataset, and how noisy each is.

For each guide set (colour only; + normal; + albedo; + depth; + event 2; + each candidate feature the
inputs hold; all; and sets from a TOML file), the a-trous baseline (:func:`denoise_guided`) filters every
item's input at the chosen spp and the result is scored against the item's reference: PSNR and SSIM as
``tracer score`` computes them, and the equal-quality spp on the item's own ladder of inputs. The colour-only
set is exactly ``tracer denoise --color-only``. The noise report gives, per feature buffer of the inputs,
its relative noise against the reference's converged buffer, ``|f - f_ref|_2 / |f_ref|_2`` over pixels the
reference covers, and how its edges line up with the reference radiance's: the Pearson correlation of the
two gradient-magnitude images (``numpy.gradient``), for the noisy buffer and for the converged one.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import numpy as np

from ..errors import UserError

#: Guide sets every study runs (when the inputs hold their buffers), in this order.
STANDARD_SETS = (
    ("colour only", ()),
    ("+ normal", ("event1_normal",)),
    ("+ albedo", ("albedo",)),
    ("+ depth", ("event1_depth",)),
    ("+ event 2", ("event2_normal", "event2_depth")),
)
#: Buffers a guide may not be: what the filter filters, and its noise estimate.
NOT_GUIDES = ("radiance", "radiance_variance")


@dataclass(frozen=True)
class GuideSet:
    name: str
    buffers: tuple[str, ...]


@dataclass
class StudyResult:
    dataset: str
    spp: int
    sets: list[GuideSet]
    items: list[dict]                            # per set and item: id, split, psnr_db, ssim, equal_quality_spp
    summary: list[dict] = field(default_factory=list)   # per set: per split and all
    noise: list[dict] = field(default_factory=list)     # per feature buffer

    def as_dict(self) -> dict:
        return {"written_by": "tracer feature-study", "dataset": self.dataset, "spp": self.spp,
                "sets": [{"name": s.name, "buffers": list(s.buffers)} for s in self.sets],
                "summary": self.summary, "items": self.items, "noise": self.noise}


def guide_sets(available: list[str], extra_path=None) -> list[GuideSet]:
    """The standard sets the inputs can serve, one per candidate feature they hold, ``all``, then the TOML's."""
    from ..rendering.buffers import FEATURE_NAMES

    sets = [GuideSet(name, buffers) for name, buffers in STANDARD_SETS if all(b in available for b in buffers)]
    for key in FEATURE_NAMES:
        if key in available:
            sets.append(GuideSet(f"+ {key}", (key,)))
    everything = tuple(dict.fromkeys(b for s in sets for b in s.buffers))
    if len(everything) > 1:
        sets.append(GuideSet("all", everything))
    if extra_path is not None:
        sets += load_study_sets(extra_path, available)
    return sets


def load_study_sets(path, available: list[str]) -> list[GuideSet]:
    """``[[sets]]`` tables with ``name`` and ``buffers`` (keys of the inputs' buffers)."""
    from ..io.tomlfile import Table, read_toml

    top = Table(read_toml(path), path)
    tables = top.raw("sets", [])
    if not isinstance(tables, list) or not tables:
        raise top.error("sets", "expected one or more [[sets]] tables with name and buffers")
    out = []
    for number, table in enumerate(tables):
        where = f"{path}: sets[{number}]"
        if not isinstance(table, dict) or set(table) - {"name", "buffers"} or "buffers" not in table:
            raise UserError(f"{where}: expected name = \"...\" and buffers = [...] (and nothing else)")
        buffers = table["buffers"]
        if not isinstance(buffers, list) or not all(isinstance(b, str) for b in buffers):
            raise UserError(f"{where}.buffers: expected a list of buffer names, got {buffers!r}")
        for name in buffers:
            if name in NOT_GUIDES:
                raise UserError(f"{where}.buffers: {name!r} is what the filter filters, not a guide")
            if name not in available:
                raise UserError(f"{where}.buffers: {name!r} is not in the dataset's inputs; they hold "
                                + ", ".join(k for k in available if k not in NOT_GUIDES))
        name = table.get("name", " + ".join(buffers) or "colour only")
        if not isinstance(name, str):
            raise UserError(f"{where}.name: expected a string")
        out.append(GuideSet(name, tuple(buffers)))
    top.finish()
    return out


def _inputs(record: dict) -> list[dict]:
    from ..dataset.manifest import npz_entries

    return npz_entries(record, "input")


def study_plan(folder, spp: int, extra_path=None) -> tuple[list[dict], list[GuideSet]]:
    """The manifest's records and the guide sets, checked before any filtering."""
    from ..dataset.manifest import read_manifest
    from ..outputs.npz import load_arrays

    folder = Path(folder)
    records = read_manifest(folder)
    if not records:
        raise UserError(f"{folder}: no finished items (manifest.jsonl is missing or empty)")
    from ..dataset.manifest import refuse_sequences

    refuse_sequences(folder, records, "feature-study")
    for record in records:
        if not any(e["spp"] == spp for e in _inputs(record)):
            raise UserError(f"--spp: item {record['id']} has no {spp}-spp input "
                            f"(it has {sorted(e['spp'] for e in _inputs(record))})")
    first = next(e for e in _inputs(records[0]) if e["spp"] == spp)
    available = [k for k in load_arrays(folder / first["path"]) if k != "meta"]
    return records, guide_sets(available, extra_path)


def run_study(folder, *, spp: int = 1, sets_path=None, threads: int | None = None,
              on_progress: Callable[[int, int], None] | None = None) -> StudyResult:
    from ..dataset.manifest import npz_entries
    from ..outputs.npz import read_npz
    from .denoise import denoise_guided
    from .metrics import score
    from .score import equal_quality_spp, read_radiance

    folder = Path(folder)
    records, sets = study_plan(folder, spp, sets_path)
    rows = []
    noise: dict[str, list] = {}
    for done, record in enumerate(records):
        reference_entry = npz_entries(record, "reference")[0]
        reference, reference_arrays, _ = read_radiance(folder / reference_entry["path"])
        inputs = _inputs(record)
        ladder = [(e["spp"], score(reference, read_radiance(folder / e["path"])[0]).psnr_db) for e in inputs]
        frame = read_npz(folder / next(e for e in inputs if e["spp"] == spp)["path"])
        for guide_set in sets:
            filtered = denoise_guided(frame, guide_set.buffers, threads=threads)
            scores = score(reference, filtered.astype(np.float64))
            row = {"set": guide_set.name, "id": record["id"], "split": record["split"], "psnr_db": scores.psnr_db,
                   "ssim": scores.ssim, "equal_quality_spp": None, "extrapolated": None}
            if len(ladder) >= 2:
                row["equal_quality_spp"], row["extrapolated"] = equal_quality_spp(
                    [p[0] for p in ladder], [p[1] for p in ladder], scores.psnr_db)
            rows.append(row)
        _noise_of(frame.buffers, reference, reference_arrays, noise)
        if on_progress is not None:
            on_progress(done + 1, len(records))
    result = StudyResult(str(folder), spp, sets, rows)
    result.summary = _summarize(sets, rows)
    result.noise = [{"buffer": key, **{name: float(np.mean(values[name])) for name in values}}
                    for key, values in noise.items()]
    return result


def _noise_of(noisy: dict, radiance: np.ndarray, reference: dict, out: dict) -> None:
    covered = np.asarray(reference.get("event1_hit", np.ones(radiance.shape[:2]))) > 0
    luminance = np.asarray(radiance, np.float64) @ np.array([0.2126, 0.7152, 0.0722])
    edges = _gradient_magnitude(luminance)
    for key, value in noisy.items():
        if key in NOT_GUIDES or key not in reference or not covered.any():
            continue
        f = np.asarray(value, np.float64)
        g = np.asarray(reference[key], np.float64)
        norm = math.sqrt(float(np.sum(g[covered] ** 2)))
        entry = out.setdefault(key, {"relative_noise": [], "edge_alignment": [], "edge_alignment_converged": []})
        entry["relative_noise"].append(math.sqrt(float(np.sum((f - g)[covered] ** 2))) / norm if norm > 0 else 0.0)
        entry["edge_alignment"].append(_correlation(_gradient_magnitude(f), edges))
        entry["edge_alignment_converged"].append(_correlation(_gradient_magnitude(g), edges))


def _gradient_magnitude(image: np.ndarray) -> np.ndarray:
    planes = image[..., None] if image.ndim == 2 else image
    total = np.zeros(planes.shape[:2])
    for c in range(planes.shape[-1]):
        gy, gx = np.gradient(planes[..., c])
        total += gx * gx + gy * gy
    return np.sqrt(total)


def _correlation(a: np.ndarray, b: np.ndarray) -> float:
    a, b = a.ravel(), b.ravel()
    if a.std() == 0 or b.std() == 0:
        return 0.0
    return float(np.corrcoef(a, b)[0, 1])


def _summarize(sets: list[GuideSet], rows: list[dict]) -> list[dict]:
    out = []
    for guide_set in sets:
        mine = [r for r in rows if r["set"] == guide_set.name]
        groups = {"all": mine}
        for r in mine:
            groups.setdefault(r["split"], []).append(r)
        entry = {"set": guide_set.name, "buffers": list(guide_set.buffers)}
        for split, group in groups.items():
            spp = [r["equal_quality_spp"] for r in group if r["equal_quality_spp"] is not None]
            entry[split] = {"items": len(group), "psnr_db": float(np.mean([r["psnr_db"] for r in group])),
                            "ssim": float(np.mean([r["ssim"] for r in group])),
                            "equal_quality_spp": float(np.median(spp)) if spp else None}
        out.append(entry)
    return out


def write_study(result: StudyResult, out) -> list[Path]:
    """``study.txt``, ``study.csv``, ``noise.csv``, ``study.json`` and ``study.png`` (sets ranked by PSNR) in OUT."""
    from ..io.atomic import atomic_path

    out = Path(out)
    out.mkdir(parents=True, exist_ok=True)
    paths = []
    for name, text in (("study.txt", study_text(result)), ("study.csv", _study_csv(result)),
                       ("noise.csv", _noise_csv(result)), ("study.json", json.dumps(result.as_dict(), indent=1) + "\n")):
        with atomic_path(out / name) as temporary:
            temporary.write_text(text)
        paths.append(out / name)
    paths.append(_plot(result, out / "study.png"))
    return paths


def ranked(result: StudyResult) -> list[dict]:
    return sorted(result.summary, key=lambda entry: -entry["all"]["psnr_db"])


def study_text(result: StudyResult) -> str:
    splits = [s for s in result.summary[0] if s not in ("set", "buffers", "all")] if result.summary else []
    lines = [f"feature study of {result.dataset}: {len({r['id'] for r in result.items})} items, "
             f"the baseline filter on the {result.spp}-spp inputs, ranked by mean PSNR", ""]
    header = f"{'guide set':<34} {'PSNR dB':>8} {'SSIM':>7} {'eq. spp':>8}  " + "  ".join(f"{s:>10}" for s in splits)
    lines += [header, "-" * len(header)]
    for entry in ranked(result):
        row = entry["all"]
        eq = "n/a" if row["equal_quality_spp"] is None else f"{row['equal_quality_spp']:.1f}"
        per = "  ".join(f"{entry[s]['psnr_db']:>7.2f} dB" for s in splits)
        lines.append(f"{entry['set']:<34} {row['psnr_db']:>8.2f} {row['ssim']:>7.4f} {eq:>8}  {per}")
    lines += ["", "per-split columns: mean PSNR; eq. spp: median equal-quality spp on each item's ladder", "",
              f"feature buffers at {result.spp} spp against the references' converged buffers:",
              f"{'buffer':<30} {'rel. noise':>10} {'edges (noisy)':>14} {'edges (converged)':>18}"]
    for entry in sorted(result.noise, key=lambda e: e["relative_noise"]):
        lines.append(f"{entry['buffer']:<30} {entry['relative_noise']:>10.3f} {entry['edge_alignment']:>14.3f} "
                     f"{entry['edge_alignment_converged']:>18.3f}")
    lines += ["rel. noise: |f - f_ref| / |f_ref| over covered pixels; edges: correlation of the buffer's gradient "
              "magnitude with the reference radiance's"]
    return "\n".join(lines) + "\n"


def _fmt(value, pattern="{:.4f}") -> str:
    return "" if value is None else pattern.format(value)


def _study_csv(result: StudyResult) -> str:
    lines = ["kind,set,buffers,id,split,psnr_db,ssim,equal_quality_spp"]
    for entry in result.summary:
        for split, row in entry.items():
            if split in ("set", "buffers"):
                continue
            lines.append(f"split,\"{entry['set']}\",{'+'.join(entry['buffers'])},,{split},{row['psnr_db']:.4f},"
                         f"{row['ssim']:.5f},{_fmt(row['equal_quality_spp'], '{:.3f}')}")
    for row in result.items:
        buffers = next("+".join(s.buffers) for s in result.sets if s.name == row["set"])
        lines.append(f"item,\"{row['set']}\",{buffers},{row['id']},{row['split']},{row['psnr_db']:.4f},{row['ssim']:.5f},"
                     f"{_fmt(row['equal_quality_spp'], '{:.3f}')}")
    return "\n".join(lines) + "\n"


def _noise_csv(result: StudyResult) -> str:
    lines = ["buffer,relative_noise,edge_alignment,edge_alignment_converged"]
    lines += [f"{e['buffer']},{e['relative_noise']:.5f},{e['edge_alignment']:.5f},{e['edge_alignment_converged']:.5f}"
              for e in result.noise]
    return "\n".join(lines) + "\n"


def _plot(result: StudyResult, path: Path) -> Path:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from ..io.atomic import atomic_path

    entries = ranked(result)[::-1]
    baseline = next((e["all"]["psnr_db"] for e in result.summary if e["set"] == "colour only"), None)
    figure, axes = plt.subplots(1, 2, figsize=(11, 0.42 * len(entries) + 1.6), gridspec_kw={"width_ratios": [3, 2]})
    names = [e["set"] for e in entries]
    values = [e["all"]["psnr_db"] for e in entries]
    colours = ["#8a8a8a" if e["set"] == "colour only" else "#c9822f" for e in entries]
    axes[0].barh(names, values, color=colours)
    low = min(values) - 1.0
    axes[0].set_xlim(low, max(values) + 0.6)
    for y, value in enumerate(values):
        axes[0].text(value + 0.05, y, f"{value:.2f}", va="center", fontsize=8)
    if baseline is not None:
        axes[0].axvline(baseline, color="#555555", linestyle=":", linewidth=1)
    axes[0].set_xlabel(f"mean PSNR (dB) of the filtered {result.spp}-spp inputs")
    axes[0].set_title("guide sets, best on top")
    noise = sorted(result.noise, key=lambda e: e["relative_noise"])
    axes[1].scatter([e["relative_noise"] for e in noise], [e["edge_alignment"] for e in noise], color="#2f7f8a")
    for e in noise:
        axes[1].annotate(e["buffer"], (e["relative_noise"], e["edge_alignment"]), fontsize=7,
                         xytext=(3, 2), textcoords="offset points")
    axes[1].set_xscale("symlog", linthresh=0.01)
    axes[1].set_xlabel(f"relative noise at {result.spp} spp")
    axes[1].set_ylabel("edge alignment with the reference")
    axes[1].set_title("feature buffers")
    figure.tight_layout()
    with atomic_path(path) as temporary:
        figure.savefig(temporary, dpi=100, format="png")
    plt.close(figure)
    return path
