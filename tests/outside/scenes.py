"""Scene files for the outside checks, written with tests/reference/files.py, and z statistics.

Only the public API renders (``tracer.render(path)``); everything the renders are compared with comes from
tests/reference/, which imports nothing from ``tracer``.
"""

from __future__ import annotations

import numpy as np

from tests.reference.files import write_scene, write_transfer, write_volume


def box_volume(folder, size_mm=10.0, n=21, value=1.0):
    """A box [0, size]^3 filled with one value: homogeneous wherever the field is defined."""
    return write_volume(folder / "box.nrrd", np.full((n, n, n), value, np.float32), np.eye(3) * size_mm / (n - 1),
                        (0.0, 0.0, 0.0))


def ball_volume(folder, n=41, half_extent=5.0):
    """The distance |x| (mm) from the origin on a grid spanning [-half_extent, half_extent]^3."""
    axis = np.linspace(-half_extent, half_extent, n)
    x, y, z = np.meshgrid(axis, axis, axis, indexing="ij")
    field = np.sqrt(x * x + y * y + z * z).astype(np.float32)
    spacing = axis[1] - axis[0]
    return write_volume(folder / "ball.nrrd", field, np.eye(3) * spacing, (axis[0],) * 3)


def slab_volume(folder):
    """A slab 40 x 40 x 10 mm whose value is the depth below its top face z = 10 mm: linear in z, so trilinear
    interpolation and central differences are exact and the normal is +z everywhere."""
    depth = np.linspace(10.0, 0.0, 21)
    field = np.broadcast_to(depth, (21, 21, 21)).astype(np.float32)
    return write_volume(folder / "slab.nrrd", field, np.diag([2.0, 2.0, 0.5]), (0.0, 0.0, 0.0))


def flat_transfer(folder, opacity, albedo, low=0.0, high=2.0, name="flat.toml"):
    """The same opacity (per mm) and albedo for every value in [low, high] (and, clamped, beyond)."""
    return write_transfer(folder / name, [[low, opacity], [high, opacity]], [[low, albedo], [high, albedo]])


def ball_transfer(folder, opacity, albedo, radius, edge=0.01):
    """Opacity ``opacity`` inside distance ``radius - edge``, 0 beyond ``radius + edge``: a ball of radius ``radius``."""
    return write_transfer(folder / "ball.toml", [[0.0, opacity], [radius - edge, opacity], [radius + edge, 0.0],
                                                 [radius + 50.0, 0.0]], [[0.0, albedo], [radius + 50.0, albedo]])


def camera_table(position, target, fov_deg, width, height, up=(0.0, 0.0, 1.0)):
    return {"position": list(position), "target": list(target), "up": list(up), "fov_deg": fov_deg,
            "width": width, "height": height}


def scene(folder, volume, transfer, camera, lights=(), environment=None, name="scene.toml", **render):
    settings = {"spp": 64, "seed": 0, "events": 2, "scattering": "medium", "phase_g": 0.0, "step_mm": 0.25}
    settings.update(render)
    return write_scene(folder / name, volume, transfer, camera, lights, environment, settings)


def image_mean_z(render_mean, render_variance, reference, reference_variance=None):
    """(z of the image mean per channel, relative difference per channel): z uses the variance buffers."""
    n = render_mean[..., 0].size
    variance = render_variance if reference_variance is None else render_variance + reference_variance
    standard_error = np.sqrt(variance.sum(axis=(0, 1))) / n
    difference = render_mean.mean(axis=(0, 1)) - reference.mean(axis=(0, 1))
    return difference / standard_error, difference / reference.mean(axis=(0, 1))


def chi2_bounds(dof: int, tail: float = 1e-4) -> tuple[float, float]:
    """Range of a chi-square statistic over ``dof`` (mean z^2) outside which it falls with probability ``tail`` per
    side (``scipy.stats.chi2``): the two-sided bound on mean z^2 for ``dof`` independent standard normals."""
    from scipy.stats import chi2

    return chi2.ppf(tail, dof) / dof, chi2.ppf(1 - tail, dof) / dof


def unit(v):
    v = np.asarray(v, float)
    return v / np.linalg.norm(v)

