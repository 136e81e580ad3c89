"""Building a dataset: render every item of a plan, serially or on a Dask cluster, resumably.

Per item (one view): the reference over sample indices [0, R) and each input of the spp
ladder over its own range above ``INPUT_SAMPLE_BASE``, all with the item's seed. Since the
generator is a pure function of (seed, pixel, sample, dimension), disjoint sample ranges give
independent noise: an input's error is independent of the reference's.

Files go to ``DIR/items/ITEM_ID/`` (``spp0001.npz``, ..., ``reference.npz``), each written
under a temporary name and renamed; the manifest gains the item's record after all its files
are in place. A resume verifies every record's checksums, removes stray temporary files and
renders what is missing. The files themselves hold no timings (``render_seconds`` is null in
their meta; the manifest has them), so the same plan gives bit-identical files serially and on
a cluster.
"""

from __future__ import annotations

import dataclasses
import functools
import json
import math
import time
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

import numpy as np

from .. import __version__
from ..accumulate import Accumulator
from ..buffers import Frame
from ..errors import UserError
from .manifest import (PLAN_RECORD, read_manifest, record_is_intact, sha256_file, write_manifest)
from .plan import DatasetPlan, ItemSpec, load_plan


@functools.lru_cache(maxsize=4)
def _cached_plan(path: str, fingerprint: str) -> DatasetPlan:
    plan = load_plan(path)
    if plan.fingerprint != fingerprint:
        raise UserError(f"{path}: the plan changed while the dataset was being built")
    return plan


@functools.lru_cache(maxsize=8)
def _cached_volume(path: str, spacing, origin):
    from ..volume import load_volume

    return load_volume(path, spacing_mm=spacing, origin_mm=origin)


@functools.lru_cache(maxsize=32)
def _cached_transfer_function(path: str):
    from ..transfer import load_transfer_function

    return load_transfer_function(path)


def item_scene(plan: DatasetPlan, item: ItemSpec):
    """The scene of one item, and a JSON-ready description of its transfer function jitter."""
    from ..scene import Scene

    entry = plan.volumes[item.volume_index]
    volume = _cached_volume(str(entry.path), entry.spacing_mm, entry.origin_mm)
    base = _cached_transfer_function(str(entry.transfer_functions[item.tf_index]))
    tf, jitter = plan.transfer_function(item, base, volume.value_range)
    settings = plan.settings
    if settings.step_mm <= 0:
        settings = dataclasses.replace(settings, step_mm=float(min(volume.spacing)) / 2.0)
    settings = dataclasses.replace(settings, seed=item.seed)
    scene = Scene(volume=volume, transfer_function=tf, camera=plan.camera(item, volume.center, volume.bounding_radius),
                  lights=(plan.light(item),), environment=plan.environment(item), settings=settings,
                  source=str(plan.source))
    return scene, jitter


def _write(frame: Frame, folder: Path, stem: str, formats) -> dict[str, dict]:
    from ..io.exr import write_exr
    from ..io.npz import write_npz

    frame.meta["render_seconds"] = None
    written = {}
    path = write_npz(folder / f"{stem}.npz", frame)
    written[f"{stem}.npz"] = path
    if "exr" in formats:
        written[f"{stem}.exr"] = write_exr(folder / f"{stem}.exr", frame)
    return written


def render_item_inputs(plan_path: str, fingerprint: str, index: int, out_dir: str, with_reference: bool) -> dict:
    """Render one item's input ladder (and its reference unless it is split in chunks); write the files.

    Runs on a worker or in-process. Returns a partial record (files with checksums, timings).
    """
    from ..rendering import render

    plan = _cached_plan(plan_path, fingerprint)
    item = plan.items()[index]
    scene, jitter = item_scene(plan, item)
    folder = Path(out_dir) / "items" / item.item_id
    files = {}
    for spp, (start, stop) in zip(plan.input_spp, plan.input_ranges()):
        started = time.perf_counter()
        frame = render(scene, spp=spp, sample_offset=start)
        seconds = time.perf_counter() - started
        for name, path in _write(frame, folder, f"spp{spp:04d}", plan.formats).items():
            files[name] = {"path": str(path.relative_to(Path(out_dir))), "spp": spp, "sample_range": [start, stop],
                           "seconds": round(seconds, 4), "role": "input"}
    record = {"files": files, "jitter": jitter}
    if with_reference:
        started = time.perf_counter()
        frame = render(scene, spp=plan.reference_spp if (plan.reference_target_error or plan.reference_min_psnr) is None
                       else max(plan.reference_spp, 2),
                       target_error=plan.reference_target_error, target_psnr=plan.reference_min_psnr)
        seconds = time.perf_counter() - started
        record["reference"] = _reference_record(plan, frame, seconds, folder, out_dir, files)
    return record


