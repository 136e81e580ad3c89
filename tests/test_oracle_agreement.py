"""The numba kernel against the plain NumPy oracle of tests/reference/oracle.py.

Both implement the estimator of the README, "The optical model", independently, with independent random numbers. Per
pixel and channel, z = (kernel - oracle) / sqrt(var_kernel + var_oracle) is close to standard
normal when they agree: we require mean z^2 within the range a chi-square statistic with this
many degrees of freedom falls in with overwhelming probability (below 2.0; expected 1), no
|z| above 5, and image means within 4 standard errors.
"""

import numpy as np
import pytest

from tracer.rendering import render

from .helpers import blob_scene
from .reference.oracle import Oracle

CASES = [("graded", 2)] + [pytest.param(scattering, events, marks=pytest.mark.slow) for scattering, events in
                           [("medium", 1), ("interface", 2), ("graded", 3), ("graded", 4), ("medium", 2), ("interface", 4)]]


@pytest.mark.parametrize("scattering,events", CASES)
def test_kernel_agrees_with_the_numpy_oracle(scattering, events):
    scene = blob_scene(width=5, height=5, spp=96, scattering=scattering, events=events)
    frame = render(scene)
    mean, variance, alpha = Oracle(scene).render(96, seed=events)
    z = (frame["radiance"] - mean) / np.sqrt(frame["radiance_variance"] + variance + 1e-30)
    assert (z**2).mean() < 2.0, (z**2).mean()
    assert np.abs(z).max() < 5.0
    n = z[..., 0].size
    standard_error = np.sqrt((frame["radiance_variance"] + variance).mean(axis=(0, 1)) / n)
    assert np.all(np.abs(frame["radiance"].mean(axis=(0, 1)) - mean.mean(axis=(0, 1))) < 4 * standard_error)
    assert abs(frame["alpha"].mean() - alpha.mean()) < 0.01
