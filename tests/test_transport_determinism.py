"""Determinism with many bounces and emission, under both estimators: bits independent of threads, pass
splits and resumes; and the settings' validation."""

import dataclasses

import numpy as np
import pytest

from tracer.rendering import render
from tracer.scene import RenderSettings

from .helpers import blob_scene, blob_transfer


def glowing_blob_scene(estimator, **settings):
    transfer = dataclasses.replace(blob_transfer(), emission_values=np.array([0.3, 1.0]),
                                   emissions=np.array([[0.0, 0.0, 0.0], [2.0, 1.0, 0.4]]))
    scene = blob_scene(width=10, height=8, spp=6, bounces=8, estimator=estimator, **settings)
    return dataclasses.replace(scene, transfer_function=transfer)


def assert_same_bits(a, b):
    assert set(a.buffers) == set(b.buffers)
    for key in a.buffers:
        assert np.array_equal(a[key], b[key]), key


@pytest.mark.parametrize("estimator", ["march", "track"])
def test_threads_and_pass_splits_do_not_change_the_bits(estimator):
    scene = glowing_blob_scene(estimator)
    one = render(scene, threads=1, pass_seconds=10.0)
    assert_same_bits(one, render(scene, threads=2, pass_seconds=1e-9))
    assert one["radiance"].max() > 0 and np.isfinite(one["radiance"]).all()


@pytest.mark.parametrize("estimator", ["march", "track"])
def test_resume_is_bit_exact(tmp_path, estimator):
    scene = glowing_blob_scene(estimator)
    checkpoint = tmp_path / "c.checkpoint.npz"

    def stop_midway(progress):
        if progress.spp_done >= 3:
            raise KeyboardInterrupt

    partial = render(scene, on_progress=stop_midway, pass_seconds=1e-9, checkpoint_path=checkpoint,
                     checkpoint_every=1e-9)
    assert partial.meta["stopped"] == "interrupted"
    assert_same_bits(render(scene, checkpoint_path=checkpoint, resume=True), render(scene))


def test_skipping_does_not_change_tracked_bits():
    scene = glowing_blob_scene("track")
    assert_same_bits(render(scene, skipping=True), render(scene, skipping=False))


def test_the_estimators_share_feature_buffers_and_differ_in_radiance():
    """README: under "track" the feature buffers come from the same camera-ray march as under "march" (the default
    kernel with one bounce, and the transport kernel with eight)."""
    track = render(glowing_blob_scene("track", feature_levels=(0.4,)))
    for march in (render(glowing_blob_scene("march", feature_levels=(0.4,))),
                  render(dataclasses.replace(glowing_blob_scene("march", feature_levels=(0.4,)),
                                             settings=RenderSettings(spp=6, step_mm=0.4, events=2, scattering="graded",
                                                                     phase_g=0.4, feature_levels=(0.4,))))):
        assert set(march.buffers) == set(track.buffers) and "level1_depth" in track.buffers
        for key in march.buffers:
            if key.startswith("radiance"):
                assert not np.array_equal(march[key], track[key]), key
            else:
                assert np.array_equal(march[key], track[key]), key


def test_more_bounces_brighten_a_scattering_medium():
    one = render(blob_scene(width=10, height=8, spp=64, bounces=1, estimator="track"))
    many = render(blob_scene(width=10, height=8, spp=64, bounces=16, estimator="track"))
    assert many["radiance"].mean() > 1.05 * one["radiance"].mean()


def test_default_settings_are_todays_estimator():
    settings = RenderSettings()
    assert settings.bounces == 1 and settings.estimator == "march"


def test_command_line_overrides_of_bounces_and_estimator_are_checked():
    from tracer.errors import UserError

    scene = blob_scene().with_overrides(bounces=12, estimator="track")
    assert scene.settings.bounces == 12 and scene.settings.estimator == "track"
    with pytest.raises(UserError, match=r"--bounces: must lie in \[1, 4096\], got 5000"):
        blob_scene().with_overrides(bounces=5000)
    with pytest.raises(UserError, match="--estimator must be one of march, track, got 'delta'"):
        blob_scene().with_overrides(estimator="delta")
