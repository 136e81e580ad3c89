"""Render orchestration: progressive passes, stopping rules, checkpoints and the result.

The numba kernel adds samples [s0, s1) of a band of rows to float64 sums. :func:`render` ties
four parts together, each doing one thing: :class:`PassPlanner` sizes the kernel calls (each well
under a second, so progress updates and Ctrl-C land quickly); :func:`run_pass` makes one pass's
calls and keeps the sums whole when Ctrl-C arrives; :class:`StoppingRule` decides when to stop
(spp, a target error or PSNR, a time limit); :mod:`.checkpoint` saves and restores the sums.
"""

from __future__ import annotations

import functools
import math
import time
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

import numpy as np

from .. import __version__
from ..config import num_threads
from ..errors import UserError
from ..scene import Scene
from .accumulate import Accumulator
from .buffers import Frame
from .checkpoint import fingerprint as scene_fingerprint
from .checkpoint import load_checkpoint, save_checkpoint
from .noise import ResidualNoise, residual_noise

#: The spp cap of a render stopped by a target when no spp is given.
DEFAULT_TARGET_SPP_CAP = 65536

#: Why a render stopped, in words (``meta["stopped"]`` holds the code).
STOP_REASONS = {"spp": "reached {spp} spp", "target_error": "target error {target_error:g} met after {spp} spp",
                "target_psnr": "target PSNR {target_psnr:g} dB met after {spp} spp",
                "time_limit": "time limit reached after {spp} spp", "interrupted": "interrupted after {spp} spp"}


def describe_stop(meta: dict) -> str:
    """``meta["stopped"]`` in words, e.g. "target error 0.02 met after 188 spp"."""
    template = STOP_REASONS.get(meta.get("stopped"), "{stopped}")
    return template.format(**{"target_error": math.nan, "target_psnr": math.nan, **meta})


@dataclass(frozen=True)
class RenderProgress:
    """Reported after every kernel call."""

    spp_done: int
    spp_total: int
    samples_done: int          # paths traced in this run (pixels x spp, partial passes included)
    elapsed_seconds: float
    relative_error: float | None


class PassPlanner:
    """Sizes the kernel calls so one takes about ``pass_seconds``: several spp of the whole image
    when a spp is cheap, one spp of a band of rows when it is not. The first pass is one spp of
    every row, which measures the cost."""

    def __init__(self, height: int, pass_seconds: float):
        self.height = height
        self.pass_seconds = pass_seconds
        self.rows_per_call = height
        self.spp_per_pass = 1
        self.seconds_per_row_sample: float | None = None

    def measured(self, seconds: float, n_rows: int, n_samples: int) -> None:
        rate = seconds / (n_rows * n_samples)
        previous = self.seconds_per_row_sample
        self.seconds_per_row_sample = rate if previous is None else min(rate, 2 * previous) * 0.5 + previous * 0.5

    def plan_next(self) -> None:
        per_spp = self.seconds_per_row_sample * self.height
        if per_spp > self.pass_seconds:
            self.spp_per_pass = 1
            self.rows_per_call = max(1, min(self.height, int(self.pass_seconds / self.seconds_per_row_sample)))
        else:
            self.rows_per_call = self.height
            self.spp_per_pass = max(1, min(int(self.pass_seconds / max(per_spp, 1e-9)), 2 * self.spp_per_pass))


@dataclass
class StoppingRule:
    """When a render ends: at ``spp_cap``, at a target error or PSNR, or past a time limit."""

    spp_cap: int
    target_error: float | None = None
    target_psnr: float | None = None
    time_limit: float | None = None

    @property
    def targeted(self) -> bool:
        return self.target_error is not None or self.target_psnr is not None

    def noise(self, accumulator: Accumulator) -> ResidualNoise | None:
        """The render's residual noise, when a target needs it and two samples give a variance."""
        if self.targeted and accumulator.n_samples >= 2:
            return residual_noise(accumulator.to_buffers())
        return None

    def reason(self, accumulator: Accumulator, noise: ResidualNoise | None, elapsed: float) -> str | None:
        """The code of why to stop now (see :data:`STOP_REASONS`), or None to go on."""
        if noise is not None and self.target_error is not None and noise.mean_relative_error <= self.target_error:
            return "target_error"
        if noise is not None and self.target_psnr is not None and noise.psnr_db >= self.target_psnr:
            return "target_psnr"
        if self.time_limit is not None and elapsed >= self.time_limit:
            return "time_limit"
        if accumulator.n_samples >= self.spp_cap:
            return "spp"
        return None


