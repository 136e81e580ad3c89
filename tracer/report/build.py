"""``tracer report``: a static page of a render, a dataset or a dataset's scores, written as a folder.

The folder holds ``index.html``, the page's script and style, ``data/`` (the page model and one
script per image, see :mod:`.encode`) and ``thumbs/`` (8-bit sRGB PNGs). It is written under a
temporary name beside ``--out`` and renamed into place, so a failed run leaves nothing half-written;
an earlier report in ``--out`` is replaced, any other non-empty folder is refused.
"""

from __future__ import annotations

import contextlib
import html
import json
import math
import os
import shutil
import time
import warnings
from dataclasses import dataclass, field
from importlib import resources
from pathlib import Path
from typing import Callable

import numpy as np

from ..errors import UserError
from .encode import buffer_payload, write_script

MARKER = ".tracer-report"
ASSETS = ("report.js", "report.css")
THUMB_SIZE = 128          # longest side of a thumbnail, pixels


@dataclass
class ReportSummary:
    kind: str                      # "render", "dataset" or "score"
    folder: Path
    items: int
    problems: list[str] = field(default_factory=list)
    bytes_written: int = 0
    seconds: float = 0.0
    medical: bool = False


def report_kind(path) -> str:
    """What PATH is, or a one-line :class:`UserError` saying why it is none of the three."""
    path = Path(path)
    if not path.exists():
        raise UserError(f"{path}: not found; give a render .npz, a dataset folder or a score-dataset --json result")
    if path.is_dir():
        if not (path / "manifest.jsonl").is_file():
            raise UserError(f"{path}: not a dataset folder (manifest.jsonl missing)")
        return "dataset"
    if path.suffix.lower() == ".npz":
        return "render"
    if path.suffix.lower() == ".json":
        return "score"
    raise UserError(f"{path}: not a render .npz, a dataset folder or a score-dataset --json result")


def check_report_folder(out) -> None:
    """Refuse, before any work, an output that is a file or a non-empty folder holding something else."""
    from ..outputs.save import check_output_folder

    out = Path(out)
    if out.exists() and not out.is_dir():
        raise UserError(f"{out}: exists and is not a folder; choose another --out")
    if out.is_dir() and any(out.iterdir()) and not (out / MARKER).is_file():
        raise UserError(f"{out}: folder is not empty and holds no earlier report; choose another --out")
    check_output_folder(out)


def write_report(path, out, *, predictions=None, features: bool = True,
                 on_progress: Callable[[int, int], None] | None = None) -> ReportSummary:
    """Write the report of PATH (render NPZ, dataset folder, or ``score-dataset --json`` result) into OUT.

    ``features=False`` ships only the radiance of a dataset's references (a page about a tenth the size)."""
    started = time.perf_counter()
    path, out = Path(path), Path(out)
    kind = report_kind(path)
    check_report_folder(out)
    if predictions is not None and kind != "dataset":
        raise UserError("--predictions: only for a dataset folder (a score result names its own)")
    model, jobs = _plan(kind, path, predictions, features)
    staging = out.parent / f".{out.name}.partial-{os.getpid()}"
    shutil.rmtree(staging, ignore_errors=True)
    try:
        (staging / "data").mkdir(parents=True)
        (staging / "thumbs").mkdir()
        problems = _write_images(staging, model, jobs, on_progress)
        write_script(staging / "data" / "report.js", "tracerReportModel", kind, _finite(model))
        assets = resources.files(__package__) / "assets"
        for name in ASSETS:
            (staging / name).write_bytes((assets / name).read_bytes())
        page = (assets / "index.html").read_text(encoding="utf-8")
        (staging / "index.html").write_text(page.replace("__TITLE__", html.escape(model["title"])), encoding="utf-8")
        (staging / MARKER).write_text(json.dumps({"kind": kind, "source": str(path.resolve())}) + "\n")
        size = sum(f.stat().st_size for f in staging.rglob("*") if f.is_file())
        _swap_into_place(staging, out)
    except BaseException:
        shutil.rmtree(staging, ignore_errors=True)
        raise
    if problems:
        shown = "; ".join(problems[:4]) + ("; ..." if len(problems) > 4 else "")
        warnings.warn(f"{len(problems)} file(s) missing or altered, flagged on the page: {shown}", UserWarning)
    n_items = len(model.get("items", [])) or 1
    return ReportSummary(kind, out, n_items, problems, size, time.perf_counter() - started, bool(model.get("medical")))


