"""One render spread over Dask workers: its sample range cut into chunks, rendered anywhere, pooled in order.

Chunk c covers samples ``[first + c K, first + (c + 1) K)`` (K = ``chunk_spp``, the last chunk may be shorter).
Each chunk is an ordinary render of its range, whose float64 sums come back; the sums are added in chunk
order, whatever order the workers finish in, so the result is bit-identical to rendering the same chunks one
after another in this process (``workers=None``), and does not depend on the number of workers. (A render
without chunks adds every sample to one running sum, so its bits differ from a chunked one by rounding.)

With a target error, chunks go out in rounds of two per worker and the error is checked between rounds.
A checkpoint is written after every chunk added to the sums (with ``checkpoint_path``), keyed to the scene
and the chunking, so ``resume`` continues a killed render bit-exactly. Ctrl-C cancels what is in flight and
ends with the chunks done so far.
"""

from __future__ import annotations

import functools
import json
import math
import time
from pathlib import Path
from typing import Callable

from ..errors import UserError


def chunk_ranges(first_sample: int, spp: int, chunk_spp: int) -> list[tuple[int, int]]:
    end = first_sample + spp
    return [(start, min(start + chunk_spp, end)) for start in range(first_sample, end, chunk_spp)]


def default_chunk_spp(spp: int, workers: int) -> int:
    """Four chunks per worker (at least one sample each): enough to balance uneven chunks, few enough to add up cheaply."""
    return max(1, math.ceil(spp / (4 * max(1, workers))))


@functools.lru_cache(maxsize=4)
def _scene(path: str, overrides_json: str):
    from ..scene import load_scene

    return load_scene(path).with_overrides(**json.loads(overrides_json))


def warm_scene(scene_path: str, overrides_json: str) -> bool:
    """On each worker before the chunks: load the scene and compile (or load) its kernel on a 2 x 2 image."""
    from ..rendering import render

    render(_scene(scene_path, overrides_json).with_overrides(width=2, height=2), spp=1)
    return True


def render_chunk(scene_path: str, overrides_json: str, start: int, stop: int) -> dict:
    """Render samples [start, stop) of the scene file with its overrides (on a worker or here); their sums."""
    from ..rendering import render

    frame = render(_scene(scene_path, overrides_json), spp=stop - start, first_sample=start)
    return {"start": start, "sums": frame.accumulator.sums, "n": frame.accumulator.n_samples,
            "field_samples": frame.meta["field_samples"],
            "nonempty": frame.meta["field_samples_in_nonempty_cells"]}


def render_chunked(scene_path, *, overrides: dict, chunk_spp: int, first_sample: int = 0,
                   target_error: float | None = None, workers: int | None = None, scheduler: str | None = None,
                   numba_threads: int | None = None, checkpoint_path=None, resume: bool = False,
                   on_progress: Callable | None = None):
    """Render the scene file in chunks of ``chunk_spp`` samples, on a local cluster of ``workers``, on the
    cluster at ``scheduler``, or here when both are None; see the module docstring. Returns a Frame."""
    from ..rendering.accumulate import Accumulator
    from ..rendering.checkpoint import fingerprint, load_checkpoint, save_checkpoint
    from ..rendering.passes import RenderProgress, frame_of, spp_cap
    from ..rendering.noise import residual_noise

    scene_path = str(Path(scene_path).resolve())
    overrides = {key: value for key, value in overrides.items() if value is not None}
    overrides_json = json.dumps(overrides, sort_keys=True)
    scene = _scene(scene_path, overrides_json)
    settings = scene.settings
    spp = spp_cap(settings.spp, overrides.get("spp"), target_error is not None)
    if chunk_spp < 1:
        raise UserError(f"--chunk-spp: must be at least 1, got {chunk_spp}")
    height, width = scene.camera.image_size
    key = fingerprint(scene) + f"|chunk_spp={chunk_spp}"
    accumulator = None
    if resume:
        if checkpoint_path is None or not Path(checkpoint_path).exists():
            raise UserError(f"{checkpoint_path}: no checkpoint to resume from")
        accumulator, _ = load_checkpoint(checkpoint_path, key, first_sample)
    if accumulator is None:
        accumulator = Accumulator(height, width, len(settings.feature_levels), first_sample=first_sample,
                                  features=settings.features)
    chunks = chunk_ranges(first_sample, spp, chunk_spp)
    next_chunk = accumulator.n_samples // chunk_spp
    counts = [0, 0]
    started = time.perf_counter()
    stopped, noise = None, None

    def add(result) -> None:
        accumulator.sums += result["sums"]
        accumulator.n_samples += result["n"]
        counts[0] += result["field_samples"]
        counts[1] += result["nonempty"]
        if checkpoint_path is not None and accumulator.n_samples < spp:
            save_checkpoint(checkpoint_path, accumulator, key, time.perf_counter() - started)
        if on_progress is not None:
            on_progress(RenderProgress(accumulator.n_samples, spp, accumulator.n_samples * height * width,
                                       time.perf_counter() - started,
                                       None if noise is None else noise.mean_relative_error))

    def met() -> bool:
        nonlocal noise
        if target_error is None:
            return False
        noise = residual_noise(accumulator.to_buffers())
        return noise.mean_relative_error <= target_error

    try:
        if workers is None and scheduler is None:
            for index in range(next_chunk, len(chunks)):
                add(render_chunk(scene_path, overrides_json, *chunks[index]))
                if met():
                    stopped = "target_error"
                    break
        else:
            stopped = _on_cluster(chunks, next_chunk, scene_path, overrides_json, add, met, workers, scheduler,
                                  numba_threads, rounds=target_error is not None)
    except KeyboardInterrupt:
        if accumulator.n_samples == 0:
            raise
        stopped = "interrupted"
    seconds = time.perf_counter() - started
    if checkpoint_path is not None:
        if stopped == "interrupted":
            save_checkpoint(checkpoint_path, accumulator, key, seconds)
        else:
            Path(checkpoint_path).unlink(missing_ok=True)
    frame = frame_of(scene, accumulator, field_samples=tuple(counts), stopped=stopped or "spp", seconds=seconds,
                     compile_seconds=0.0, target_error=target_error)
    frame.meta["chunk_spp"] = chunk_spp
    frame.meta["cluster"] = ({"workers": workers} if workers is not None
                             else {"scheduler": scheduler} if scheduler is not None else None)
    return frame


def _on_cluster(chunks, next_chunk, scene_path, overrides_json, add, met, workers, scheduler, numba_threads,
                rounds: bool) -> str | None:
    """Submit the chunks (in rounds of two per worker when a target is checked), add them in chunk order."""
    from distributed import as_completed

    from .client import client_for

    with client_for(workers, scheduler, numba_threads=numba_threads) as client:
        client.run(warm_scene, scene_path, overrides_json)
        n_workers = max(1, len(client.scheduler_info().get("workers", {})) or (workers or 1))
        size = 2 * n_workers if rounds else len(chunks)
        index = next_chunk
        while index < len(chunks):
            batch = range(index, min(index + size, len(chunks)))
            futures = {client.submit(render_chunk, scene_path, overrides_json, *chunks[c], pure=False,
                                     key=f"chunk-{c}-{chunks[c][0]}"): c for c in batch}
            done: dict[int, dict] = {}
            expected = batch.start
            try:
                for future in as_completed(list(futures)):
                    done[futures[future]] = future.result()
                    while expected in done:              # chunk order, whatever order they finish in
                        add(done.pop(expected))
                        expected += 1
            except BaseException:
                client.cancel(list(futures))
                raise
            index = batch.stop
            if met():
                return "target_error"
    return None
