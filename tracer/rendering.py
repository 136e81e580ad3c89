"""Render orchestration: progressive passes, stopping rules, checkpoints and the result.

The numba kernel adds samples [s0, s1) of a band of rows to float64 sums; this module
chooses the bands and passes (each kernel call well under a second, so progress updates
and Ctrl-C land quickly), stops at the requested spp, a target error or a time limit,
writes checkpoints and resumes from them bit-exactly.
"""

from __future__ import annotations

import functools
import math
import time
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

import numpy as np

from . import __version__
from .accumulate import Accumulator, _scene_key
from .buffers import Frame
from .config import num_threads
from .errors import UserError
from .scene import Scene

SHADING_CODES = {"phase": 0, "surface": 1, "hybrid": 2}
ENVIRONMENT_CODES = {"constant": 0, "sky": 1, "image": 2}
LIGHT_CODES = {"directional": 0, "point": 1}
DEFAULT_TARGET_ERROR_SPP_CAP = 65536


@dataclass(frozen=True)
class RenderProgress:
    """Reported after every kernel call."""

    spp_done: int
    spp_total: int
    samples_done: int          # paths traced in this run (pixels x spp, partial passes included)
    elapsed_seconds: float
    relative_error: float | None


def kernel_arguments(scene: Scene, skipping: bool = True) -> tuple:
    """The scene as the plain arrays and codes of :func:`tracer._kernels.integrate.render_rows` (before rows/samples/acc).

    The macrocell grid of the current transfer function is built every time (exact: empty cells
    have zero extinction everywhere); ``skipping`` decides whether rays step over empty cells.
    """
    volume = scene.volume
    low, high = volume.value_range
    transfer = scene.transfer_function.bake(low, high)
    cells = macrocells(volume.data, transfer)
    settings = scene.settings
    lights = np.zeros((len(scene.lights), 7))
    for index, light in enumerate(scene.lights):
        lights[index, 0] = LIGHT_CODES[light.kind]
        lights[index, 1:4] = light.vector
        lights[index, 4:7] = light.power
    environment = scene.environment
    image = scene.environment_image if scene.environment_image is not None else np.zeros((2, 2, 3), np.float32)
    background = np.zeros(3) if environment.background is None else np.asarray(environment.background, np.float64)
    value_range = max(high - low, 1e-12)
    gradient_scale = float(np.mean(volume.spacing)) / (value_range * settings.surface_gradient)
    return (
        volume.to_arrays(), transfer, cells, scene.camera.to_array(), lights,
        ENVIRONMENT_CODES[environment.kind], np.asarray(environment.colors, dtype=np.float64),
        np.ascontiguousarray(image, dtype=np.float32), background, environment.background is None,
        SHADING_CODES[settings.shading], settings.events, np.asarray(settings.feature_levels, dtype=np.float64),
        float(settings.step_mm), float(settings.phase_g), gradient_scale,
    ), bool(skipping)


