"""Kernel building blocks against outside references: scipy.ndimage, numpy.gradient,
Henyey and Greenstein (1941), Lambert's cosine law."""

import math

import numpy as np
import pytest
from numba import njit

from tracer._kernels.rng import uniform, uniform_numpy
from tracer._kernels.sampling import (gradient_bricked, henyey_greenstein, sample_cosine, sample_henyey_greenstein,
                                      trilinear, trilinear_bricked)


@njit(cache=False)
def _sample_many(field, points):
    out = np.empty(points.shape[0])
    for n in range(points.shape[0]):
        out[n] = trilinear(field, points[n, 0], points[n, 1], points[n, 2])
    return out


def test_trilinear_equals_scipy_map_coordinates(rng):
    """scipy.ndimage.map_coordinates(order=1) interpolates trilinearly between samples at integer
    coordinates; ours must agree everywhere inside the box, on anisotropic random volumes."""
    from scipy.ndimage import map_coordinates

    for shape in [(5, 7, 4), (16, 9, 12)]:
        field = rng.normal(size=shape).astype(np.float32)
        points = rng.uniform(0, 1, size=(4000, 3)) * (np.array(shape) - 1)
        points[:20] = np.floor(points[:20])          # exactly on voxel centres
        points[20:40, 0] = shape[0] - 1              # on the far face
        expected = map_coordinates(field.astype(np.float64), points.T, order=1, mode="nearest")
        np.testing.assert_allclose(_sample_many(field, points), expected, rtol=0, atol=2e-6)


@njit(cache=False)
def _gradients(bricks, shape):
    out = np.empty((shape[0], shape[1], shape[2], 3))
    for i in range(shape[0]):
        for j in range(shape[1]):
            for k in range(shape[2]):
                out[i, j, k] = gradient_bricked(bricks, shape, float(i), float(j), float(k))
    return out


def test_gradient_at_voxel_centres_equals_numpy_gradient(rng):
    """numpy.gradient: central differences inside, first-order one-sided differences at the edges."""
    from tracer.volumes import Volume

    for shape in [(6, 8, 5), (11, 19, 10)]:         # the second spans several bricks
        field = rng.normal(size=shape).astype(np.float32)
        arrays = Volume(field).to_arrays()
        expected = np.stack(np.gradient(field.astype(np.float64)), axis=-1)
        np.testing.assert_allclose(_gradients(arrays.bricks, arrays.shape), expected, atol=1e-5)


@njit(cache=False)
def _hg_directions(g, n):
    out = np.empty((n, 3))
    for s in range(n):
        out[s] = sample_henyey_greenstein(0.0, 0.0, 1.0, g, uniform(7, s, 0, 0), uniform(7, s, 0, 1))
    return out


@pytest.mark.parametrize("g", [-0.6, 0.0, 0.3, 0.85])
def test_henyey_greenstein_sampling_matches_its_density(g):
    """Henyey and Greenstein (1941): p(cos) on the sphere integrates to 1 and has mean cosine g.
    A chi-square test compares the histogram of sampled cosines with the density's bin integrals."""
    from scipy import integrate, stats

    n = 200_000
    directions = _hg_directions(g, n)
    np.testing.assert_allclose(np.linalg.norm(directions, axis=1), 1.0, atol=1e-12)
    cosines = directions[:, 2]
    edges = np.linspace(-1, 1, 41)
    observed, _ = np.histogram(cosines, edges)
    expected = np.array([integrate.quad(lambda c: 2 * math.pi * henyey_greenstein(c, g), a, b)[0]
                         for a, b in zip(edges[:-1], edges[1:])])
    assert expected.sum() == pytest.approx(1.0, abs=1e-9)               # normalised over the sphere
    statistic, p_value = stats.chisquare(observed, expected * n)
    assert p_value > 1e-3, (statistic, p_value)
    standard_error = cosines.std() / math.sqrt(n)
    assert abs(cosines.mean() - g) < 4 * standard_error + 1e-12          # mean cosine is g
    # azimuth is uniform
    azimuth = np.arctan2(directions[:, 1], directions[:, 0])
    counts, _ = np.histogram(azimuth, np.linspace(-math.pi, math.pi, 17))
    assert stats.chisquare(counts).pvalue > 1e-3


def test_henyey_greenstein_normalises_for_extreme_g():
    from scipy import integrate

    for g in [-0.95, 0.95]:
        total = integrate.quad(lambda c: 2 * math.pi * henyey_greenstein(c, g), -1, 1, points=[1.0, -1.0], limit=200)[0]
        assert total == pytest.approx(1.0, rel=1e-6)


@njit(cache=False)
def _cosine_directions(nx, ny, nz, n):
    out = np.empty((n, 3))
    for s in range(n):
        out[s] = sample_cosine(nx, ny, nz, uniform(3, s, 0, 0), uniform(3, s, 0, 1))
    return out


def test_cosine_sampling_follows_lamberts_law():
    """Lambert's cosine law: density cos(theta)/pi on the hemisphere, so cos(theta)^2 is uniform
    and the mean cosine is 2/3."""
    from scipy import stats

    normal = np.array([0.3, -0.5, 0.8])
    normal /= np.linalg.norm(normal)
    directions = _cosine_directions(*normal, 100_000)
    cosines = directions @ normal
    assert cosines.min() >= 0
    assert cosines.mean() == pytest.approx(2 / 3, abs=4 * cosines.std() / math.sqrt(len(cosines)))
    assert stats.kstest(cosines**2, "uniform").pvalue > 1e-3


def test_counter_generator_is_pure_and_uniform():
    """The same counters give the same number in numba and NumPy; moments match U(0, 1)
    (mean 1/2, variance 1/12) and neighbouring counters are uncorrelated."""
    pixels = np.arange(200_000, dtype=np.uint64)
    a = uniform_numpy(5, pixels, 3, 0)
    b = uniform_numpy(5, pixels, 3, 1)
    assert uniform(5, 123, 3, 0) == a[123]
    assert abs(a.mean() - 0.5) < 4 * math.sqrt(1 / 12 / len(a))
    assert a.var() == pytest.approx(1 / 12, rel=0.01)
    assert abs(np.corrcoef(a, b)[0, 1]) < 0.01
    assert abs(np.corrcoef(a[:-1], a[1:])[0, 1]) < 0.01
    assert a.min() >= 0 and a.max() < 1


@njit(cache=False)
def _sample_bricked(bricks, shape, points):
    out = np.empty(points.shape[0])
    for n in range(points.shape[0]):
        out[n] = trilinear_bricked(bricks, shape, points[n, 0], points[n, 1], points[n, 2])
    return out


def test_bricked_layout_samples_the_same_values(rng):
    """The bricked copy of the field gives the very same trilinear values (same arithmetic, same order)
    as the plain array, including points on brick faces and at the far edges."""
    from tracer.volumes import Volume

    for shape in [(9, 17, 12), (20, 8, 33)]:
        volume = Volume(rng.normal(size=shape).astype(np.float32))
        arrays = volume.to_arrays()
        points = rng.uniform(0, 1, size=(3000, 3)) * (np.array(shape) - 1)
        points[:100] = np.round(points[:100] / 8) * 8             # on brick faces
        points[100:120] = np.array(shape) - 1                     # far corner
        np.testing.assert_array_equal(_sample_bricked(arrays.bricks, arrays.shape, points),
                                      _sample_many(volume.data, points))
