"""The work of one dataset item: its scene, its input renders and reference, and its manifest record.

These functions run in this process or on a Dask worker (they take a plan's path and fingerprint and
an item index, and return plain records), so :mod:`.run` and :mod:`.cluster` both call them and
neither imports the other. Sample ranges: the reference over [0, R), each input of the spp ladder
over its own range above ``INPUT_SAMPLE_BASE``, all with the item's seed (see :mod:`.run`).
"""

from __future__ import annotations

import dataclasses
import functools
import math
import time
from pathlib import Path

import numpy as np

from ..errors import UserError
from ..rendering.accumulate import Accumulator
from ..rendering.buffers import Frame
from .manifest import sha256_file
from .plan import DatasetPlan, ItemSpec, load_plan


@functools.lru_cache(maxsize=4)
def _cached_plan(path: str, fingerprint: str) -> DatasetPlan:
    plan = load_plan(path)
    if plan.fingerprint != fingerprint:
        raise UserError(f"{path}: the plan changed while the dataset was being built")
    return plan


@functools.lru_cache(maxsize=8)
def _cached_volume(path: str, spacing, origin):
    from ..volumes import load_volume

    return load_volume(path, spacing_mm=spacing, origin_mm=origin)


@functools.lru_cache(maxsize=32)
def _cached_transfer_function(path: str):
    from ..optics.transfer import load_transfer_function

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
    from ..outputs.exr import write_exr
    from ..outputs.npz import write_npz

    frame.meta["render_seconds"] = None
    frame.meta["compile_seconds"] = None
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
    if plan.sequence is not None:
        return _render_sequence_item(plan, scene, jitter, folder, Path(out_dir))
    files = {}
    ladders = [(plan.input_ranges(), "", "input")]
    if plan.noisy_pairs:                   # the second of each pair: same spp, samples of its own
        ladders.append((plan.pair_ranges(), "_pair", "input_pair"))
    for ranges, suffix, role in ladders:
        for spp, (start, stop) in zip(plan.input_spp, ranges):
            started = time.perf_counter()
            frame = render(scene, spp=spp, first_sample=start)
            seconds = time.perf_counter() - started
            for name, path in _write(frame, folder, f"spp{spp:04d}{suffix}", plan.formats).items():
                files[name] = {"path": str(path.relative_to(Path(out_dir))), "spp": spp, "sample_range": [start, stop],
                               "seconds": round(seconds, 4), "role": role}
    record = {"files": files, "jitter": jitter}
    if with_reference:
        started = time.perf_counter()
        frame = render(scene, spp=plan.reference_spp if (plan.reference_target_error or plan.reference_min_psnr) is None
                       else max(plan.reference_spp, 2),
                       target_error=plan.reference_target_error, target_psnr=plan.reference_min_psnr)
        seconds = time.perf_counter() - started
        record["reference"] = _reference_record(plan, frame, seconds, folder, out_dir, files)
    return record


def _render_sequence_item(plan, scene, jitter, folder: Path, out_dir: Path) -> dict:
    """A sequence item: per frame of the plan's camera path, the input ladder and a reference, each with motion
    vectors and disocclusion against the same file of the previous frame. Frame f's reference takes samples
    [f R, (f + 1) R), its inputs the ladder's ranges shifted by f x sum(ladder): all disjoint."""
    from ..rendering.noise import residual_noise
    from ..sequence.render import render_frame

    cameras = plan.sequence.cameras(scene.camera)
    spacing = float(np.mean(scene.volume.spacing))
    files, previous = {}, {}
    shift = sum(plan.input_spp)
    errors, psnrs, reference_seconds = [], [], 0.0
    for f, camera in enumerate(cameras):
        frame_scene = dataclasses.replace(scene, camera=camera)
        about = {"frame": f, "frames": len(cameras), "kind": plan.sequence.kind, "same_noise": False}
        jobs = [(spp, start + f * shift, "input", f"spp{spp:04d}") for spp, (start, _) in zip(plan.input_spp, plan.input_ranges())]
        jobs.append((plan.reference_spp, f * plan.reference_spp, "reference", "reference"))
        for spp, start, role, name in jobs:
            started = time.perf_counter()
            frame = render_frame(frame_scene, spp, start, previous.get(name), spacing, about)
            seconds = time.perf_counter() - started
            previous[name] = (camera, frame.buffers)
            if role == "reference":
                noise = residual_noise(frame.buffers)
                errors.append(noise.mean_relative_error)
                psnrs.append(noise.psnr_db)
                reference_seconds += seconds
            for key, path in _write(frame, folder, f"frame{f:04d}/{name}", plan.formats).items():
                files[key] = {"path": str(path.relative_to(out_dir)), "spp": spp, "sample_range": [start, start + spp],
                              "seconds": round(seconds, 4), "role": role, "frame": f}
    finite = [p for p in psnrs if math.isfinite(p)]
    reference = {"spp": plan.reference_spp, "mean_relative_error": round(max(errors), 6),
                 "psnr_vs_converged_db": round(min(finite), 3) if finite else None, "certified": True,
                 "seconds": round(reference_seconds, 4), "worst_of_frames": len(cameras)}
    return {"files": files, "jitter": jitter, "reference": reference, "frames": len(cameras)}