def macrocells(field: np.ndarray, transfer) -> np.ndarray:
    """(ceil((nx-1)/8), ...) float32: the largest extinction inside each 8^3-voxel macrocell."""
    from ._kernels.integrate import CELL, build_macrocells

    shape = tuple(max(1, -(-(n - 1) // CELL)) for n in field.shape)
    out = np.empty(shape, np.float32)
    build_macrocells(field, transfer.extinction, transfer.lookup, out)
    return out


def render(scene: Scene, *, spp: int | None = None, seed: int | None = None, sample_offset: int = 0,
           target_error: float | None = None, target_psnr: float | None = None, time_limit: float | None = None,
           threads: int | None = None,
           on_progress: Callable[[RenderProgress], None] | None = None, checkpoint_path=None,
           checkpoint_every: float | None = None, resume: bool = False, pass_seconds: float = 0.4,
           skipping: bool = True) -> Frame:
    """Path-trace ``scene`` and return its buffers.

    Parameters
    ----------
    scene : Scene
    spp, seed : int, optional
        Override the scene's samples per pixel and seed. With ``target_error``, ``spp`` is the cap
        (default 65536).
    sample_offset : int
        First sample index; renders with the same seed and disjoint ranges can be merged.
    target_error : float, optional
        Stop once the mean relative standard error of radiance over covered pixels is at most this.
    target_psnr : float, optional
        Stop once the PSNR (dB, peak 1 on linear radiance) of the render against the converged image,
        as implied by its variance buffer, reaches this (see :func:`residual_noise`).
    time_limit : float, optional
        Stop after the pass that crosses this many seconds.
    threads : int, optional
        numba threads for this call (the result does not depend on it).
    on_progress : callable, optional
        Called with a :class:`RenderProgress` after each kernel call.
    checkpoint_path : path, optional
        Where to keep a checkpoint every ``checkpoint_every`` seconds; removed when the render completes.
    resume : bool
        Continue from ``checkpoint_path`` (bit-exact with an uninterrupted render).
    skipping : bool
        Step over empty macrocells (exact: the result is bit-identical either way; off only for benchmarks).

    Returns
    -------
    Frame
        Buffers of the file contract and ``meta``; ``meta["stopped"]`` says why it ended
        (``"spp"``, ``"target_error"``, ``"time_limit"``, ``"interrupted"``).

    Notes
    -----
    Ctrl-C between kernel calls ends the render with the complete passes so far (their true
    spp); a KeyboardInterrupt before the first complete pass propagates.
    """
    from ._kernels.integrate import render_rows

    settings = scene.settings
    spp = settings.spp if spp is None else int(spp)
    targeted = target_error is not None or target_psnr is not None
    if targeted and spp == settings.spp and spp < DEFAULT_TARGET_ERROR_SPP_CAP:
        spp_cap = DEFAULT_TARGET_ERROR_SPP_CAP
    else:
        spp_cap = spp
    seed = settings.seed if seed is None else int(seed)
    if spp_cap < 1:
        raise UserError(f"spp must be at least 1, got {spp_cap}")
    if sample_offset < 0:
        raise UserError(f"sample offset must be >= 0, got {sample_offset}")
    if target_error is not None and not target_error > 0:
        raise UserError(f"target error must be > 0, got {target_error}")
    scene = scene.with_overrides(seed=seed)
    height, width = scene.camera.image_size
    n_levels = len(settings.feature_levels)
    fingerprint = functools.lru_cache(maxsize=1)(lambda: _fingerprint(scene))   # hashed only if a checkpoint is touched

    accumulator = None
    previous_seconds = 0.0
    if resume:
        if checkpoint_path is None or not Path(checkpoint_path).exists():
            raise UserError(f"{checkpoint_path}: no checkpoint to resume from")
        accumulator, previous_seconds = _load_checkpoint(checkpoint_path, fingerprint(), sample_offset)
    if accumulator is None:
        accumulator = Accumulator(height, width, n_levels, sample_offset=sample_offset)

    arguments, skip = kernel_arguments(scene, skipping)
    counts = np.zeros((height, 2), np.int64)
    done = np.zeros(1, np.int64)
    start = time.perf_counter()
    last_checkpoint = start
    stopped = "spp"
    rows_per_call = height
    spp_per_pass = 1
    seconds_per_row_sample = None
    error = None
    noise = None
    try:
        with num_threads(threads):
            while accumulator.n_samples < spp_cap:
                n = min(spp_per_pass, spp_cap - accumulator.n_samples)
                s0 = accumulator.next_sample
                backup = accumulator.sums.copy() if rows_per_call < height else None
                try:
                    for r0 in range(0, height, rows_per_call):
                        r1 = min(height, r0 + rows_per_call)
                        t0 = time.perf_counter()
                        render_rows(*arguments, seed, r0, r1, s0, s0 + n, skip, accumulator.sums, counts, done)
                        dt = time.perf_counter() - t0
                        rate = dt / ((r1 - r0) * n)
                        seconds_per_row_sample = rate if seconds_per_row_sample is None else min(rate, 2 * seconds_per_row_sample) * 0.5 + seconds_per_row_sample * 0.5
                        if on_progress is not None and r1 < height:
                            on_progress(RenderProgress(accumulator.n_samples, spp_cap,
                                                       (accumulator.n_samples * height + r1 * n) * width,
                                                       time.perf_counter() - start, error))
                except KeyboardInterrupt:
                    # a kernel call is never cut short, and Python raises the interrupt only after it
                    # returns; ``done`` (written by the kernel itself) says how far the pass got: count a
                    # complete pass, undo a partial one, so the sums always match n_samples
                    if done[0] == height:
                        accumulator.n_samples += n
                    elif done[0] > 0:
                        accumulator.sums[...] = backup
                    raise
                accumulator.n_samples += n
                done[0] = 0
                elapsed = time.perf_counter() - start
                if targeted and accumulator.n_samples >= 2:
                    noise = residual_noise(accumulator.to_buffers())
                    error = noise.mean_relative_error
                if on_progress is not None:
                    on_progress(RenderProgress(accumulator.n_samples, spp_cap, accumulator.n_samples * height * width,
                                               elapsed, error))
                if checkpoint_path is not None and checkpoint_every is not None and \
                        time.perf_counter() - last_checkpoint >= checkpoint_every and accumulator.n_samples < spp_cap:
                    _save_checkpoint(checkpoint_path, accumulator, fingerprint(), previous_seconds + elapsed)
                    last_checkpoint = time.perf_counter()
                if target_error is not None and error is not None and error <= target_error:
                    stopped = "target_error"
                    break
                if target_psnr is not None and accumulator.n_samples >= 2 and noise.psnr_db >= target_psnr:
                    stopped = "target_psnr"
                    break
                if time_limit is not None and elapsed >= time_limit:
                    stopped = "time_limit"
                    break
                # size the next pass so one kernel call takes about pass_seconds
                per_spp = seconds_per_row_sample * height
                if per_spp > pass_seconds:
                    spp_per_pass = 1
                    rows_per_call = max(1, min(height, int(pass_seconds / seconds_per_row_sample)))
                else:
                    rows_per_call = height
                    spp_per_pass = max(1, min(int(pass_seconds / max(per_spp, 1e-9)), 2 * spp_per_pass))
    except KeyboardInterrupt:
        if accumulator.n_samples == 0:
            raise
        stopped = "interrupted"
    seconds = previous_seconds + time.perf_counter() - start
    if checkpoint_path is not None and stopped != "interrupted":
        Path(checkpoint_path).unlink(missing_ok=True)
    elif checkpoint_path is not None and stopped == "interrupted":
        _save_checkpoint(checkpoint_path, accumulator, fingerprint(), seconds)

    meta = {
        "tool": "tracer", "version": __version__,
        "scene": scene.to_dict(),
        "spp": accumulator.n_samples, "seed": seed, "sample_offset": accumulator.sample_offset,
        "width": width, "height": height, "render_seconds": round(seconds, 4),
        "events": settings.events, "step_mm": settings.step_mm, "stopped": stopped,
        "field_samples": int(counts[:, 0].sum()), "field_samples_in_nonempty_cells": int(counts[:, 1].sum()),
    }
    buffers = accumulator.to_buffers()
    if targeted:
        noise = residual_noise(buffers)
        meta["relative_error"] = noise.mean_relative_error
        meta["psnr_vs_converged_db"] = noise.psnr_db if math.isfinite(noise.psnr_db) else None
        if target_error is not None:
            meta["target_error"] = target_error
        if target_psnr is not None:
            meta["target_psnr"] = target_psnr
    return Frame(buffers=buffers, meta=meta, accumulator=accumulator)


@dataclass(frozen=True)
class ResidualNoise:
    """How far a render is from its converged image, estimated from its own variance buffer.

    mean_relative_error : mean over covered pixels (event 1 seen at least once) of
        ``sqrt(mean channel variance) / max(mean radiance, 1e-3)``.
    psnr_db : ``10 log10(1 / mean variance)`` over all pixels and channels: the expected PSNR
        (peak 1, linear radiance) of the render against the converged image, since the expected
        squared error of a mean equals its variance.
    """

    mean_relative_error: float
    psnr_db: float


def residual_noise(buffers) -> ResidualNoise:
    mean = np.asarray(buffers["radiance"], dtype=np.float64)
    variance = np.asarray(buffers["radiance_variance"], dtype=np.float64)
    covered = np.asarray(buffers["event1_hit"]) > 0
    relative = np.sqrt(variance.mean(axis=2)) / np.maximum(mean.mean(axis=2), 1e-3)
    error = float(relative[covered].mean()) if covered.any() else 0.0
    mse = float(variance.mean())
    psnr = math.inf if mse <= 0 else 10.0 * math.log10(1.0 / mse)
    return ResidualNoise(mean_relative_error=error, psnr_db=psnr)


def _fingerprint(scene: Scene) -> str:
    import hashlib

    digest = hashlib.sha256(scene.volume.data.tobytes()).hexdigest()
    return _scene_key({"scene": scene.to_dict()}) + f"|seed={scene.settings.seed}|volume={digest}"


def _save_checkpoint(path, accumulator: Accumulator, fingerprint: str, seconds: float) -> None:
    from .io.atomic import atomic_path

    with atomic_path(Path(path)) as temporary:
        with open(temporary, "wb") as handle:
            np.savez(handle, sums=accumulator.sums, n_samples=np.int64(accumulator.n_samples),
                     sample_offset=np.int64(accumulator.sample_offset), n_levels=np.int64(accumulator.n_levels),
                     fingerprint=np.array(fingerprint), seconds=np.float64(seconds))


def _load_checkpoint(path, fingerprint: str, sample_offset: int):
    path = Path(path)
    try:
        with np.load(path, allow_pickle=False) as data:
            stored = str(data["fingerprint"])
            sums = np.array(data["sums"])
            n_samples = int(data["n_samples"])
            offset = int(data["sample_offset"])
            n_levels = int(data["n_levels"])
            seconds = float(data["seconds"])
    except (OSError, ValueError, KeyError, EOFError) as error:
        raise UserError(f"{path}: not a readable checkpoint: {error}")
    if stored != fingerprint:
        raise UserError(f"{path}: checkpoint belongs to a different scene, seed or volume; remove it or render afresh")
    if offset != sample_offset:
        raise UserError(f"{path}: checkpoint starts at sample {offset}, not {sample_offset}")
    return Accumulator(sums.shape[0], sums.shape[1], n_levels, sample_offset=offset, sums=sums,
                       n_samples=n_samples), seconds


def preview_scene(scene: Scene, *, spp: int = 4, threads: int | None = None) -> tuple[Frame, float, float]:
    """A quarter-resolution render; returns it, the measured seconds per spp at full resolution, and
    the predicted seconds of the full render at the scene's spp.

    The first call compiles (or loads) the kernel on a 1-spp, 8 x 8 warm-up so timing excludes it.
    """
    import dataclasses

    camera = scene.camera
    small = dataclasses.replace(scene, camera=dataclasses.replace(
        camera, width=max(1, camera.width // 4), height=max(1, camera.height // 4), crop=None))
    warm = dataclasses.replace(scene, camera=dataclasses.replace(camera, width=8, height=8, crop=None))
    render(warm, spp=1, threads=threads)
    start = time.perf_counter()
    frame = render(small, spp=spp, threads=threads)
    seconds = time.perf_counter() - start
    pixel_ratio = (camera.image_size[0] * camera.image_size[1]) / (small.camera.width * small.camera.height)
    per_spp = seconds / spp * pixel_ratio
    return frame, per_spp, per_spp * scene.settings.spp
