"""Scoring: how good a denoised image is, and the classical baseline filter to beat.

``metrics.py`` PSNR, SSIM (Wang et al. 2004) and MSE on one image pair; ``score.py`` the equal-quality
spp on a ladder of plain renders, the speedup, and scores over a whole dataset; ``denoise.py`` the
edge-avoiding a-trous wavelet filter (Dammertz et al. 2010) as a baseline.
"""

from .denoise import DenoiseSettings, denoise
from .metrics import Scores, psnr, score, ssim
from .score import ScoreReport, score_dataset, score_files

__all__ = ["psnr", "ssim", "score", "Scores", "score_files", "score_dataset", "ScoreReport", "denoise",
           "DenoiseSettings"]
