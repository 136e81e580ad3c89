"""Small scenes built in code for the tests."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from tracer.scene.camera import Camera
from tracer.scene import Environment, Light, RenderSettings, Scene
from tracer.optics.transfer import TransferFunction
from tracer.volumes import Volume


def blob_volume(n=12, spacing=(1.0, 0.8, 1.2)) -> Volume:
    """A smooth Gaussian blob on an anisotropic grid, centred on the world origin."""
    i = np.arange(n) - (n - 1) / 2
    x, y, z = np.meshgrid(i, i, i, indexing="ij")
    field = np.exp(-(x**2 + y**2 + z**2) / (n * n / 12.0)).astype(np.float32)
    origin = -(n - 1) / 2 * np.asarray(spacing)
    return Volume(field, directions=np.diag(spacing), origin=origin)


def blob_transfer() -> TransferFunction:
    return TransferFunction(np.array([0.0, 0.2, 1.0]), np.array([0.0, 0.3, 0.9]),
                            np.array([0.0, 1.0]), np.array([[0.9, 0.5, 0.2], [0.3, 0.6, 0.9]]))


def blob_scene(width=6, height=6, spp=64, **settings) -> Scene:
    volume = blob_volume()
    camera = Camera(position=(20.0, -25.0, 8.0), target=(0.0, 0.0, 0.0), fov_deg=22, width=width, height=height)
    environment = Environment(kind="sky", colors=((0.2, 0.3, 0.6), (0.6, 0.6, 0.6), (0.1, 0.1, 0.1)))
    toward = np.array([0.5, -0.5, 0.7])
    lights = (Light("directional", tuple(toward / np.linalg.norm(toward)), (2.0, 2.0, 2.0)),
              Light("point", (10.0, -10.0, 10.0), (200.0, 150.0, 100.0)))
    options = dict(spp=spp, step_mm=0.4, events=2, scattering="graded", phase_g=0.4)
    options.update(settings)
    return Scene(volume, blob_transfer(), camera, lights, environment, RenderSettings(**options))


def homogeneous_box_scene(opacity=0.2, size_mm=10.0, width=16, height=16, spp=256, step_mm=0.5,
                          background=(1.0, 0.5, 0.25)) -> Scene:
    """A box of constant extinction and black albedo seen head-on through a narrow field of view."""
    n = 21
    volume = Volume(np.ones((n, n, n), np.float32), directions=np.eye(3) * size_mm / (n - 1))
    tf = TransferFunction(np.array([0.0, 2.0]), np.array([opacity, opacity]), np.array([0.0, 2.0]), np.zeros((2, 3)))
    centre = size_mm / 2
    camera = Camera(position=(-40.0, centre, centre), target=(centre, centre, centre), fov_deg=0.5,
                    width=width, height=height)
    environment = Environment(kind="constant", background=background)
    return Scene(volume, tf, camera, (), environment, RenderSettings(spp=spp, step_mm=step_mm, events=2))


def example_scene(folder: Path, root: Path, name: str, extra: str = "") -> Path:
    """A copy of examples/NAME.toml in ``folder`` with its relative paths made absolute."""
    text = (root / "examples" / f"{name}.toml").read_text()
    text = text.replace("../sample_volumes/", f"{root}/sample_volumes/").replace("../transfer_functions/",
                                                                                 f"{root}/transfer_functions/")
    path = Path(folder) / f"{name}.toml"
    path.write_text(text + extra)
    return path


#: Buffers that are plain means of per-sample values: pooling reproduces them to float32 rounding.
MEAN_BUFFERS = ("radiance", "alpha", "albedo", "event1_depth", "event2_depth", "event1_hit", "event2_hit")


def assert_pools_to_the_whole(merged, whole) -> None:
    """README: renders of one seed over disjoint sample ranges pool into the render of their union to float32
    rounding. The float64 sums are rebuilt from the files' float32 means (mean x n), so a mean buffer may differ by
    one unit in the last place; buffers formed from differences (the variance, components of averaged normals and
    positions) by float32 rounding of their largest value: 2e-6 of it."""
    for key in whole.buffers:
        a = np.ascontiguousarray(merged[key], np.float32)
        b = np.ascontiguousarray(whole[key], np.float32)
        if key in MEAN_BUFFERS:
            ulps = np.abs(a.view(np.int32).astype(np.int64) - b.view(np.int32).astype(np.int64))
            assert ulps.max() <= 1, (key, ulps.max())
        scale = float(np.abs(b).max())
        assert np.abs(a.astype(np.float64) - b).max() <= 2e-6 * scale, key
