"""Candidate features (README, "Candidate features") against closed forms on homogeneous media and the analytic ball.

Sources: on the slab whose value is the depth below its top face (linear in z: trilinear values and central
differences are exact), the value is 10 - z, the gradient magnitude 1 per mm, the extinction the transfer
function's -ln(1 - opacity) per reference length (Engel et al. 2006), the interface weight the README's
``1 - exp(-g / interface_gradient)`` and the transmittance toward a light overhead Beer-Lambert's exp(-sigma x depth);
on a thin homogeneous box, the opacity in front of event 1, the expected depth and the optical depth as
Beer-Lambert integrals over each ray's exact chord computed with ``scipy.integrate.quad``; on the ball of the
field |x|, the value against |x| at the event and the gradient magnitude against |grad |x|| = 1.
"""

import math

import numpy as np
import pytest
from scipy import integrate

import tracer
from tests.reference.camera import Pinhole
from tests.reference.files import write_transfer
from tests.reference.media import Box

from .scenes import ball_transfer, ball_volume, box_volume, camera_table, flat_transfer, scene, slab_volume

SIGMA = 2.0
SLAB_VIEW = dict(position=(20.0, -35.0, 60.0), target=(20.0, 20.0, 10.0), fov_deg=6.0)


def slab_render(tmp_path, scattering="graded", spp=1, seed=5):
    volume = slab_volume(tmp_path)
    opacity = 1 - math.exp(-SIGMA)
    transfer = write_transfer(tmp_path / "slab.toml", [[0.0, opacity], [10.0, opacity]],
                              [[0.0, [0.5, 0.5, 0.5]], [10.0, [0.5, 0.5, 0.5]]])
    path = scene(tmp_path, volume, transfer, camera_table(**SLAB_VIEW, width=48, height=40),
                 [{"kind": "directional", "toward": [0.0, 0.0, 1.0], "irradiance": [1.0] * 3}],
                 spp=spp, events=2, scattering=scattering, step_mm=0.25, features=["all"])
    return tracer.render(path, seed=seed)


def test_event_features_on_the_slab_follow_its_closed_forms(tmp_path):
    frame = slab_render(tmp_path)
    # the README's interface weight: g is the gradient as a fraction of the data range (10) per mean voxel spacing
    mean_spacing = (2.0 + 2.0 + 0.5) / 3
    g = 1.0 * mean_spacing / 10.0
    weight = 1 - math.exp(-g / 0.15)
    for event in ("event1", "event2"):
        assert np.all(frame[f"{event}_hit"] == 1.0)
        depth_below_top = 10.0 - frame[f"{event}_position"][..., 2].astype(float)
        assert depth_below_top.min() >= 0.0 and depth_below_top.max() > 0.15         # events at many depths
        np.testing.assert_allclose(frame[f"{event}_value"], depth_below_top, atol=2e-4)
        np.testing.assert_allclose(frame[f"{event}_gradient"], 1.0, rtol=1e-4)
        np.testing.assert_allclose(frame[f"{event}_extinction"], SIGMA, rtol=1e-5)
        np.testing.assert_allclose(frame[f"{event}_interface_weight"], weight, rtol=1e-4)
        # the light is straight up: the shadow ray crosses exactly the depth below the top face
        np.testing.assert_allclose(frame[f"{event}_light_transmittance"], np.exp(-SIGMA * depth_below_top), rtol=2e-4)
    assert np.mean(frame["event1_light_transmittance"]) > np.mean(frame["event2_light_transmittance"])


@pytest.mark.parametrize("scattering, weight", [("medium", 0.0), ("interface", 1.0)])
def test_interface_weight_is_fixed_outside_graded(tmp_path, scattering, weight):
    frame = slab_render(tmp_path, scattering=scattering)
    assert np.all(frame["event1_interface_weight"] == weight)


BOX_SIGMA = 0.03                 # per mm: optical depth about 0.3 along the 10 mm box, opacity below 1/2
BOX_VIEW = dict(position=(5.0, -60.0, 5.0), target=(5.0, 5.0, 5.0), fov_deg=8.0)
SIZE = 24
SUB = 4                          # sub-pixel rays per axis for the pixel-footprint average of the references