def spp_cap(settings_spp: int, spp: int | None, targeted: bool) -> int:
    """The most samples a render takes: ``spp`` when given; with a target and no ``spp``,
    :data:`DEFAULT_TARGET_SPP_CAP`; otherwise the scene's spp."""
    if spp is not None:
        cap = int(spp)
    elif targeted:
        cap = DEFAULT_TARGET_SPP_CAP
    else:
        cap = settings_spp
    if cap < 1:
        raise UserError(f"spp must be at least 1, got {cap}")
    return cap


class KernelCall:
    """The path kernel bound to one scene's arrays; counts field samples and times its first load."""

    def __init__(self, scene: Scene, skipping: bool, roulette: bool = True):
        from .arguments import kernel_arguments, transport_arguments, uses_transport_kernel

        self.arguments, self.skip = kernel_arguments(scene, skipping, roulette)
        if uses_transport_kernel(scene):
            from .._kernels.transport import render_rows_transport

            self.kernel = render_rows_transport
            self.arguments += transport_arguments(scene, self.arguments)
        else:
            from .._kernels.integrate import render_rows

            self.kernel = render_rows
        self.seed = scene.settings.seed
        self.counts = np.zeros((scene.camera.image_size[0], 2), np.int64)
        self.done = np.zeros(1, np.int64)

    def compile(self, sums: np.ndarray) -> float:
        """Compile (or load from the cache) the kernel for these argument types with a call over no rows;
        returns its seconds, 0 when this process already has it."""
        if self.kernel.signatures:
            return 0.0
        start = time.perf_counter()
        self.kernel(*self.arguments, self.seed, 0, 0, 0, 0, self.skip, sums, self.counts, self.done)
        self.done[0] = 0
        return time.perf_counter() - start

    def __call__(self, row_start: int, row_end: int, sample_start: int, sample_end: int, sums: np.ndarray) -> None:
        self.kernel(*self.arguments, self.seed, row_start, row_end, sample_start, sample_end, self.skip, sums,
                    self.counts, self.done)


def run_pass(call: KernelCall, accumulator: Accumulator, planner: PassPlanner, n: int,
             report: Callable[[int], None] | None) -> None:
    """Add the next ``n`` samples of every row, in bands of ``planner.rows_per_call`` rows.

    A kernel call is never cut short, and Python raises Ctrl-C only after it returns; ``call.done``
    (written by the kernel as its last act) says how far the pass got: a complete pass is counted,
    a partial one undone, so the sums always match ``n_samples`` when the interrupt propagates.
    """
    height = planner.height
    rows = planner.rows_per_call
    s0 = accumulator.next_sample
    backup = accumulator.sums.copy() if rows < height else None
    try:
        for r0 in range(0, height, rows):
            r1 = min(height, r0 + rows)
            started = time.perf_counter()
            call(r0, r1, s0, s0 + n, accumulator.sums)
            planner.measured(time.perf_counter() - started, r1 - r0, n)
            if report is not None and r1 < height:
                report(r1)
    except KeyboardInterrupt:
        if call.done[0] == height:
            accumulator.n_samples += n
        elif call.done[0] > 0:
            accumulator.sums[...] = backup
        raise
    accumulator.n_samples += n
    call.done[0] = 0


