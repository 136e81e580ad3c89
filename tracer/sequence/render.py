"""Render a sequence frame by frame: every buffer of a single render, plus ``motion``, ``motion_event2`` and
``disocclusion``, and each frame's camera matrices in ``meta["sequence"]`` (README, "Sequences").

Noise: frame k takes samples ``[k spp, (k + 1) spp)`` of the sequence's seed, so frames have independent noise;
``same_noise`` gives every frame samples ``[0, spp)``.
"""

from __future__ import annotations

import dataclasses
import shutil
from pathlib import Path
from typing import Callable

import numpy as np

from ..errors import UserError
from .motion import DisocclusionCounter, motion_vectors, projection, world_to_camera


def estimate_bytes(scene, frames: int) -> int:
    """An upper bound on the frames' files: float32 buffers, uncompressed, with the three sequence buffers."""
    from ..rendering.accumulate import n_channels

    height, width = scene.camera.image_size
    channels = n_channels(len(scene.settings.feature_levels), bool(scene.settings.features)) + 5
    return frames * height * width * channels * 4


def check_disk(out: Path, needed: int) -> None:
    from ..outputs.save import nearest_existing

    free = shutil.disk_usage(nearest_existing(out)).free
    if needed > free:
        raise UserError(f"{out}: the sequence needs up to {needed / 2**30:.1f} GiB and {free / 2**30:.1f} GiB are free; "
                        "render fewer or smaller frames, or choose another --out")


def _finished_frame(path: Path, k: int, scene_dict: dict, spp: int, same_noise: bool):
    """The buffers of a frame written by an earlier run of the same sequence, or None if it is not that."""
    from ..outputs.npz import read_npz

    try:
        frame = read_npz(path)
    except UserError:
        return None
    sequence = frame.meta.get("sequence", {})
    if (sequence.get("frame") != k or frame.meta.get("scene") != scene_dict or frame.spp != spp
            or sequence.get("same_noise") != same_noise):
        return None
    return frame


def _time_steps(scene, path):
    """frame -> volume: the scene's own, or the path's time steps, each loaded once and checked against the first
    for shape, spacing and origin (a sequence of a changing field on one grid)."""
    import functools

    from ..volumes import load_volume

    if not path.volumes:
        return lambda k: scene.volume
    first = None

    @functools.lru_cache(maxsize=2)
    def load(name: str):
        nonlocal first
        try:
            volume = load_volume(name)
        except UserError as error:
            raise UserError(f"[sequence] volumes: {error}") from None
        if first is None:
            first = (name, volume)
        elif volume.shape != first[1].shape or not np.allclose(volume.index_to_world_matrix,
                                                               first[1].index_to_world_matrix):
            raise UserError(f"{name}: [sequence] volumes: its grid (shape {volume.shape}, spacing "
                            f"{', '.join(f'{v:g}' for v in volume.spacing)} mm) differs from {first[0]}'s (shape "
                            f"{first[1].shape}, spacing {', '.join(f'{v:g}' for v in first[1].spacing)} mm); "
                            "every time step must share one grid")
        return volume

    for name in path.volumes:                      # every check before the first frame (each step is read again
        load(name)                                 # when its frame comes: only two are held at a time)
    return lambda k: load(path.volume_of(k))


def render_frame(scene, spp: int, first_sample: int, previous, spacing: float, about: dict, threads=None):
    """One frame of a sequence: a render of ``scene`` (its camera the frame's) over its samples, with ``motion``,
    ``motion_event2`` and ``disocclusion`` against ``previous`` = (camera, buffers) or None, and ``meta["sequence"]``."""
    from ..rendering import render

    sink = None
    if previous is not None:
        sink = DisocclusionCounter(spp, previous[0], previous[1]["event1_depth"], previous[1]["event1_hit"], spacing)
    frame = render(scene, spp=spp, first_sample=first_sample, threads=threads, per_sample=sink)
    camera, before = scene.camera, previous[0] if previous is not None else None
    frame.buffers["motion"] = motion_vectors(frame["event1_position"], frame["event1_hit"], camera, before)
    frame.buffers["motion_event2"] = motion_vectors(frame["event2_position"], frame["event2_hit"], camera, before)
    frame.buffers["disocclusion"] = (sink.fraction(frame.spp) if sink is not None
                                     else np.zeros(frame["alpha"].shape, np.float32))
    frame.meta["sequence"] = {
        **about, "world_to_camera": world_to_camera(camera).tolist(), "projection": projection(camera).tolist(),
        "convention": "camera x right, y down, z forward; [u z, v z, z, 1] = projection @ world_to_camera @ "
                      "[x, y, z, 1], u, v in pixels from the top-left corner",
    }
    frame.meta["render_seconds"] = None                     # files carry no timings: same bytes on any machine
    frame.meta["compile_seconds"] = None
    return frame


def render_sequence(scene, path, out, *, spp: int | None = None, same_noise: bool = False, resume: bool = False,
                    threads: int | None = None, on_frame: Callable[[int, int], None] | None = None) -> list[Path]:
    """Render the frames of camera ``path`` (a :class:`CameraPath`) of ``scene`` into ``out/frame0000.npz, ...``.

    With ``resume``, frames an earlier run of the same sequence finished are kept (and the last of them read
    back as the previous frame), so a killed run continues to the same bits; without it, a folder that already
    holds frames is refused.
    """
    import json

    from ..outputs.npz import write_npz

    out = Path(out)
    spp = int(spp or scene.settings.spp)
    cameras = path.cameras(scene.camera)
    existing = sorted(out.glob("frame[0-9][0-9][0-9][0-9].npz")) if out.is_dir() else []
    if existing and not resume:
        raise UserError(f"{out}: already holds {len(existing)} frames; use --resume to continue, or choose another --out")
    if resume:
        for partial in out.glob(".frame*.partial-*") if out.is_dir() else []:
            partial.unlink()
    check_disk(out, estimate_bytes(scene, len(cameras) - len(existing)))
    steps = _time_steps(scene, path)
    spacing = float(np.mean(scene.volume.spacing))
    written, previous = [], None
    for k, camera in enumerate(cameras):
        frame_scene = dataclasses.replace(scene, camera=camera, volume=steps(k))
        target = out / f"frame{k:04d}.npz"
        if resume and target.is_file():
            kept = _finished_frame(target, k, json.loads(json.dumps(frame_scene.to_dict())), spp, same_noise)
            if kept is not None:
                written.append(target)
                previous = (camera, kept.buffers)
                if on_frame is not None:
                    on_frame(k + 1, len(cameras))
                continue
        frame = render_frame(frame_scene, spp, 0 if same_noise else k * spp, previous, spacing,
                             {"frame": k, "frames": len(cameras), "kind": path.kind, "same_noise": same_noise}, threads)
        written.append(write_npz(target, frame))
        previous = (camera, frame.buffers)
        if on_frame is not None:
            on_frame(k + 1, len(cameras))
    return written
