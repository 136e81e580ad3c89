"""The renderer against closed forms and facts of Monte Carlo integration."""

import dataclasses
import math

import numpy as np
import pytest

from tracer.scene.camera import Camera
from tracer.rendering import render
from tracer.scene import Environment, RenderSettings, Scene
from tracer.optics.transfer import TransferFunction
from tracer.volumes import Volume

from .helpers import blob_scene, homogeneous_box_scene


@pytest.mark.parametrize("opacity,size_mm", [(0.05, 10.0), (0.2, 10.0), (0.5, 4.0)])
def test_homogeneous_box_follows_beer_lambert(opacity, size_mm):
    """Beer-Lambert law: through a homogeneous slab of extinction sigma and length L the
    transmittance is exp(-sigma L). With black albedo the pixel sees background x exp(-sigma L),
    and alpha = 1 - exp(-sigma L). Radiance is checked within 4 standard errors of the mean
    (from the variance buffer); alpha is deterministic here (no scattering randomness)."""
    scene = homogeneous_box_scene(opacity=opacity, size_mm=size_mm)
    frame = render(scene)
    sigma = -math.log(1 - opacity)
    transmittance = math.exp(-sigma * size_mm)
    background = np.array(scene.environment.background)
    mean = frame["radiance"].mean(axis=(0, 1))
    standard_error = np.sqrt(frame["radiance_variance"].mean(axis=(0, 1)) / frame["radiance"][..., 0].size)
    assert np.all(np.abs(mean - background * transmittance) <= 4 * standard_error + 1e-7)
    # per pixel: the chord of the pixel's centre ray through the box [0, size]^3 (slab test)
    rows, cols = np.mgrid[0:scene.camera.height, 0:scene.camera.width]
    d = scene.camera.ray_directions(rows, cols)
    p = np.asarray(scene.camera.position)
    with np.errstate(divide="ignore"):
        near = np.minimum((0 - p) / d, (size_mm - p) / d).max(axis=-1)
        far = np.maximum((0 - p) / d, (size_mm - p) / d).min(axis=-1)
    np.testing.assert_allclose(frame["alpha"], 1 - np.exp(-sigma * (far - near)), atol=2e-6)


def test_step_size_does_not_change_the_image():
    """Opacity correction (Engel et al. 2006) makes the result independent of the step. Renders
    at 0.25 mm and 1 mm must agree within 4 standard errors plus the discretisation bound of the
    midpoint rule on this smooth blob (stated: 1.5% of the mean radiance, 0.005 in alpha; the
    measured differences are well below)."""
    fine = render(blob_scene(width=10, height=10, spp=256, step_mm=0.25))
    coarse = render(blob_scene(width=10, height=10, spp=256, step_mm=1.0, seed=1))
    n = fine["radiance"][..., 0].size
    for key in ("radiance",):
        difference = fine[key].mean(axis=(0, 1)) - coarse[key].mean(axis=(0, 1))
        standard_error = np.sqrt((fine["radiance_variance"] + coarse["radiance_variance"]).mean(axis=(0, 1)) / n)
        bound = 0.015 * fine[key].mean(axis=(0, 1))
        assert np.all(np.abs(difference) <= 4 * standard_error + bound), (difference, standard_error, bound)
    assert abs(fine["alpha"].mean() - coarse["alpha"].mean()) < 0.005


def psnr(reference, image):
    peak = reference.max()
    return 10 * math.log10(peak**2 / np.mean((reference.astype(np.float64) - image) ** 2))


