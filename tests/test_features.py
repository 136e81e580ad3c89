"""Candidate features as the file contract states them (README, "Candidate features"): opt-in, no other buffer's
bits change, the demodulation identity, pooling, EXR layers and bad names. Their values against closed forms are
in ``tests/outside/test_candidate_features.py``."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

import tracer
from tests.cli.cli_helpers import assert_user_error, invoke
from tests.reference import readme
from tracer.rendering.buffers import FEATURE_NAMES

ROOT = Path(__file__).resolve().parents[1]


def demo_scene(tmp_path: Path, name="figurine", features='["all"]', extra="") -> Path:
    text = (ROOT / "examples" / f"{name}.toml").read_text().replace('"../', f'"{ROOT}/')
    text = text.replace("[render]\n", f"[render]\nfeatures = {features}\n{extra}", 1)
    path = tmp_path / f"{name}.toml"
    path.write_text(text)
    return path


@pytest.mark.parametrize("estimator, bounces", [("march", 1), ("track", 2), ("march", 3)])
def test_features_change_no_other_buffer(tmp_path, estimator, bounces):
    plain = tracer.load_scene(ROOT / "examples" / "figurine.toml").with_overrides(width=40, height=32, estimator=estimator,
                                                                                  bounces=bounces)
    featured = tracer.load_scene(demo_scene(tmp_path)).with_overrides(width=40, height=32, estimator=estimator,
                                                                       bounces=bounces)
    a = tracer.render(plain, spp=4, seed=1)
    b = tracer.render(featured, spp=4, seed=1)
    assert set(b.buffers) == set(a.buffers) | set(FEATURE_NAMES)
    for key in a.buffers:
        assert np.array_equal(a[key], b[key]), key
    assert b["optical_depth"].max() > 11.5           # marched on past the early-termination point
    assert "features" not in a.meta["scene"]["render"] and b.meta["scene"]["render"]["features"] == list(FEATURE_NAMES)


def test_demodulation_gives_back_the_radiance(tmp_path):
    epsilon = readme.illumination_epsilon()
    frame = tracer.render(tracer.load_scene(demo_scene(tmp_path, extra="bounces = 2\n")).with_overrides(width=40, height=32),
                          spp=4, seed=2)
    radiance = frame["radiance"].astype(np.float64)
    reflected = (frame["albedo"].astype(np.float64) + epsilon) * frame["illumination"]
    rebuilt = reflected + frame["background_part"]
    scale = np.maximum(np.abs(radiance), np.abs(reflected) + frame["background_part"])
    assert np.all(np.abs(rebuilt - radiance) <= 4 * np.finfo(np.float32).eps * scale)        # float32 rounding
    assert (frame["background_part"] > 1e-3).mean() > 0.5 and (reflected > 1e-3).mean() > 0.15     # both parts present


def test_features_pool_like_the_other_buffers(tmp_path):
    scene = tracer.load_scene(demo_scene(tmp_path, name="plume")).with_overrides(width=24, height=20)
    whole = tracer.render(scene, spp=6, seed=4)
    parts = [tracer.render(scene, spp=2, seed=4, first_sample=0), tracer.render(scene, spp=4, seed=4, first_sample=2)]
    pooled = tracer.merge(parts)
    for key in FEATURE_NAMES:
        if key != "illumination":                      # means to float32 rounding (the expected depth: alpha weights)
            np.testing.assert_allclose(pooled[key], whole[key], rtol=1e-6, atol=1e-7, err_msg=key)
    # the illumination is a quotient by albedo + 0.001: pooled, it keeps its identity with the pooled buffers
    reflected = (pooled["albedo"].astype(np.float64) + readme.illumination_epsilon()) * pooled["illumination"]
    scale = np.abs(reflected) + pooled["background_part"] + np.abs(pooled["radiance"])
    assert np.all(np.abs(reflected + pooled["background_part"] - pooled["radiance"]) <= 4 * np.finfo(np.float32).eps * scale)


def test_features_travel_through_exr(tmp_path):
    scene = demo_scene(tmp_path, features='["expected_depth", "illumination", "event2_gradient"]')
    result = invoke("render", scene, "--spp", 2, "--width", 16, "--height", 12, "--format", "npz,exr", "--out", tmp_path / "r")
    assert result.exit_code == 0, result.output
    from tracer.outputs.exr import read_exr

    back = read_exr(tmp_path / "r" / "figurine.exr")
    with np.load(tmp_path / "r" / "figurine.npz") as npz:
        for key in ("expected_depth", "illumination", "event2_gradient"):
            assert np.array_equal(back[key], npz[key]), key
    assert "event1_value" not in back.buffers


def test_an_unknown_feature_is_one_line(tmp_path):
    scene = demo_scene(tmp_path, features='["expected_depth", "curvature"]')
    assert_user_error(invoke("render", scene, "--spp", 1, "--out", tmp_path / "out"), "features", "unknown feature 'curvature'")
    assert not (tmp_path / "out").exists()