def box_references(events: int):
    """Per pixel, the footprint average of each ray's closed forms, and which pixels lie wholly inside the box's image."""
    pinhole = Pinhole(**BOX_VIEW, width=SIZE, height=SIZE)
    box = Box((0, 0, 0), (10, 10, 10))
    stratum = 1.0 / events
    out = {key: np.zeros((SIZE, SIZE)) for key in ("opacity_before_event1", "expected_depth", "optical_depth")}
    inside = np.ones((SIZE, SIZE), bool)
    offsets = (np.arange(SUB) + 0.5) / SUB
    for row in range(SIZE):
        for col in range(SIZE):
            for jr in (0.0, 1.0):                       # the pixel's corners must all see the box
                for jc in (0.0, 1.0):
                    t0, t1 = box.chord(pinhole.position, pinhole.rays(row, col, jr, jc))
                    inside[row, col] &= t1 > t0 + 1.0
            if not inside[row, col]:
                continue
            for jr in offsets:
                for jc in offsets:
                    t0, t1 = box.chord(pinhole.position, pinhole.rays(row, col, jr, jc))
                    tau = BOX_SIGMA * (t1 - t0)
                    opacity = 1 - math.exp(-tau)
                    # threshold of event 1 uniform in [0, 1/K): its opacity, or the ray's where it is never reached
                    before, _ = integrate.quad(lambda u: min(u, opacity), 0.0, stratum, points=[opacity])
                    numerator, _ = integrate.quad(lambda t: t * BOX_SIGMA * math.exp(-BOX_SIGMA * (t - t0)), t0, t1)
                    denominator, _ = integrate.quad(lambda t: BOX_SIGMA * math.exp(-BOX_SIGMA * (t - t0)), t0, t1)
                    out["opacity_before_event1"][row, col] += before / stratum
                    out["expected_depth"][row, col] += numerator / denominator
                    out["optical_depth"][row, col] += tau
            for key in out:
                out[key][row, col] /= SUB * SUB
    return out, inside


def test_camera_ray_features_on_a_thin_box_are_beer_lambert_integrals(tmp_path):
    volume = box_volume(tmp_path)
    transfer = flat_transfer(tmp_path, 1 - math.exp(-BOX_SIGMA), [0.8, 0.8, 0.8])
    spp = 256
    path = scene(tmp_path, volume, transfer, camera_table(**BOX_VIEW, width=SIZE, height=SIZE),
                 [{"kind": "directional", "toward": [0.0, -1.0, 0.0], "irradiance": [1.0] * 3}],
                 spp=spp, events=2, step_mm=0.25, features=["opacity_before_event1", "expected_depth", "optical_depth"])
    frame = tracer.render(path, seed=7)
    assert set(frame.buffers) >= {"opacity_before_event1", "expected_depth", "optical_depth"}
    assert "event1_value" not in frame.buffers                         # only what was asked for
    references, inside = box_references(events=2)
    assert inside.sum() > 150
    # deterministic along each ray: only the pixel jitter varies them
    np.testing.assert_allclose(frame["optical_depth"][inside], references["optical_depth"][inside], rtol=2e-3)
    np.testing.assert_allclose(frame["expected_depth"][inside], references["expected_depth"][inside], rtol=1e-4)
    # the opacity in front of event 1 depends on the sample's threshold: per pixel within 5 standard errors,
    # and over the image within 4 of the image mean (the per-sample spread is at most 1/(2 sqrt 3) of 1/K)
    shown = frame["opacity_before_event1"][inside].astype(float)
    expected = references["opacity_before_event1"][inside]
    per_sample = 0.5 / math.sqrt(12)
    assert np.abs(shown - expected).max() < 5 * per_sample / math.sqrt(spp)
    assert abs(shown.mean() - expected.mean()) < 4 * per_sample / math.sqrt(spp * inside.sum())
    assert np.abs(shown - expected).max() > 1e-4                      # and it is noisy, as a threshold must be


def test_value_and_gradient_on_the_ball_follow_the_distance_field(tmp_path):
    volume = ball_volume(tmp_path)
    transfer = ball_transfer(tmp_path, 0.6, [0.7, 0.7, 0.7], radius=3.0)
    path = scene(tmp_path, volume, transfer, camera_table((0.0, -30.0, 0.0), (0.0, 0.0, 0.0), 14.0, 32, 32),
                 [{"kind": "directional", "toward": [0.3, -1.0, 0.5], "irradiance": [1.0] * 3}],
                 spp=1, events=2, step_mm=0.05, features=["event1_value", "event1_gradient"])
    frame = tracer.render(path, seed=3)
    hit = frame["event1_hit"] == 1.0
    assert hit.sum() > 200
    radius = np.linalg.norm(frame["event1_position"].astype(float), axis=-1)
    # one sample per pixel: its value is the field |x| at its own event (trilinear error of |x| on the 0.25 mm grid)
    np.testing.assert_allclose(frame["event1_value"][hit], radius[hit], atol=0.01)
    np.testing.assert_allclose(frame["event1_gradient"][hit], 1.0, atol=0.03)
    assert np.all(frame["event1_value"][~hit] == 0.0)