@pytest.mark.slow
def test_psnr_rises_three_decibels_per_doubling():
    """Monte Carlo error falls as 1/sqrt(N): MSE halves per doubling of spp, so PSNR rises by
    10 log10(2) = 3.01 dB per doubling (a fact of Monte Carlo integration). The fitted slope over
    1..32 spp against an independent 4096-spp reference must lie within 0.5 dB of that."""
    scene = blob_scene(width=20, height=20)
    reference = render(scene, spp=4096, seed=1000)["radiance"]
    ladder = [1, 2, 4, 8, 16, 32]
    values = [psnr(reference, render(scene, spp=spp, seed=10 + i)["radiance"]) for i, spp in enumerate(ladder)]
    slope = np.polyfit(np.log2(ladder), values, 1)[0]
    assert abs(slope - 10 * math.log10(2)) < 0.5, (slope, values)


def ball_scene(width=48, height=48, spp=16, radius=8.0):
    """A distance field r = |x| (mm) on a 0.5 mm grid, opaque inside r < radius."""
    n, spacing = 49, 0.5
    axis = (np.arange(n) - (n - 1) / 2) * spacing
    x, y, z = np.meshgrid(axis, axis, axis, indexing="ij")
    field = np.sqrt(x**2 + y**2 + z**2).astype(np.float32)
    volume = Volume(field, directions=np.eye(3) * spacing, origin=(axis[0],) * 3)
    tf = TransferFunction(np.array([0.0, radius - 0.05, radius + 0.05, 30.0]), np.array([1.0, 1.0, 0.0, 0.0]),
                          np.array([0.0]), np.array([[0.8, 0.8, 0.8]]))
    camera = Camera(position=(9.0, -38.0, 14.0), target=(0.0, 0.0, 0.0), fov_deg=30.0, width=width, height=height)
    settings = RenderSettings(spp=spp, step_mm=0.1, events=2, scattering="interface")
    return Scene(volume, tf, camera, (), Environment(kind="constant", colors=((1.0, 1.0, 1.0),) * 3), settings)


def test_ball_normals_and_depth_match_the_sphere():
    """Analytic sphere: the outward normal at x is x / |x|, and the camera ray through a pixel
    meets the sphere at the smaller root of |p + t d| = R. Median angle under 2 degrees; depth
    within one voxel (0.5 mm) on pixels that always hit."""
    scene = ball_scene()
    frame = render(scene)
    hit = frame["event1_hit"] == 1.0
    assert hit.sum() > 300
    position = frame["event1_position"][hit].astype(np.float64)
    normal = frame["event1_normal"][hit].astype(np.float64)
    normal /= np.linalg.norm(normal, axis=1, keepdims=True)
    radial = position / np.linalg.norm(position, axis=1, keepdims=True)
    angles = np.degrees(np.arccos(np.clip((normal * radial).sum(axis=1), -1, 1)))
    assert np.median(angles) < 2.0, np.median(angles)

    rows, cols = np.nonzero(hit)
    d = scene.camera.ray_directions(rows, cols)
    p = np.asarray(scene.camera.position)
    b = d @ p
    c = p @ p - 8.0**2
    t = -b - np.sqrt(np.maximum(b * b - c, 0))
    depth_error = np.abs(frame["event1_depth"][hit] - t)
    assert np.percentile(depth_error, 95) < 0.5, np.percentile(depth_error, 95)
    # the averaged position lies on the sphere to within a voxel too
    assert np.percentile(np.abs(np.linalg.norm(position, axis=1) - 8.0), 95) < 0.5


def test_a_view_that_misses_the_volume_shows_the_environment_and_no_events():
    scene = blob_scene(width=4, height=4, spp=4)
    far = dataclasses.replace(scene.camera, target=(0.0, 100.0, 500.0))
    environment = Environment(kind="constant", colors=((0.3, 0.2, 0.1),) * 3)
    frame = render(dataclasses.replace(scene, camera=far, environment=environment))
    assert frame["event1_hit"].max() == 0 and frame["alpha"].max() == 0
    np.testing.assert_allclose(frame["radiance"], np.broadcast_to([0.3, 0.2, 0.1], (4, 4, 3)), rtol=1e-6)
    assert frame["radiance_variance"].max() == 0.0          # identical samples: no rounding residue either
