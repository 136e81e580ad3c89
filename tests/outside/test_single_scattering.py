"""Scattered light of homogeneous media against quadrature of the single-scattering integral.

Source: the README's optical model, integrated by ``scipy.integrate.quad`` over the exact geometry
(tests/reference/media.py): a box and a ball, albedo not black, lit from behind the camera, from behind the medium,
by a point light near it (inverse-square law, two distances) and by a constant environment. The reference is
averaged over each pixel's square (the README's box filter) by 3 x 3 Gauss-Legendre points
(``numpy.polynomial.legendre.leggauss``). Each case agrees within 4 standard errors of the image mean and 1%, and
mean z^2 over the pixels lies inside the two-sided chi-square range (``scipy.stats.chi2``).
"""

import math

import numpy as np
import pytest

import tracer
from tests.reference.camera import Pinhole
from tests.reference.media import (Box, Directional, Point, Sphere, constant_environment_on_sphere, henyey_greenstein,
                                   single_scattering)

from .scenes import (ball_transfer, ball_volume, box_volume, camera_table, chi2_bounds, flat_transfer, image_mean_z,
                     scene, unit)

ALBEDO = np.array([0.8, 0.6, 0.4])
OPACITY = 0.3                       # per mm (reference length 1 mm)
SIGMA = -math.log(1 - OPACITY)      # extinction per mm: the README's opacity correction, sigma = -ln(1 - opacity) / 1 mm
G = 0.3
SIZE = 8
FINE = 161                          # ball grid points per axis (0.0625 mm)

BOX_CAMERA = dict(position=(-30.0, 5.0, 5.0), target=(5.0, 5.0, 5.0), fov_deg=3.0)
BALL_CAMERA = dict(position=(-3.0, -34.0, 2.0), target=(0.0, 0.0, 0.0), fov_deg=4.0)

LIGHTS = {
    "behind the camera": {"kind": "directional", "toward": [-1.0, 0.35, 0.25], "irradiance": [1.0, 0.9, 0.8]},
    "behind the medium": {"kind": "directional", "toward": [0.9, -0.3, 0.35], "irradiance": [1.0, 0.9, 0.8]},
    "point near the box": {"kind": "point", "position": [4.0, -3.0, 12.0], "intensity": [150.0, 135.0, 120.0]},
}
BALL_LIGHTS = {
    "behind the camera": {"kind": "directional", "toward": [0.2, -1.0, 0.3], "irradiance": [1.0, 0.9, 0.8]},
    "point near the ball": {"kind": "point", "position": [5.0, -2.0, 4.0], "intensity": [60.0, 54.0, 48.0]},
}


def reference_light(table):
    colour = np.asarray(table.get("irradiance", table.get("intensity")), float)
    if table["kind"] == "directional":
        return Directional(table["toward"]), colour
    return Point(table["position"]), colour


def phase(d, l):
    # the scattering cosine is d . l (README, "The optical model")
    return henyey_greenstein(float(d @ l), G)


def pixel_average(camera, radiance_along, order=3):
    """(SIZE, SIZE) mean of ``radiance_along(position, direction)`` over each pixel's square (Gauss-Legendre)."""
    pinhole = Pinhole(**camera, width=SIZE, height=SIZE)
    nodes, weights = np.polynomial.legendre.leggauss(order)
    nodes, weights = (nodes + 1) / 2, weights / 2           # on [0, 1], summing to 1
    rows, cols = np.mgrid[0:SIZE, 0:SIZE]
    image = np.zeros((SIZE, SIZE))
    for jr, wr in zip(nodes, weights):
        for jc, wc in zip(nodes, weights):
            rays = pinhole.rays(rows, cols, jr, jc)
            image += wr * wc * np.array([[radiance_along(pinhole.position, rays[r, c]) for c in range(SIZE)]
                                         for r in range(SIZE)])
    return image


def reference_image(shape, camera, light, order=3):
    return pixel_average(camera, lambda p, d: single_scattering(shape, SIGMA, p, d, light, phase), order)


