"""The numba kernel against the independent NumPy oracle of tests/reference/oracle.py.

Both implement the README's estimator ("The optical model") from the same text and nothing else: the oracle reads
the scene files itself and imports nothing from ``tracer``; its random numbers are NumPy's. Per pixel and channel,
z = (kernel - oracle) / sqrt(var_kernel + var_oracle) is close to standard normal when they agree, so mean z^2 must
lie inside the two-sided range a chi-square mean over that many values leaves with probability 1e-4 per side
(``scipy.stats.chi2``), widened by 25% because both variances are themselves estimated from 128 samples; no
|z| above 5.5; and, since both run the same estimator, the kernel's variance buffer must match the oracle's
sample variance (pooled ratio within [0.8, 1.25]): a variance 4x too large or too small fails either check.
"""

import numpy as np
import pytest

import tracer
from tests.reference.files import write_latlong, write_transfer, write_volume
from tests.reference.oracle import Oracle

from .scenes import camera_table, chi2_bounds, scene

SPP = 128


def blob_files(folder):
    """A smooth Gaussian blob on an anisotropic grid (1, 0.8, 1.2 mm), centred on the world origin."""
    n, spacing = 12, np.array([1.0, 0.8, 1.2])
    i = np.arange(n) - (n - 1) / 2
    x, y, z = np.meshgrid(i, i, i, indexing="ij")
    field = np.exp(-(x ** 2 + y ** 2 + z ** 2) / (n * n / 12.0)).astype(np.float32)
    volume = write_volume(folder / "blob.nrrd", field, np.diag(spacing), -(n - 1) / 2 * spacing)
    transfer = write_transfer(folder / "blob.toml", [[0.0, 0.0], [0.2, 0.3], [1.0, 0.9]],
                              [[0.0, [0.9, 0.5, 0.2]], [1.0, [0.3, 0.6, 0.9]]])
    return volume, transfer


LIGHTS = [{"kind": "directional", "toward": list(np.array([0.5, -0.5, 0.7]) / np.linalg.norm([0.5, -0.5, 0.7])),
           "irradiance": [2.0, 2.0, 2.0]},
          {"kind": "point", "position": [10.0, -10.0, 10.0], "intensity": [200.0, 150.0, 100.0]}]
SKY = {"kind": "sky", "zenith": [0.2, 0.3, 0.6], "horizon": [0.6, 0.6, 0.6], "ground": [0.1, 0.1, 0.1]}

CASES = [("graded", 2, "sky")] + [pytest.param(s, k, e, marks=pytest.mark.slow) for s, k, e in [
    ("medium", 1, "sky"), ("interface", 2, "image"), ("graded", 3, "image"), ("graded", 4, "sky"),
    ("medium", 2, "image"), ("interface", 4, "sky")]]


def environment(folder, kind):
    if kind == "sky":
        return SKY
    # a smooth lat-long image brighter toward +x and the zenith, with one bright patch: orientation matters
    h, w = 16, 32
    polar = (np.arange(h) + 0.5) / h * np.pi
    azimuth = (np.arange(w) + 0.5) / w * 2 * np.pi
    image = np.zeros((h, w, 3), np.float32)
    image[..., 0] = 0.55 + 0.3 * np.cos(polar)[:, None] + 0.2 * np.cos(azimuth)[None, :]
    image[..., 1] = 0.4 + 0.1 * np.sin(azimuth)[None, :]
    image[..., 2] = 0.5 - 0.2 * np.cos(polar)[:, None]
    image[4, 3] = (6.0, 5.0, 4.0)
    path = write_latlong(folder / "sky.exr", image)
    return {"kind": "image", "path": str(path), "background": [0.05, 0.04, 0.03]}


@pytest.mark.parametrize("scattering,events,env", CASES)
def test_kernel_agrees_with_the_independent_oracle(tmp_path, scattering, events, env):
    volume, transfer = blob_files(tmp_path)
    camera = camera_table((20.0, -25.0, 8.0), (0.0, 0.0, 0.0), 22.0, 5, 5)
    path = scene(tmp_path, volume, transfer, camera, LIGHTS, environment(tmp_path, env), spp=SPP, events=events,
                 scattering=scattering, phase_g=0.4, step_mm=0.4, interface_gradient=0.15)
    frame = tracer.render(path)
    mean, variance, alpha = Oracle(path).render(SPP, seed=events)
    v_kernel = frame["radiance_variance"].astype(float)
    z = (frame["radiance"] - mean) / np.sqrt(v_kernel + variance + 1e-30)
    low, high = chi2_bounds(z.size)
    assert 0.75 * low < (z ** 2).mean() < 1.25 * high, ((z ** 2).mean(), low, high)
    assert np.abs(z).max() < 5.5
    ratio = v_kernel.sum() / variance.sum()
    assert 0.8 < ratio < 1.25, ratio
    assert abs(frame["alpha"].mean() - alpha.mean()) < 0.01