def render(scene: Scene, *, spp: int | None = None, seed: int | None = None, first_sample: int = 0,
           target_error: float | None = None, target_psnr: float | None = None, time_limit: float | None = None,
           threads: int | None = None,
           on_progress: Callable[[RenderProgress], None] | None = None, checkpoint_path=None,
           checkpoint_every: float | None = None, resume: bool = False, pass_seconds: float = 0.4,
           skipping: bool = True, roulette: bool = True, per_sample=None) -> Frame:
    """Path-trace ``scene`` and return its buffers.

    Parameters
    ----------
    scene : Scene
    spp, seed : int, optional
        Override the scene's samples per pixel and seed. With a target (``target_error`` or
        ``target_psnr``), ``spp`` is the cap (default 65536).
    first_sample : int
        First sample index; renders with the same seed and disjoint ranges can be pooled.
    target_error : float, optional
        Stop once the mean relative standard error of radiance over covered pixels is at most this.
    target_psnr : float, optional
        Stop once the PSNR (dB, peak 1 on linear radiance) of the render against the converged image,
        as implied by its variance buffer, reaches this (see :func:`residual_noise`).
    time_limit : float, optional
        Stop after the pass that crosses this many seconds.
    threads : int, optional
        numba threads for this call, at least 1 (the result does not depend on it).
    on_progress : callable, optional
        Called with a :class:`RenderProgress` after each kernel call.
    checkpoint_path : path, optional
        Where to keep a checkpoint every ``checkpoint_every`` seconds; removed when the render completes.
    resume : bool
        Continue from ``checkpoint_path`` (bit-exact with an uninterrupted render).
    skipping : bool
        Step over empty macrocells (exact: the result is bit-identical either way; off only for benchmarks).
    roulette : bool
        Russian roulette on shadow and environment rays once their transmittance falls below 0.02
        (unbiased; off only for measurements: slower, the same expected image).
    per_sample : optional
        A sink (``tracer.outputs.samples.SampleWriter``) with ``count`` and ``add(accumulator)``: the first
        ``count`` samples are rendered one pass each and handed to it before they join the sums (the same
        additions in the same order, so the render's bits do not change).

    Returns
    -------
    Frame
        Buffers of the file contract and ``meta``; ``meta["stopped"]`` says why it ended (a code of
        :data:`STOP_REASONS`; :func:`describe_stop` words it). ``meta["render_seconds"]`` is the
        rendering alone; compiling or loading the kernel on a process's first render is
        ``meta["compile_seconds"]``.

    Notes
    -----
    Ctrl-C between kernel calls ends the render with the complete passes so far (their true
    spp); a KeyboardInterrupt before the first complete pass propagates.
    """
    settings = scene.settings
    rule = StoppingRule(spp_cap(settings.spp, spp, target_error is not None or target_psnr is not None),
                        target_error, target_psnr, time_limit)
    seed = settings.seed if seed is None else int(seed)
    if first_sample < 0:
        raise UserError(f"first sample must be >= 0, got {first_sample}")
    if target_error is not None and not target_error > 0:
        raise UserError(f"target error must be > 0, got {target_error}")
    scene = scene.with_overrides(seed=seed)
    height, width = scene.camera.image_size
    fingerprint = functools.lru_cache(maxsize=1)(lambda: scene_fingerprint(scene))   # hashed only if a checkpoint is touched

    accumulator, previous_seconds = None, 0.0
    if resume:
        if checkpoint_path is None or not Path(checkpoint_path).exists():
            raise UserError(f"{checkpoint_path}: no checkpoint to resume from")
        accumulator, previous_seconds = load_checkpoint(checkpoint_path, fingerprint(), first_sample)
    if accumulator is None:
        accumulator = Accumulator(height, width, len(settings.feature_levels), first_sample=first_sample,
                                  features=settings.features)
    if per_sample is not None and (resume or per_sample.count > rule.spp_cap):
        raise UserError("--per-sample: cannot be combined with --resume" if resume else
                        f"--per-sample: {per_sample.count} samples asked for, but the render takes at most {rule.spp_cap} spp")

    call = KernelCall(scene, skipping, roulette)
    planner = PassPlanner(height, pass_seconds)
    stopped = None
    noise = None
    with num_threads(threads):
        compile_seconds = call.compile(accumulator.sums)
        start = time.perf_counter()
        last_checkpoint = start

        def report(rows_done: int = height, n: int = 0) -> None:
            if on_progress is not None:
                error = None if noise is None else noise.mean_relative_error
                on_progress(RenderProgress(accumulator.n_samples, rule.spp_cap,
                                           (accumulator.n_samples * height + rows_done * n) * width,
                                           time.perf_counter() - start, error))

        try:
            while accumulator.n_samples < rule.spp_cap:
                n = min(planner.spp_per_pass, rule.spp_cap - accumulator.n_samples)
                if per_sample is not None and accumulator.n_samples < per_sample.count:
                    n = 1
                    one = Accumulator(height, width, len(settings.feature_levels), first_sample=accumulator.next_sample,
                                      features=settings.features)
                    run_pass(call, one, planner, 1, lambda rows: report(rows, 1))
                    per_sample.add(one)
                    accumulator.sums += one.sums          # each channel gains one value per sample: the same bits
                    accumulator.n_samples += 1
                else:
                    run_pass(call, accumulator, planner, n, lambda rows: report(rows, n))
                elapsed = time.perf_counter() - start
                noise = rule.noise(accumulator)
                report()
                if checkpoint_path is not None and checkpoint_every is not None and \
                        time.perf_counter() - last_checkpoint >= checkpoint_every and accumulator.n_samples < rule.spp_cap:
                    save_checkpoint(checkpoint_path, accumulator, fingerprint(), previous_seconds + elapsed)
                    last_checkpoint = time.perf_counter()
                stopped = rule.reason(accumulator, noise, elapsed)
                if stopped is not None:
                    break
                planner.plan_next()
        except KeyboardInterrupt:
            if accumulator.n_samples == 0:
                raise
            stopped = "interrupted"
        seconds = previous_seconds + time.perf_counter() - start
    if checkpoint_path is not None:
        if stopped == "interrupted":
            save_checkpoint(checkpoint_path, accumulator, fingerprint(), seconds)
        else:
            Path(checkpoint_path).unlink(missing_ok=True)
    return frame_of(scene, accumulator, field_samples=(int(call.counts[:, 0].sum()), int(call.counts[:, 1].sum())),
                    stopped=stopped or "spp", seconds=seconds, compile_seconds=compile_seconds,
                    target_error=rule.target_error, target_psnr=rule.target_psnr)