def _reference_record(plan, frame, seconds, folder, out_dir, files) -> dict:
    from ..rendering import residual_noise

    noise = residual_noise(frame.buffers)
    for name, path in _write(frame, folder, "reference", plan.formats).items():
        files[name] = {"path": str(path.relative_to(Path(out_dir))), "spp": frame.spp,
                       "sample_range": [frame.meta["sample_offset"], frame.meta["sample_offset"] + frame.spp],
                       "seconds": round(seconds, 4), "role": "reference"}
    certified = True
    if plan.reference_min_psnr is not None and not noise.psnr_db >= plan.reference_min_psnr:
        certified = False
    if plan.reference_target_error is not None and not noise.mean_relative_error <= plan.reference_target_error:
        certified = False
    return {"spp": frame.spp, "mean_relative_error": round(noise.mean_relative_error, 6),
            "psnr_vs_converged_db": round(noise.psnr_db, 3) if math.isfinite(noise.psnr_db) else None,
            "certified": certified, "seconds": round(seconds, 4)}


def render_reference_chunk(plan_path: str, fingerprint: str, index: int, chunk: int) -> dict:
    """Render chunk ``chunk`` of an item's reference; returns its float64 sums (for an exact merge)."""
    from ..rendering import render

    plan = _cached_plan(plan_path, fingerprint)
    item = plan.items()[index]
    scene, _ = item_scene(plan, item)
    start, stop = _chunk_range(plan.reference_spp, plan.reference_chunks, chunk)
    started = time.perf_counter()
    frame = render(scene, spp=stop - start, sample_offset=start)
    return {"chunk": chunk, "sums": frame.accumulator.sums, "n_samples": frame.accumulator.n_samples,
            "sample_offset": start, "seconds": time.perf_counter() - started, "meta": frame.meta}


def _chunk_range(spp: int, chunks: int, chunk: int) -> tuple[int, int]:
    edges = np.linspace(0, spp, chunks + 1).round().astype(int)
    return int(edges[chunk]), int(edges[chunk + 1])


def finish_chunked_reference(plan: DatasetPlan, item: ItemSpec, parts: list[dict], out_dir: Path, files: dict) -> dict:
    """Add the chunks' sums in chunk order (the same on any executor) and write the reference."""
    parts = sorted(parts, key=lambda part: part["chunk"])
    sums = parts[0]["sums"].copy()
    for part in parts[1:]:
        sums += part["sums"]
    n_levels = len(plan.settings.feature_levels)
    accumulator = Accumulator(sums.shape[0], sums.shape[1], n_levels, sample_offset=0, sums=sums,
                              n_samples=sum(part["n_samples"] for part in parts))
    meta = dict(parts[0]["meta"])
    meta.update(spp=accumulator.n_samples, sample_offset=0, reference_chunks=len(parts))
    frame = Frame(buffers=accumulator.to_buffers(), meta=meta)
    folder = out_dir / "items" / item.item_id
    return _reference_record(plan, frame, sum(part["seconds"] for part in parts), folder, out_dir, files)


def _finish_record(plan: DatasetPlan, item: ItemSpec, partial: dict, out_dir: Path) -> dict:
    scene, _ = item_scene(plan, item)
    files = partial["files"]
    for entry in files.values():
        entry["sha256"] = sha256_file(out_dir / entry["path"])
    return {
        "index": item.index, "id": item.item_id, "split": item.split,
        "volume": str(plan.volumes[item.volume_index].path), "volume_index": item.volume_index,
        "transfer_function": str(plan.volumes[item.volume_index].transfer_functions[item.tf_index]),
        "transfer_function_jitter": partial["jitter"], "view": item.view, "seed": str(item.seed),
        "camera": scene.to_dict()["camera"], "lights": [light.to_dict() for light in scene.lights],
        "environment": scene.environment.to_dict(), "input_spp": list(plan.input_spp),
        "reference": partial["reference"], "files": files,
    }


@dataclass
class DatasetSummary:
    n_items: int
    n_done_before: int
    per_split: dict[str, int]
    total_samples: int
    seconds: float
    worst_reference_error: float
    worst_reference_psnr_db: float | None
    uncertified: list[str]