def _swap_into_place(staging: Path, out: Path) -> None:
    try:
        if out.is_dir():
            old = out.parent / f".{out.name}.old-{os.getpid()}"
            os.replace(out, old)
            os.replace(staging, out)
            shutil.rmtree(old, ignore_errors=True)
        else:
            os.replace(staging, out)
    except OSError as error:
        raise UserError(f"{out}: cannot write the report: {error.strerror or error}") from None


# --- what goes on the page ------------------------------------------------------------------

@dataclass
class _Image:
    """One image file to ship: its bundle name, which buffers, and whether it gets a thumbnail."""
    source: Path
    bundle: str
    keys: tuple[str, ...] | None        # None: every buffer
    thumb: str | None
    entry: dict                         # the page model's entry for it, updated with status


def _plan(kind: str, path: Path, predictions, features: bool) -> tuple[dict, list[_Image]]:
    from .. import __version__

    if kind == "render":
        return _render_model(path, __version__)
    if kind == "score":
        result = _read_score_result(path)
        model, jobs = _dataset_model(Path(result["dataset"]), Path(result["predictions"]), __version__, features)
        _attach_scores(model, result, path)
        model["kind"] = "score"
        model["title"] = f"Scores: {Path(result['predictions']).name} on {model['dataset']['name']}"
        return model, jobs
    return _dataset_model(path, Path(predictions) if predictions is not None else None, __version__, features)


def _render_model(path: Path, version: str):
    from ..outputs.npz import read_npz
    from ..rendering.buffers import buffer_specs

    frame = read_npz(path)
    specs = {spec.key: spec for spec in buffer_specs(frame.n_levels, frame.features)}
    meta = frame.meta
    entry = {"label": path.name, "role": "render", "bundle": "render", "status": "ok"}
    buffers = [{"key": key, "units": specs[key].units if key in specs else "",
                "description": specs[key].description if key in specs else ""} for key in frame.buffers]
    scene = meta.get("scene", {})
    model = {"kind": "render", "title": f"Render: {path.name}", "version": version, "source": str(path),
             "image": entry, "buffers": buffers,
             "facts": {"spp": meta.get("spp"), "seed": str(meta.get("seed")), "first sample": meta.get("first_sample"),
                       "size": f"{meta.get('width')} x {meta.get('height')}",
                       "volume": Path(scene.get("volume", {}).get("path", "")).name or None,
                       "transfer function": scene.get("transfer_function", {}).get("name"),
                       "render seconds": meta.get("render_seconds")},
             "medical": _is_medical(scene)}
    return model, [_Image(path, "render", None, None, entry)]


def _is_medical(scene: dict) -> bool:
    """A render of a medical scan (README, "Conventions"): its transfer function is marked so, or its
    volume's header names a patient space."""
    from ..volumes.orientation import PATIENT_SPACES

    return bool(scene.get("transfer_function", {}).get("medical")) or scene.get("volume", {}).get("space") in PATIENT_SPACES