def check(frame, reference):
    z, relative = image_mean_z(frame["radiance"].astype(float), frame["radiance_variance"].astype(float), reference)
    # one channel: the media here are grey times a colour, so a sample's three channels are one number scaled,
    # and their z are equal (counting them as independent would shrink the chi-square range by sqrt(3))
    per_pixel = ((frame["radiance"] - reference) / np.sqrt(frame["radiance_variance"]))[..., 1]
    low, high = chi2_bounds(per_pixel.size)
    return z, relative, float((per_pixel ** 2).mean()), (low, high)


def assert_matches(frame, reference, tolerance):
    """Image mean within 4 standard errors per channel and ``tolerance`` relative; per-pixel mean z^2 inside the
    two-sided chi-square range."""
    z, relative, mean_z2, (low, high) = check(frame, reference)
    assert np.all(np.abs(z) < 4), (z, relative)
    assert np.all(np.abs(relative) < tolerance), relative
    assert low < mean_z2 < high, (mean_z2, low, high)


def ball_case(tmp_path, light_name, **render):
    """The fine ball (161^3 grid, 0.002 mm ramp at radius 4 mm) under one of BALL_LIGHTS: (frame, reference)."""
    volume = ball_volume(tmp_path, n=FINE)
    transfer = ball_transfer(tmp_path, OPACITY, ALBEDO, radius=4.0, edge=0.001)
    frame = run_case(tmp_path, volume, transfer, BALL_CAMERA, BALL_LIGHTS[light_name], spp=4096, **render)
    light, colour = reference_light(BALL_LIGHTS[light_name])
    return frame, reference_image(Sphere((0, 0, 0), 4.0), BALL_CAMERA, light)[..., None] * ALBEDO * colour


def run_case(tmp_path, volume, transfer, camera, light_table, spp, **render):
    path = scene(tmp_path, volume, transfer, camera_table(**camera, width=SIZE, height=SIZE), [light_table],
                 spp=spp, phase_g=G, **render)
    return tracer.render(path, seed=7)


@pytest.mark.parametrize("estimator", ["march", "track"])
@pytest.mark.parametrize("case", sorted(LIGHTS))
def test_box_single_scattering_matches_quadrature(tmp_path, case, estimator):
    """Under "track" the camera ray's event comes from delta tracking and the shadow rays' transmittance from ratio
    tracking: both against Beer-Lambert along the exact chords here."""
    volume = box_volume(tmp_path)
    transfer = flat_transfer(tmp_path, OPACITY, ALBEDO)
    frame = run_case(tmp_path, volume, transfer, BOX_CAMERA, LIGHTS[case], spp=2048, step_mm=0.5, estimator=estimator)
    light, colour = reference_light(LIGHTS[case])
    scalar = reference_image(Box((0, 0, 0), (10, 10, 10)), BOX_CAMERA, light)
    reference = scalar[..., None] * ALBEDO * colour
    assert_matches(frame, reference, 0.01)


@pytest.mark.parametrize("case", sorted(BALL_LIGHTS))
def test_ball_single_scattering_matches_quadrature(tmp_path, case):
    """The ball is the distance field |x| on a 161^3 grid (0.0625 mm) with a 0.002 mm opacity ramp at radius 4 mm,
    rendered at step 0.02 mm: the reference's hard sphere is the limit of all three. Each still shows at coarser
    settings with the nearby point light (measured: a 41^3 grid adds about 0.07%, a 0.1 mm ramp 0.2%, and the step
    the bias the next test documents), which 4 standard errors here (0.05%) would catch."""
    frame, reference = ball_case(tmp_path, case, step_mm=0.02)
    assert_matches(frame, reference, 0.01)


def test_shadow_ray_step_bias_near_a_surface_is_as_documented(tmp_path):
    """README, "Limitations": at step_mm = 0.5 the ball lit by the nearby point light renders about 1.3% too
    bright against quadrature (the shadow march's first, partial step; 0.39% at 0.25 mm, 0.09% at 0.1, measured
    over 8 seeds); we require 1% to 2%, and at 0.02 mm (the previous test) agreement within the noise."""
    frame, reference = ball_case(tmp_path, "point near the ball", step_mm=0.5)
    z, relative, _, _ = check(frame, reference)
    assert np.all((0.01 < relative) & (relative < 0.02)), relative


