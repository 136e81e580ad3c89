"""The feature buffers and the estimator's promises on homogeneous media, against closed forms.

Sources: event and level depths against the inverse CDF of stratified thresholds (README, "The optical model":
threshold k of K uniform in [(k-1)/K, k/K), the event where 1 - T passes it; in a homogeneous medium entered at
t_in that is t = t_in - ln(1 - u) / sigma), tested as distributions with the Kolmogorov-Smirnov test
(``scipy.stats.kstest``); the albedo buffer against the transfer function's colour points interpolated by
``numpy.interp`` at the event's value; alpha against Beer-Lambert over the chord (README: exact to 1e-5, read from
the README); Russian roulette on shadow rays against the same render without it.
"""

import math

import numpy as np
import pytest
from scipy import stats

import tracer
from tests.reference import readme
from tests.reference.camera import Pinhole
from tests.reference.files import write_transfer
from tests.reference.media import Box

from .scenes import box_volume, camera_table, flat_transfer, scene, slab_volume

SIGMA = 2.0
SIZE = 64
VIEW = dict(position=(20.0, -35.0, 60.0), target=(20.0, 20.0, 10.0), fov_deg=6.0)


def slab_files(tmp_path, colours=None):
    volume = slab_volume(tmp_path)
    opacity = 1 - math.exp(-SIGMA)
    colours = colours or [[0.0, [0.5, 0.5, 0.5]], [10.0, [0.5, 0.5, 0.5]]]
    transfer = write_transfer(tmp_path / "slab.toml", [[0.0, opacity], [10.0, opacity]], colours)
    return volume, transfer


def depth_below_entry(frame, key):
    """(depth buffer, its part below the top face) of a 1-spp render: the sample's own ray runs from the camera
    through the event position and meets the top face z = 10 mm at the entry."""
    position = frame[f"{key}_position"].astype(float)
    depth = frame[f"{key}_depth"].astype(float)
    ray = (position - np.asarray(VIEW["position"])) / depth[..., None]
    return depth - (10.0 - VIEW["position"][2]) / ray[..., 2]


def entry_and_exit(camera):
    pinhole = Pinhole(**camera, width=SIZE, height=SIZE)
    rays = pinhole.pixel_rays()
    box = Box((0, 0, 0), (40, 40, 10))
    chords = np.array([[box.chord(pinhole.position, rays[r, c]) for c in range(SIZE)] for r in range(SIZE)])
    return chords[..., 0], chords[..., 1]


def test_event_and_level_depths_follow_the_stratified_thresholds(tmp_path):
    volume, transfer = slab_files(tmp_path)
    path = scene(tmp_path, volume, transfer, camera_table(**VIEW, width=SIZE, height=SIZE),
                 [{"kind": "directional", "toward": [0.0, 0.0, 1.0], "irradiance": [1.0] * 3}],
                 spp=1, events=2, feature_levels=[0.3, 0.7], step_mm=0.25)
    frame = tracer.render(path, seed=2)
    # each pixel's single sample: optical depth from the entry to the event, x = sigma (t - t_in)
    for key, low, high in (("event1", 0.0, 0.5), ("event2", 0.5, 1.0)):
        x = SIGMA * depth_below_entry(frame, key).ravel()

        def cdf(value, low=low, high=high):
            return np.clip((1 - np.exp(-value) - low) / (high - low), 0, 1)
        assert stats.kstest(x, cdf).pvalue > 1e-3, (key, stats.kstest(x, cdf))
        assert np.all(frame[f"{key}_hit"] == 1.0)
    # levels are fixed opacity thresholds: t = t_in - ln(1 - level) / sigma, deterministic
    for key, level in (("level1", 0.3), ("level2", 0.7)):
        np.testing.assert_allclose(depth_below_entry(frame, key), -math.log(1 - level) / SIGMA, atol=2e-4)