def _dataset_model(folder: Path, predictions: Path | None, version: str, features: bool = True):
    from ..dataset.manifest import npz_entries, read_manifest

    records = read_manifest(folder)
    if not records:
        raise UserError(f"{folder}: the manifest lists no finished items")
    from ..dataset.manifest import refuse_sequences

    refuse_sequences(folder, records, "report")
    if predictions is not None and not predictions.is_dir():
        raise UserError(f"{predictions}: prediction folder not found")
    plan = {}
    with contextlib.suppress(OSError, json.JSONDecodeError):
        plan = json.loads((folder / "dataset.json").read_text())
    name = plan.get("plan_as_parsed", {}).get("name") or folder.name
    items, jobs = [], []
    for record in records:
        number = int(record["index"])
        files = []
        inputs, references = npz_entries(record, "input"), npz_entries(record, "reference")
        for entry in inputs + references:
            reference = entry["role"] == "reference"
            label = f"reference ({entry['spp']} spp)" if reference else f"{entry['spp']} spp"
            bundle = f"{number:05d}-{'reference' if reference else 'spp%04d' % entry['spp']}"
            page_entry = {"label": label, "role": entry["role"], "spp": entry["spp"], "bundle": bundle,
                          "thumb": f"thumbs/{bundle}.png", "path": entry["path"], "sha256": entry["sha256"]}
            files.append(page_entry)
            jobs.append(_Image(folder / entry["path"], bundle, None if reference and features else ("radiance",),
                               page_entry["thumb"], page_entry))
        if predictions is not None:
            found = next((p for p in (predictions / f"{record['id']}.npz", predictions / f"{record['id']}.exr")
                          if p.is_file()), predictions / f"{record['id']}.npz")
            bundle = f"{number:05d}-candidate"
            page_entry = {"label": "candidate", "role": "candidate", "bundle": bundle, "thumb": f"thumbs/{bundle}.png",
                          "path": str(found)}
            files.append(page_entry)
            jobs.append(_Image(found, bundle, ("radiance",), page_entry["thumb"], page_entry))
        reference = record.get("reference", {})
        items.append({"id": record["id"], "index": number, "split": record.get("split", ""),
                      "volume": Path(record.get("volume", "")).name, "volume_path": record.get("volume", ""),
                      "transfer_function": Path(str(record.get("transfer_function", ""))).stem,
                      "certified": reference.get("certified"), "residual_error": reference.get("mean_relative_error"),
                      "psnr_vs_converged_db": reference.get("psnr_vs_converged_db"),
                      "reference_spp": reference.get("spp"), "files": files, "problems": []})
    medical = any(_tf_marked_medical(p) for p in {r.get("transfer_function") for r in records})
    model = {"kind": "dataset", "title": f"Dataset: {name}", "version": version, "source": str(folder),
             "dataset": {"name": name, "folder": str(folder), "items": len(items),
                         "predictions": str(predictions) if predictions is not None else None},
             "items": items, "medical": medical}
    return model, jobs


def _tf_marked_medical(path) -> bool:
    from ..optics.transfer import load_transfer_function

    try:
        return bool(path) and load_transfer_function(path).medical
    except (UserError, OSError):
        return False


def _read_score_result(path: Path) -> dict:
    try:
        result = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, json.JSONDecodeError) as error:
        raise UserError(f"{path}: not a readable JSON file: {str(error).splitlines()[0] if str(error) else error}")
    if not isinstance(result, dict) or result.get("written_by") != "tracer score-dataset":
        raise UserError(f"{path}: not a score-dataset result (write one with tracer score-dataset --json)")
    for key in ("dataset", "predictions", "items"):
        if key not in result:
            raise UserError(f"{path}: {key}: missing")
    if not Path(result["dataset"]).is_dir():
        raise UserError(f"{path}: dataset: folder {result['dataset']} not found")
    return result


def _attach_scores(model: dict, result: dict, path: Path) -> None:
    by_id = {item["id"]: item for item in model["items"]}
    for scored in result["items"]:
        item = by_id.get(scored["id"])
        if item is None:
            raise UserError(f"{path}: items: {scored['id']} is not in the dataset's manifest")
        item["score"] = {"psnr_db": scored["scores"]["psnr_db"], "ssim": scored["scores"]["ssim"],
                         "relative_mse": scored["scores"]["relative_mse"],
                         "equal_quality_spp": scored.get("equal_quality_spp"), "extrapolated": scored.get("extrapolated"),
                         "speedup": scored.get("speedup"),
                         "ladder": [[p["spp"], p["psnr_db"]] for p in scored.get("ladder", [])]}
    model["scores"] = {"splits": result.get("splits", {}), "exposure": result.get("exposure", 0.0),
                       "input_spp": result.get("input_spp"), "covered_only": result.get("covered_only", False)}


