"""Independent noisy pairs and reference halves (README, "Datasets"): for training without clean targets
(Lehtinen et al. 2018, Noise2Noise) and for estimating a reference's own error.

Independence is measured as the Pearson correlation of the two renders' errors against a third render of
256 spp over samples of its own, on covered pixels, each error in units of its pixel's standard deviation; the estimator is shown to see correlation where there is
some (a render sharing half its samples). Halves: their float64 mean, rounded to float32, is the reference's
radiance bit for bit, and that is within float32 rounding of the single-pass mean of the same samples.
"""

import json

import numpy as np
import pytest

import tracer
from tracer.dataset.items import item_scene
from tracer.dataset.plan import load_plan
from tracer.dataset.run import build_dataset

from .plans import write_plan

pytestmark = pytest.mark.slow


def load(path):
    with np.load(path) as archive:
        return {key: archive[key] for key in archive.files if key != "meta"}


def error_correlation(a, b, high, covered):
    """Of the luminance errors in units of each pixel's per-sample standard deviation (from the third render's
    variance buffer): the channels of a pixel share their paths, so they count once, and without the scaling a few
    bright, noisy pixels would carry the whole estimate (its spread would exceed 1/sqrt(n) many times)."""
    truth = high["radiance"].astype(np.float64).mean(axis=-1)
    deviation = np.sqrt(high["radiance_variance"].astype(np.float64).mean(axis=-1) * high.spp)
    keep = covered & (deviation > 0)
    ea = ((a.mean(axis=-1) - truth) / np.where(keep, deviation, 1.0))[keep]
    eb = ((b.mean(axis=-1) - truth) / np.where(keep, deviation, 1.0))[keep]
    return float(np.corrcoef(ea, eb)[0, 1])


def test_pairs_are_independent_and_halves_average_to_the_reference(tmp_path):
    plan_path = write_plan(tmp_path / "plan", views=1, width=96, height=96, input_spp=(1, 2), reference_spp=64,
                           volumes=("plume",), extra_render="noisy_pairs = true\nreference_halves = true",
                           splits='train = 1.0\nby = "view"')
    build_dataset(plan_path, tmp_path / "ds")
    record = json.loads((tmp_path / "ds" / "manifest.jsonl").read_text().splitlines()[0])
    files = record["files"]
    roles = sorted((entry["role"], tuple(entry["sample_range"])) for entry in files.values())
    assert [role for role, _ in roles] == ["input", "input", "input_pair", "input_pair", "reference", "reference_half",
                                           "reference_half"]
    ranges = sorted(r for _, r in roles if _ != "reference")
    assert all(a[1] <= b[0] for a, b in zip(ranges, ranges[1:]))                  # all disjoint

    plan = load_plan(plan_path)
    scene, _ = item_scene(plan, plan.items()[0])
    # its own noise correlates the two errors by about 1/256 (the variance ratio), well below the bound
    high = tracer.render(scene, spp=256, first_sample=2**41)
    covered = high["alpha"] > 0.01            # chosen by the third render, not by either of the pair
    assert covered.sum() > 4000               # the estimate's own spread is about 1/sqrt(n) = 0.016
    first = load(tmp_path / "ds" / files["spp0001.npz"]["path"])
    second = load(tmp_path / "ds" / files["spp0001_pair.npz"]["path"])
    correlation = error_correlation(first["radiance"], second["radiance"], high, covered)
    assert abs(correlation) < 0.05, correlation
    two = load(tmp_path / "ds" / files["spp0002.npz"]["path"])
    start = files["spp0002.npz"]["sample_range"][0]
    overlapping = tracer.render(scene, spp=2, first_sample=start + 1)["radiance"]     # shares 1 of its 2 samples
    assert error_correlation(two["radiance"], overlapping, high, covered) > 0.3

    half1 = load(tmp_path / "ds" / files["reference_half1.npz"]["path"])
    half2 = load(tmp_path / "ds" / files["reference_half2.npz"]["path"])
    reference = load(tmp_path / "ds" / files["reference.npz"]["path"])
    mean = ((half1["radiance"].astype(np.float64) + half2["radiance"].astype(np.float64)) / 2).astype(np.float32)
    assert np.array_equal(mean, reference["radiance"])                               # bit for bit
    single = tracer.render(scene, spp=64, first_sample=0)["radiance"]
    assert np.all(np.abs(reference["radiance"] - single) <= 2 * np.finfo(np.float32).eps * np.abs(single))
    # the halves (32 spp each) against the 256-spp render: independent halves correlate only through its noise,
    # by var_third / (var_half + var_third) = (1/256) / (1/32 + 1/256) = 1/9; halves sharing samples would go higher
    assert abs(error_correlation(half1["radiance"], half2["radiance"], high, covered) - 1 / 9) < 0.05
    # everything but the radiance is the reference of all 64 samples
    assert files["reference.npz"]["sample_range"] == [0, 64] and files["reference_half2.npz"]["sample_range"] == [32, 64]


def test_halves_need_a_fixed_even_reference(tmp_path):
    from tracer.errors import UserError

    for extra, message in (("reference_halves = true\nreference_target_error = 0.1", "fixed reference_spp"),
                           ("reference_halves = true\nreference_chunks = 3", "even reference_chunks")):
        path = write_plan(tmp_path / "plan", extra_render=extra)
        with pytest.raises(UserError, match=message):
            load_plan(path)
    path = write_plan(tmp_path / "odd", reference_spp=15, extra_render="reference_halves = true")
    with pytest.raises(UserError, match="even reference_spp"):
        load_plan(path)
