"""Equal-quality spp, speedup, file scoring, dataset scoring, and the baseline denoiser."""

import json
import math

import numpy as np
import pytest

from tracer.rendering.buffers import Frame
from tracer.scoring.denoise import denoise
from tracer.errors import UserError
from tracer.outputs.npz import write_arrays
from tracer.scoring.metrics import score
from tracer.rendering import render
from tracer.scoring.score import equal_quality_spp, score_files

from .helpers import blob_scene


def test_equal_quality_spp_is_recovered_exactly_on_a_synthetic_ladder():
    """A ladder with PSNR = 20 + 3.0103 log2(spp) (the 1/sqrt(N) law): a candidate at the PSNR of
    6 spp, 23 spp or 1.5 spp lands exactly there; outside the ladder it extrapolates and says so."""
    spps = [1, 2, 4, 8, 16, 32]
    slope = 10 * math.log10(2)
    psnrs = [20 + slope * math.log2(s) for s in spps]
    for target_spp in [1.5, 6.0, 23.0, 32.0, 1.0]:
        spp, extrapolated = equal_quality_spp(spps, psnrs, 20 + slope * math.log2(target_spp))
        assert spp == pytest.approx(target_spp, rel=1e-12) and not extrapolated
    spp, extrapolated = equal_quality_spp(spps, psnrs, 20 + slope * math.log2(100.0))
    assert spp == pytest.approx(100.0, rel=1e-12) and extrapolated
    kinked = [20, 23, 25, 29]        # a ladder that is not a straight line: interpolation per segment
    spp, _ = equal_quality_spp([1, 2, 4, 8], kinked, 24)
    assert spp == pytest.approx(2 ** 1.5)


def synthetic_render(path, image, spp, seconds):
    write_arrays(path, {"radiance": image.astype(np.float32),
                        "meta": np.array(json.dumps({"spp": spp, "render_seconds": seconds}))})
    return path


def test_score_files_reports_equal_quality_spp_and_speedup(tmp_path, rng):
    """Images with Gaussian noise of variance v / spp: the ladder's PSNR rises 3.01 dB per doubling, and a
    candidate with the noise of 12 spp is rated as good as ~12 spp; the speedup is 12 spp x seconds per spp
    over the candidate's seconds."""
    reference = rng.uniform(0.1, 0.6, size=(64, 64, 3))
    ref_path = synthetic_render(tmp_path / "ref.npz", reference, 100000, 100.0)
    noise = rng.normal(size=(7, 64, 64, 3))
    ladder = [synthetic_render(tmp_path / f"s{spp}.npz", reference + 0.04 * noise[k] / math.sqrt(spp), spp, 0.5 * spp)
              for k, spp in enumerate([1, 2, 4, 8, 16, 32])]
    candidate = synthetic_render(tmp_path / "cand.npz", reference + 0.04 * noise[6] / math.sqrt(12), 1, 0.0)
    report = score_files(ref_path, candidate, ladder=ladder, seconds=1.0)
    assert report.equal_quality_spp == pytest.approx(12, rel=0.1)
    assert report.seconds_per_spp == pytest.approx(0.5)
    assert report.speedup == pytest.approx(report.equal_quality_spp * 0.5 / 1.0)
    with pytest.raises(UserError, match="--seconds"):
        score_files(ref_path, candidate, seconds=1.0)


def test_score_refuses_mismatched_shapes_and_missing_radiance(tmp_path, rng):
    ref = synthetic_render(tmp_path / "ref.npz", rng.uniform(size=(16, 16, 3)), 10, 1.0)
    small = synthetic_render(tmp_path / "small.npz", rng.uniform(size=(8, 16, 3)), 1, 1.0)
    with pytest.raises(UserError, match="differs from the reference"):
        score_files(ref, small)
    write_arrays(tmp_path / "empty.npz", {"colour": np.zeros((16, 16, 3))})
    with pytest.raises(UserError, match="radiance: missing"):
        score_files(ref, tmp_path / "empty.npz")


@pytest.fixture(scope="module")
def blob_frames():
    scene = blob_scene(width=48, height=48)
    return render(scene, spp=512, seed=100), render(scene, spp=1, seed=1), render(scene, spp=4, seed=2)


def test_denoiser_beats_four_spp_and_keeps_shape(blob_frames):
    reference, one, four = blob_frames
    result = denoise(one)
    assert result.radiance.shape == one["radiance"].shape and result.radiance.dtype == np.float32
    assert result.variance_source == "spatial"
    assert score(reference["radiance"], result.radiance).psnr_db > score(reference["radiance"], four["radiance"]).psnr_db
    assert score(reference["radiance"], result.radiance).psnr_db > score(reference["radiance"], one["radiance"]).psnr_db + 5


def test_denoiser_uses_the_variance_buffer_when_there_is_one(blob_frames):
    _, _, four = blob_frames
    assert denoise(four).variance_source == "buffer"


def test_denoiser_leaves_a_noise_free_image_unchanged():
    """Zero variance everywhere: the luminance weight stops every tap that differs, so an image made of
    flat regions passes through."""
    height, width = 20, 24
    radiance = np.zeros((height, width, 3), np.float32)
    radiance[:, 12:] = [0.5, 0.4, 0.3]
    buffers = {"radiance": radiance, "radiance_variance": np.zeros_like(radiance),
               "albedo": np.ones_like(radiance) * 0.5, "event1_hit": np.ones((height, width), np.float32),
               "event1_depth": np.ones((height, width), np.float32),
               "event1_normal": np.tile(np.float32([0, 0, 1]), (height, width, 1)),
               "event1_position": np.zeros_like(radiance)}
    out = denoise(Frame(buffers, {"spp": 16}))
    np.testing.assert_allclose(out.radiance, radiance, atol=1e-6)