# --- writing the images ---------------------------------------------------------------------

def _write_images(staging: Path, model: dict, jobs: list[_Image], on_progress) -> list[str]:
    from ..dataset.manifest import sha256_file

    problems = []
    by_bundle_item = {f["bundle"]: item for item in model.get("items", []) for f in item["files"]}
    total = max(1, len(model.get("items", [])))
    done_items = set()
    for job in jobs:
        item = by_bundle_item.get(job.bundle)
        status = "ok"
        if not job.source.is_file():
            status = "missing"
        elif "sha256" in job.entry and sha256_file(job.source) != job.entry["sha256"]:
            status = "checksum mismatch"
        arrays = None
        if status != "missing":
            try:
                arrays = _read_buffers(job.source, job.keys)
            except UserError as error:
                status = "unreadable"
                job.entry["reason"] = str(error)
        job.entry["status"] = status
        if status != "ok":
            where = f"{item['id']}: {job.entry['label']}" if item else str(job.source)
            problems.append(f"{where}: {status}")
            if item is not None:
                item["problems"].append(f"{job.entry['label']}: {status}")
        if arrays is not None:
            job.entry["width"], job.entry["height"] = int(arrays["radiance"].shape[1]), int(arrays["radiance"].shape[0])
            write_script(staging / "data" / f"{job.bundle}.js", "tracerArrive", job.bundle,
                         {"width": job.entry["width"], "height": job.entry["height"],
                          "buffers": {key: buffer_payload(value) for key, value in arrays.items()}})
            job.entry["keys"] = list(arrays)
            if job.thumb:
                _write_thumb(staging / job.thumb, arrays["radiance"])
            else:
                job.entry.pop("thumb", None)
        else:
            job.entry.pop("thumb", None)
        if item is not None and on_progress is not None and item["id"] not in done_items:
            done_items.add(item["id"])
            on_progress(len(done_items), total)
    return problems


def _read_buffers(path: Path, keys) -> dict[str, np.ndarray]:
    if path.suffix.lower() == ".exr":
        from ..scoring.score import read_radiance

        radiance, _, _ = read_radiance(path)
        return {"radiance": radiance}
    from ..outputs.npz import load_arrays

    contents = load_arrays(path)
    contents.pop("meta", None)
    if "radiance" not in contents or np.asarray(contents["radiance"]).shape[-1:] != (3,):
        raise UserError(f"{path}: radiance: missing or not (H, W, 3)")
    if keys is not None:
        contents = {key: contents[key] for key in keys if key in contents}
    shape = contents["radiance"].shape[:2]
    return {key: np.asarray(value, dtype=np.float32) for key, value in contents.items()
            if np.ndim(value) in (2, 3) and np.shape(value)[:2] == shape}


def _write_thumb(path: Path, radiance) -> None:
    from ..outputs.png import to_display, to_uint8
    import imageio.v3 as iio

    image = np.asarray(radiance, dtype=np.float64)
    factor = max(1, math.ceil(max(image.shape[:2]) / THUMB_SIZE))
    if factor > 1:
        h, w = (image.shape[0] // factor) * factor, (image.shape[1] // factor) * factor
        image = image[:h, :w].reshape(h // factor, factor, w // factor, factor, 3).mean(axis=(1, 3))
    iio.imwrite(path, to_uint8(to_display(np.nan_to_num(image, nan=0.0, neginf=0.0))), extension=".png")


def _finite(value):
    """JSON-safe: non-finite floats become null."""
    if isinstance(value, float):
        return value if math.isfinite(value) else None
    if isinstance(value, dict):
        return {key: _finite(v) for key, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_finite(v) for v in value]
    return value
