"""Image quality: PSNR and SSIM on display-referred images, MSE and relative MSE on linear radiance.

Display-referred means: radiance x 2**exposure, clamped to [0, 1], through the sRGB curve
(IEC 61966-2-1); PSNR and SSIM then use a data range of 1. SSIM follows Wang et al. (2004),
"Image quality assessment: from error visibility to structural similarity", IEEE TIP 13(4):
an 11 x 11 Gaussian window with sigma 1.5 (truncated at 3.5 sigma), K1 = 0.01, K2 = 0.03,
population (not sample) covariances, the mean over the channels, and the SSIM map cropped by
the window radius before averaging, which is how ``skimage.metrics.structural_similarity``
computes it with ``gaussian_weights=True``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..outputs.png import to_display

SSIM_SIGMA = 1.5
SSIM_TRUNCATE = 3.5
SSIM_K1 = 0.01
SSIM_K2 = 0.03
#: Relative MSE divides by reference^2 + this (common practice in the denoising literature).
RELATIVE_MSE_EPSILON = 0.01


@dataclass(frozen=True)
class Scores:
    psnr_db: float
    ssim: float
    mse: float
    relative_mse: float
    n_pixels: int
    covered_only: bool
    exposure: float

    def as_dict(self) -> dict:
        return {"psnr_db": self.psnr_db, "ssim": self.ssim, "mse": self.mse, "relative_mse": self.relative_mse,
                "n_pixels": self.n_pixels, "covered_only": self.covered_only, "exposure": self.exposure}


def psnr(reference, image, data_range: float = 1.0, mask=None) -> float:
    """Peak signal-to-noise ratio in dB: ``10 log10(data_range^2 / MSE)``."""
    reference = np.asarray(reference, dtype=np.float64)
    image = np.asarray(image, dtype=np.float64)
    error = (reference - image) ** 2
    mse = float(error[mask].mean()) if mask is not None else float(error.mean())
    return math.inf if mse == 0 else 10.0 * math.log10(data_range**2 / mse)


def _gaussian_kernel(sigma=SSIM_SIGMA, truncate=SSIM_TRUNCATE) -> np.ndarray:
    radius = int(truncate * sigma + 0.5)
    x = np.arange(-radius, radius + 1, dtype=np.float64)
    kernel = np.exp(-0.5 * (x / sigma) ** 2)
    return kernel / kernel.sum()


def _filter_valid(image: np.ndarray, kernel: np.ndarray) -> np.ndarray:
    """Separable correlation of a 2-D image, keeping only pixels whose window lies inside."""
    n = kernel.size
    rows = sum(kernel[k] * image[k:image.shape[0] - n + 1 + k, :] for k in range(n))
    return sum(kernel[k] * rows[:, k:rows.shape[1] - n + 1 + k] for k in range(n))


def ssim(reference, image, data_range: float = 1.0, mask=None) -> float:
    """Mean structural similarity (Wang et al. 2004) over channels; see the module docstring.

    With ``mask`` (H, W), the mean runs over the masked pixels of the cropped SSIM map.
    """
    reference = np.asarray(reference, dtype=np.float64)
    image = np.asarray(image, dtype=np.float64)
    if reference.ndim == 2:
        reference, image = reference[..., None], image[..., None]
    kernel = _gaussian_kernel()
    pad = (kernel.size - 1) // 2
    if min(reference.shape[:2]) < kernel.size:
        raise ValueError(f"SSIM needs images of at least {kernel.size} x {kernel.size} pixels")
    c1 = (SSIM_K1 * data_range) ** 2
    c2 = (SSIM_K2 * data_range) ** 2
    maps = []
    for channel in range(reference.shape[2]):
        x, y = reference[..., channel], image[..., channel]
        ux, uy = _filter_valid(x, kernel), _filter_valid(y, kernel)
        vx = _filter_valid(x * x, kernel) - ux * ux
        vy = _filter_valid(y * y, kernel) - uy * uy
        vxy = _filter_valid(x * y, kernel) - ux * uy
        maps.append(((2 * ux * uy + c1) * (2 * vxy + c2)) / ((ux * ux + uy * uy + c1) * (vx + vy + c2)))
    ssim_map = np.mean(maps, axis=0)
    if mask is not None:
        inner = np.asarray(mask)[pad:-pad, pad:-pad]
        return float(ssim_map[inner].mean()) if inner.any() else float("nan")
    return float(ssim_map.mean())


def score(reference_radiance, candidate_radiance, *, exposure: float = 0.0, mask=None) -> Scores:
    """All scores of a candidate against a reference (linear radiance, (H, W, 3))."""
    reference_radiance = np.asarray(reference_radiance, dtype=np.float64)
    candidate_radiance = np.asarray(candidate_radiance, dtype=np.float64)
    reference_display = to_display(reference_radiance, exposure)
    candidate_display = to_display(candidate_radiance, exposure)
    pixel_mask = None if mask is None else np.asarray(mask, dtype=bool)
    squared = (candidate_radiance - reference_radiance) ** 2
    relative = squared / (reference_radiance**2 + RELATIVE_MSE_EPSILON)
    if pixel_mask is not None:
        squared, relative = squared[pixel_mask], relative[pixel_mask]
    return Scores(
        psnr_db=psnr(reference_display, candidate_display, 1.0, pixel_mask),
        ssim=ssim(reference_display, candidate_display, 1.0, pixel_mask),
        mse=float(squared.mean()),
        relative_mse=float(relative.mean()),
        n_pixels=int(pixel_mask.sum()) if pixel_mask is not None else int(reference_radiance[..., 0].size),
        covered_only=pixel_mask is not None,
        exposure=exposure,
    )