def frame_of(scene: Scene, accumulator: Accumulator, *, field_samples: tuple[int, int], stopped: str,
             seconds: float, compile_seconds: float, target_error: float | None = None,
             target_psnr: float | None = None) -> Frame:
    """The finished render: the accumulator's buffers and the meta of the file contract (README, "What a render
    writes"); with a target, the residual noise it reached. ``field_samples``: (taken, in non-empty cells)."""
    settings = scene.settings
    height, width = scene.camera.image_size
    meta = {
        "tool": "tracer", "version": __version__,
        "scene": scene.to_dict(),
        "spp": accumulator.n_samples, "seed": settings.seed, "first_sample": accumulator.first_sample,
        "width": width, "height": height, "render_seconds": round(seconds, 4),
        "compile_seconds": round(compile_seconds, 4),
        "events": settings.events, "step_mm": settings.step_mm, "stopped": stopped,
        "field_samples": field_samples[0], "field_samples_in_nonempty_cells": field_samples[1],
    }
    buffers = accumulator.to_buffers()
    if target_error is not None or target_psnr is not None:
        noise = residual_noise(buffers)
        meta["relative_error"] = noise.mean_relative_error
        meta["psnr_vs_converged_db"] = noise.psnr_db if math.isfinite(noise.psnr_db) else None
        if target_error is not None:
            meta["target_error"] = target_error
        if target_psnr is not None:
            meta["target_psnr"] = target_psnr
    return Frame(buffers=buffers, meta=meta, accumulator=accumulator)
