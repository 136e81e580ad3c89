"""How converged a render is, from its own variance buffer."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class ResidualNoise:
    """How far a render is from its converged image, estimated from its own variance buffer.

    mean_relative_error : mean over covered pixels (event 1 seen at least once) of
        ``sqrt(mean channel variance) / max(mean radiance, 1e-3)``.
    psnr_db : ``10 log10(1 / mean variance)`` over all pixels and channels: the expected PSNR
        (peak 1, linear radiance) of the render against the converged image, since the expected
        squared error of a mean equals its variance.
    """

    mean_relative_error: float
    psnr_db: float


def residual_noise(buffers) -> ResidualNoise:
    mean = np.asarray(buffers["radiance"], dtype=np.float64)
    variance = np.asarray(buffers["radiance_variance"], dtype=np.float64)
    covered = np.asarray(buffers["event1_hit"]) > 0
    relative = np.sqrt(variance.mean(axis=2)) / np.maximum(mean.mean(axis=2), 1e-3)
    error = float(relative[covered].mean()) if covered.any() else 0.0
    mse = float(variance.mean())
    psnr = math.inf if mse <= 0 else 10.0 * math.log10(1.0 / mse)
    return ResidualNoise(mean_relative_error=error, psnr_db=psnr)