def build_dataset(plan_path, out_dir, *, resume: bool = False, workers: int | None = None,
                  scheduler: str | None = None, dashboard: bool = False,
                  on_progress: Callable[[int, int], None] | None = None, limit: int | None = None,
                  numba_threads: int | None = None) -> DatasetSummary:
    """Render every item of the plan into ``out_dir``; see the module docstring.

    ``workers`` starts a local Dask cluster (processes, one thread each, numba threads so that the
    total matches the cores, bound to 127.0.0.1); ``scheduler`` uses an existing one. Neither: serial
    in this process (numba threads in the kernel). ``limit`` stops after that many new items (for tests);
    ``numba_threads`` overrides the numba threads of each local worker (for benchmarks).
    """
    plan = load_plan(plan_path)
    out_dir = Path(out_dir)
    from ..outputs import check_output_folder

    check_output_folder(out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    _check_or_write_plan_record(plan, out_dir, resume)
    _remove_partials(out_dir)

    items = plan.items()
    records = {}
    if resume:
        for record in read_manifest(out_dir):
            if record["index"] in records:
                continue
            if record_is_intact(out_dir, record):
                records[record["index"]] = record
        write_manifest(out_dir, list(records.values()))
    elif read_manifest(out_dir):
        raise UserError(f"{out_dir}: already holds a dataset; use --resume to continue it or choose another --out")
    done_before = len(records)
    todo = [item for item in items if item.index not in records]
    if limit is not None:
        todo = todo[:limit]
    started = time.perf_counter()
    if on_progress:
        on_progress(len(records), len(items))

    def finished(record):
        records[record["index"]] = record
        write_manifest(out_dir, list(records.values()))
        if on_progress:
            on_progress(len(records), len(items))

    plan_arguments = (str(Path(plan_path).resolve()), plan.fingerprint)
    if workers is None and scheduler is None:
        for item in todo:
            finished(_run_item_serially(plan, item, plan_arguments, out_dir))
    else:
        from .cluster import run_on_cluster

        run_on_cluster(plan, todo, plan_arguments, out_dir, finished, workers=workers, scheduler=scheduler,
                       dashboard=dashboard, numba_threads=numba_threads)
    seconds = time.perf_counter() - started
    return summarize(plan, list(records.values()), done_before, seconds)


def _run_item_serially(plan, item, plan_arguments, out_dir) -> dict:
    chunked = plan.reference_chunks > 1
    partial = render_item_inputs(*plan_arguments, item.index, str(out_dir), not chunked)
    if chunked:
        parts = [render_reference_chunk(*plan_arguments, item.index, chunk) for chunk in range(plan.reference_chunks)]
        partial["reference"] = finish_chunked_reference(plan, item, parts, out_dir, partial["files"])
    return _finish_record(plan, item, partial, out_dir)


def summarize(plan, records, done_before, seconds) -> DatasetSummary:
    per_split: dict[str, int] = {name: 0 for name, _ in plan.splits}
    total_samples = 0
    worst_error = 0.0
    worst_psnr = None
    uncertified = []
    for record in records:
        per_split[record["split"]] = per_split.get(record["split"], 0) + 1
        pixels = plan.height * plan.width if plan.crop is None else plan.crop[0] * plan.crop[1]
        total_samples += pixels * (sum(plan.input_spp) + record["reference"]["spp"])
        worst_error = max(worst_error, record["reference"]["mean_relative_error"])
        psnr = record["reference"]["psnr_vs_converged_db"]
        if psnr is not None:
            worst_psnr = psnr if worst_psnr is None else min(worst_psnr, psnr)
        if not record["reference"]["certified"]:
            uncertified.append(record["id"])
    return DatasetSummary(len(records), done_before, per_split, total_samples, seconds, worst_error, worst_psnr,
                          uncertified)


def _check_or_write_plan_record(plan: DatasetPlan, out_dir: Path, resume: bool) -> None:
    from ..io.atomic import atomic_path

    path = out_dir / PLAN_RECORD
    if path.exists():
        try:
            stored = json.loads(path.read_text())
        except json.JSONDecodeError:
            raise UserError(f"{path}: not valid JSON; the dataset folder is damaged")
        if stored.get("plan_sha256") != plan.fingerprint:
            raise UserError(f"{out_dir}: was built from a different plan; choose another --out")
        if not resume:
            raise UserError(f"{out_dir}: already holds this dataset; use --resume to continue it")
        return
    record = {"tool": "tracer", "version": __version__, "plan": str(plan.source), "plan_sha256": plan.fingerprint,
              "plan_as_parsed": plan.raw, "items": len(plan.items()),
              "input_sample_base": 2**40}
    with atomic_path(path) as temporary:
        temporary.write_text(json.dumps(record, indent=2, sort_keys=True, default=str))


def _remove_partials(out_dir: Path) -> None:
    for path in out_dir.rglob("*.partial-*"):
        if path.is_file():
            path.unlink()