def test_tracking_has_no_shadow_step_bias_near_a_surface(tmp_path):
    """The previous case under "track" (README, "Limitations"): at the same 0.5 mm step, within 4 standard errors
    of quadrature and 0.3% (ratio tracking has no step)."""
    frame, reference = ball_case(tmp_path, "point near the ball", step_mm=0.5, estimator="track")
    assert_matches(frame, reference, 0.003)


@pytest.mark.slow
def test_constant_environment_on_the_ball_matches_quadrature(tmp_path):
    """Isotropic scattering of a constant environment (radiance c) against the nested quadrature of
    tests/reference/media.py; the background is black, so only scattered light is seen."""
    volume = ball_volume(tmp_path, n=FINE)
    transfer = ball_transfer(tmp_path, OPACITY, ALBEDO, radius=4.0, edge=0.001)
    colour = np.array([0.5, 0.7, 0.9])
    environment = {"kind": "constant", "radiance": list(colour), "background": [0.0, 0.0, 0.0]}
    path = scene(tmp_path, volume, transfer, camera_table(**BALL_CAMERA, width=SIZE, height=SIZE), [], environment,
                 spp=4096, step_mm=0.02, phase_g=0.0)
    frame = tracer.render(path, seed=3)
    sphere = Sphere((0, 0, 0), 4.0)
    scalar = pixel_average(BALL_CAMERA, lambda p, d: constant_environment_on_sphere(sphere, SIGMA, p, d), order=2)
    reference = scalar[..., None] * ALBEDO * colour
    assert_matches(frame, reference, 0.01)


@pytest.mark.slow
def test_point_light_follows_the_inverse_square_law(tmp_path):
    """A small, optically thin box lit by a point light at 30 mm and at 60 mm along one line from its centre.
    Against quadrature at each distance (inverse-square law inside), and the ratio of the two renders against
    the ratio of the references, which the law puts within (1 +- 1/30)^2 of 4 for a box 2 mm across."""
    size = 2.0
    volume = box_volume(tmp_path, size_mm=size, n=9)
    transfer = flat_transfer(tmp_path, 0.05, ALBEDO)
    sigma = -math.log(1 - 0.05)
    camera = dict(position=(-20.0, 1.0, 1.0), target=(1.0, 1.0, 1.0), fov_deg=2.0)
    direction = unit([-0.3, -1.0, 0.6])
    means, references, errors = [], [], []
    for distance in (30.0, 60.0):
        table = {"kind": "point", "position": list(np.array([1.0, 1.0, 1.0]) + distance * direction),
                 "intensity": [900.0, 900.0, 900.0]}
        path = scene(tmp_path, volume, transfer, camera_table(**camera, width=SIZE, height=SIZE), [table],
                     spp=4096, step_mm=0.25, phase_g=G, name=f"d{distance:g}.toml")
        frame = tracer.render(path, seed=11)
        light = Point(table["position"])
        box = Box((0, 0, 0), (size, size, size))
        scalar = pixel_average(camera, lambda p, d: single_scattering(box, sigma, p, d, light, phase))
        reference = scalar[..., None] * ALBEDO * 900.0
        z, relative, mean_z2, (low, high) = check(frame, reference)
        assert np.all(np.abs(z) < 4), (distance, z, relative)
        assert np.all(np.abs(relative) < 0.01), (distance, relative)
        means.append(frame["radiance"].astype(float).mean())
        errors.append(math.sqrt(frame["radiance_variance"].astype(float).sum()) / frame["radiance"].size)
        references.append(reference.mean())
    expected_ratio = references[0] / references[1]
    assert (1 - 1 / 30) ** 2 * 4 < expected_ratio < (1 + 1 / 30) ** 2 * 4
    ratio = means[0] / means[1]
    ratio_error = ratio * math.hypot(errors[0] / means[0], errors[1] / means[1])
    assert abs(ratio - expected_ratio) < 4 * ratio_error, (ratio, expected_ratio, ratio_error)
