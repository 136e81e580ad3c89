"""Emission against the absorption-emission law (Max 1995, "Optical models for direct volume rendering").

A homogeneous box of black albedo (sigma_a = sigma), constant emitted radiance L_e, background L_b, optical depth
tau along each pixel's ray (the chord from tests/reference/media.py's slab test): L = L_b e^-tau + L_e (1 - e^-tau).
"""

import math

import numpy as np
import pytest

import tracer
from tests.reference.camera import Pinhole
from tests.reference.files import toml_value, write_transfer
from tests.reference.media import Box

from .scenes import box_volume, camera_table, scene

VIEW = dict(position=(-30.0, 4.0, 6.0), target=(5.0, 5.0, 5.0), fov_deg=6.0)


def glowing_box(tmp_path, opacity, emission, background, scale=1.0, albedo=(0.0, 0.0, 0.0), estimator="march"):
    volume = box_volume(tmp_path)
    transfer = write_transfer(tmp_path / "glow.toml", [[0.0, opacity], [2.0, opacity]], [[0.0, list(albedo)]])
    points = [[0.0, [float(e) for e in emission]], [2.0, [float(e) for e in emission]]]
    text = transfer.read_text() + f"emission = {toml_value(points)}\nemission_scale = {float(scale)!r}\n"
    transfer.write_text(text)
    path = scene(tmp_path, volume, transfer, camera_table(**VIEW, width=12, height=12), [],
                 {"kind": "constant", "radiance": [0.0, 0.0, 0.0], "background": list(background)}, spp=256,
                 step_mm=0.5, estimator=estimator)
    return tracer.render(path, seed=2)


def chords():
    pinhole = Pinhole(**VIEW, width=12, height=12)
    rays = pinhole.pixel_rays()
    box = Box((0, 0, 0), (10, 10, 10))
    return np.array([[np.subtract(*box.chord(pinhole.position, rays[r, c])[::-1]) for c in range(12)]
                     for r in range(12)])


@pytest.mark.parametrize("estimator", ["march", "track"])
@pytest.mark.parametrize("opacity", [0.05, 0.3])
def test_a_glowing_absorbing_box_follows_the_emission_absorption_law(tmp_path, opacity, estimator):
    """Under "track" the emission is collected where delta tracking stops the camera ray (the collision
    estimator): noisy, the same mean."""
    sigma = -math.log(1 - opacity)
    emission, background = np.array([0.6, 0.3, 0.1]), np.array([0.2, 0.4, 0.8])
    frame = glowing_box(tmp_path, opacity, emission * 0.5, background, scale=2.0, estimator=estimator)
    transmittance = np.exp(-sigma * chords())[..., None]
    expected = background * transmittance + emission * (1 - transmittance)
    n = expected[..., 0].size
    standard_error = np.sqrt(frame["radiance_variance"].astype(float).sum(axis=(0, 1))) / n
    difference = frame["radiance"].astype(float).mean(axis=(0, 1)) - expected.mean(axis=(0, 1))
    assert np.all(np.abs(difference) < 4 * standard_error + 1e-6), (difference, standard_error)


def test_emission_alone_is_deterministic_and_exact(tmp_path):
    """Against a black background the render is the emission integral alone, which the march computes exactly per
    step for a homogeneous medium: each pixel within 4 standard errors (from the variance buffer) of the law at its
    centre ray, plus float32 rounding. The only randomness left is where in the pixel the ray passes, so the
    variance is tiny (the chord changes by micrometres across a pixel)."""
    sigma = -math.log(1 - 0.2)
    emission = np.array([1.0, 0.5, 0.25])
    frame = glowing_box(tmp_path, 0.2, emission, (0.0, 0.0, 0.0))
    expected = emission * (1 - np.exp(-sigma * chords()))[..., None]
    error = np.abs(frame["radiance"].astype(float) - expected)
    assert np.all(error <= 4 * np.sqrt(frame["radiance_variance"].astype(float)) + 1e-6 * expected), error.max()
    assert frame["radiance_variance"].max() < 1e-9


def test_a_scattering_albedo_emits_only_through_absorption(tmp_path):
    """sigma_a = sigma (1 - albedo) (Max 1995): with albedo 0.75 and no light, a quarter of the black-albedo glow."""
    sigma = -math.log(1 - 0.2)
    emission = np.array([1.0, 0.5, 0.25])
    frame = glowing_box(tmp_path, 0.2, emission, (0.0, 0.0, 0.0), albedo=(0.75, 0.75, 0.75))
    expected = 0.25 * emission * (1 - np.exp(-sigma * chords()))[..., None]
    error = np.abs(frame["radiance"].astype(float) - expected)
    assert np.all(error <= 4 * np.sqrt(frame["radiance_variance"].astype(float)) + 1e-6 * expected), error.max()


def test_tracked_emission_with_a_scattering_albedo(tmp_path):
    """The same law under "track": within 4 standard errors of the image mean."""
    sigma = -math.log(1 - 0.2)
    emission = np.array([1.0, 0.5, 0.25])
    frame = glowing_box(tmp_path, 0.2, emission, (0.0, 0.0, 0.0), albedo=(0.75, 0.75, 0.75), estimator="track")
    expected = 0.25 * emission * (1 - np.exp(-sigma * chords()))[..., None]
    n = expected[..., 0].size
    standard_error = np.sqrt(frame["radiance_variance"].astype(float).sum(axis=(0, 1))) / n
    difference = frame["radiance"].astype(float).mean(axis=(0, 1)) - expected.mean(axis=(0, 1))
    assert np.all(np.abs(difference) < 4 * standard_error), (difference, standard_error)
    assert np.all(standard_error < 0.02 * expected.mean(axis=(0, 1)))