def _reference_record(plan, frame, seconds, folder, out_dir, files) -> dict:
    from ..rendering.noise import residual_noise

    noise = residual_noise(frame.buffers)
    for name, path in _write(frame, folder, "reference", plan.formats).items():
        files[name] = {"path": str(path.relative_to(Path(out_dir))), "spp": frame.spp,
                       "sample_range": [frame.meta["first_sample"], frame.meta["first_sample"] + frame.spp],
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
    frame = render(scene, spp=stop - start, first_sample=start)
    return {"chunk": chunk, "sums": frame.accumulator.sums, "n_samples": frame.accumulator.n_samples,
            "first_sample": start, "seconds": time.perf_counter() - started, "meta": frame.meta}


def _chunk_range(spp: int, chunks: int, chunk: int) -> tuple[int, int]:
    edges = np.linspace(0, spp, chunks + 1).round().astype(int)
    return int(edges[chunk]), int(edges[chunk + 1])


def _pooled_chunks(plan: DatasetPlan, parts: list[dict], first_sample: int) -> Accumulator:
    """The sums of consecutive chunks added in chunk order (the same on any executor)."""
    sums = parts[0]["sums"].copy()
    for part in parts[1:]:
        sums += part["sums"]
    return Accumulator(sums.shape[0], sums.shape[1], len(plan.settings.feature_levels), first_sample=first_sample,
                       sums=sums, features=plan.settings.features, n_samples=sum(part["n_samples"] for part in parts))


def finish_chunked_reference(plan: DatasetPlan, item: ItemSpec, parts: list[dict], out_dir: Path, files: dict) -> dict:
    """Add the chunks' sums in chunk order and write the reference (and, with ``reference_halves``, its halves:
    the first and the second half of the chunks, each a render of its own samples)."""
    parts = sorted(parts, key=lambda part: part["chunk"])
    accumulator = _pooled_chunks(plan, parts, 0)
    meta = dict(parts[0]["meta"])
    meta.update(spp=accumulator.n_samples, first_sample=0, reference_chunks=len(parts))
    frame = Frame(buffers=accumulator.to_buffers(), meta=meta)
    folder = out_dir / "items" / item.item_id
    seconds = sum(part["seconds"] for part in parts)
    if plan.reference_halves:
        halves = []
        middle = len(parts) // 2
        for number, group in ((1, parts[:middle]), (2, parts[middle:])):
            half = _pooled_chunks(plan, group, group[0]["first_sample"])
            half_meta = dict(meta)
            half_meta.update(spp=half.n_samples, first_sample=half.first_sample, reference_chunks=len(group))
            half_frame = Frame(buffers=half.to_buffers(), meta=half_meta)
            halves.append(half_frame)
            for name, path in _write(half_frame, folder, f"reference_half{number}", plan.formats).items():
                files[name] = {"path": str(path.relative_to(Path(out_dir))), "spp": half.n_samples,
                               "sample_range": [half.first_sample, half.first_sample + half.n_samples],
                               "seconds": round(sum(part["seconds"] for part in group), 4), "role": "reference_half"}
        # the reference's radiance is the mean of the halves' stored values: the halves average to it exactly
        mean = (halves[0]["radiance"].astype(np.float64) + halves[1]["radiance"].astype(np.float64)) / 2.0
        frame.buffers["radiance"] = mean.astype(np.float32)
    return _reference_record(plan, frame, seconds, folder, out_dir, files)


def finish_record(plan: DatasetPlan, item: ItemSpec, partial: dict, out_dir: Path) -> dict:
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
        **({"frames": partial["frames"], "path": plan.sequence.kind} if "frames" in partial else {}),
    }
