"""``tracer preview``: a small, quick render that predicts the cost of the full one."""

from __future__ import annotations

import time

from ..scene import Scene
from .buffers import Frame
from .passes import render


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
