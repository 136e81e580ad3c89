"""Metrics against scikit-image: PSNR (skimage.metrics.peak_signal_noise_ratio) and SSIM
(skimage.metrics.structural_similarity with gaussian_weights=True, sigma 1.5,
use_sample_covariance=False, data_range 1: Wang et al. 2004)."""

import numpy as np
import pytest
from skimage.metrics import peak_signal_noise_ratio, structural_similarity

from tracer.outputs.png import to_display
from tracer.scoring.metrics import psnr, score, ssim


@pytest.fixture
def pair(rng):
    y, x = np.mgrid[0:48, 0:64] / 48.0
    clean = np.stack([np.sin(3 * x) ** 2, y * 0.8, 0.5 + 0.4 * np.cos(5 * x * y)], axis=-1)
    noisy = np.clip(clean + rng.normal(0, 0.08, clean.shape), 0, 1)
    return clean, noisy


def test_psnr_equals_scikit_image(pair):
    clean, noisy = pair
    assert psnr(clean, noisy) == pytest.approx(peak_signal_noise_ratio(clean, noisy, data_range=1.0), rel=1e-12)


def test_ssim_equals_scikit_image(pair):
    clean, noisy = pair
    expected = structural_similarity(clean, noisy, data_range=1.0, channel_axis=-1, gaussian_weights=True,
                                     sigma=1.5, use_sample_covariance=False)
    assert ssim(clean, noisy) == pytest.approx(expected, abs=1e-10)
    gray_expected = structural_similarity(clean[..., 0], noisy[..., 0], data_range=1.0, gaussian_weights=True,
                                          sigma=1.5, use_sample_covariance=False)
    assert ssim(clean[..., 0], noisy[..., 0]) == pytest.approx(gray_expected, abs=1e-10)


def test_identical_images_score_perfectly(pair):
    clean, _ = pair
    assert ssim(clean, clean) == pytest.approx(1.0)
    assert psnr(clean, clean) == float("inf")


def test_scores_work_on_display_referred_radiance(pair):
    clean, noisy = pair
    radiance_clean, radiance_noisy = clean * 0.7, noisy * 0.7
    scores = score(radiance_clean, radiance_noisy, exposure=0.5)
    display_clean, display_noisy = to_display(radiance_clean, 0.5), to_display(radiance_noisy, 0.5)
    assert scores.psnr_db == pytest.approx(peak_signal_noise_ratio(display_clean, display_noisy, data_range=1.0))
    assert scores.mse == pytest.approx(np.mean((radiance_clean - radiance_noisy) ** 2))
    expected_relative = np.mean((radiance_noisy - radiance_clean) ** 2 / (radiance_clean**2 + 0.01))
    assert scores.relative_mse == pytest.approx(expected_relative)


def test_covered_pixels_only(pair):
    clean, noisy = pair
    mask = np.zeros(clean.shape[:2], bool)
    mask[10:30, 20:50] = True
    scores = score(clean, noisy, mask=mask)
    assert scores.n_pixels == 600
    assert scores.mse == pytest.approx(np.mean((clean[mask] - noisy[mask]) ** 2))