def test_albedo_buffer_is_the_transfer_function_colour_at_the_event(tmp_path):
    colours = [[0.0, [0.9, 0.2, 0.1]], [0.15, [0.5, 0.4, 0.5]], [10.0, [0.3, 0.7, 0.2]]]
    volume, transfer = slab_files(tmp_path, colours)
    path = scene(tmp_path, volume, transfer, camera_table(**VIEW, width=SIZE, height=SIZE),
                 [{"kind": "directional", "toward": [0.0, 0.0, 1.0], "irradiance": [1.0] * 3}], spp=1, step_mm=0.25)
    frame = tracer.render(path, seed=4)
    value = 10.0 - frame["event1_position"][..., 2].astype(float)          # the field is the depth below z = 10
    points = np.array([c[0] for c in colours])
    expected = np.stack([np.interp(value, points, [c[1][k] for c in colours]) for k in range(3)], axis=-1)
    # the renderer bakes 4096-entry tables over the data range (README): only within one entry of the colour point
    # at 0.15 may the linear table differ from the piecewise-linear function, by at most slope x entry width
    error = np.abs(frame["albedo"] - expected).max(axis=-1)
    entry = 10.0 / 4095
    near_the_point = np.abs(value - 0.15) < entry
    assert error[~near_the_point].max() < 1e-5, error[~near_the_point].max()
    assert error.max() <= (0.4 / 0.15) * entry
    assert (value < 0.15).mean() > 0.2 and (value > 0.15).mean() > 0.2     # both pieces of the ramp are exercised


def test_alpha_is_exact_to_the_documented_bound_despite_early_termination(tmp_path):
    volume, transfer = slab_files(tmp_path)
    path = scene(tmp_path, volume, transfer, camera_table(**VIEW, width=SIZE, height=SIZE),
                 [{"kind": "directional", "toward": [0.0, 0.0, 1.0], "irradiance": [1.0] * 3}], spp=4, step_mm=0.25)
    frame = tracer.render(path, seed=1)
    t_in, t_out = entry_and_exit(VIEW)
    exact = 1 - np.exp(-SIGMA * (t_out - t_in))                      # optical depth 20-40 along these chords
    error = np.abs(frame["alpha"].astype(float) - exact)
    assert error.max() <= readme.alpha_exactness(), error.max()
    # and the rays did stop early: exact alpha differs from 1 by < 1e-8 here, the renderer's by about 1e-5
    assert error.max() > 1e-7


@pytest.mark.slow
def test_russian_roulette_on_shadow_rays_is_unbiased(tmp_path):
    """A thick box (optical depth 6.9 along the view) lit from behind: most shadow rays cross enough material to
    play roulette. Renders with and without it agree within 4 standard errors of the difference of their means."""
    volume = box_volume(tmp_path)
    transfer = flat_transfer(tmp_path, 0.5, [0.8, 0.8, 0.8])
    camera = camera_table((-30.0, 5.0, 5.0), (5.0, 5.0, 5.0), 3.0, 16, 16)
    path = scene(tmp_path, volume, transfer, camera,
                 [{"kind": "directional", "toward": [0.9, -0.3, 0.35], "irradiance": [1.0] * 3}],
                 spp=2048, step_mm=0.5, phase_g=0.5)
    on = tracer.render(path, seed=1)
    off = tracer.render(path, seed=2, roulette=False)
    n = on["radiance"][..., 0].size
    difference = on["radiance"].astype(float).mean(axis=(0, 1)) - off["radiance"].astype(float).mean(axis=(0, 1))
    standard_error = np.sqrt((on["radiance_variance"].astype(float) + off["radiance_variance"]).sum(axis=(0, 1))) / n
    assert np.all(np.abs(difference) < 4 * standard_error), (difference, standard_error)
    # roulette was played: it adds variance here (the survivors carry weight 1 / 0.25)
    assert on["radiance_variance"].mean() > 1.05 * off["radiance_variance"].mean()
