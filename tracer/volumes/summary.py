"""What ``tracer info`` reports about a volume."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import UserError
from .volume import Volume, count_nonfinite


@dataclass(frozen=True)
class VolumeSummary:
    """What ``tracer info`` prints."""

    shape: tuple[int, int, int]
    dtype: str
    spacing_mm: tuple[float, float, float]
    extent_mm: tuple[float, float, float]
    origin_mm: tuple[float, float, float]
    value_min: float
    value_max: float
    percentiles: dict[str, float]
    histogram_counts: np.ndarray
    histogram_edges: np.ndarray
    memory_bytes: int         # what the loaded volume holds: its bricks
    n_nonfinite: int


def summarize(volume: Volume, n_bins: int = 24) -> VolumeSummary:
    """Shape, geometry, value range, percentiles and a histogram of the finite voxels."""
    data = volume.data
    finite = data[np.isfinite(data)] if count_nonfinite(data) else data.ravel()
    if finite.size == 0:
        raise UserError(f"{volume.source}: data: no finite voxels")
    levels = (1, 5, 25, 50, 75, 95, 99)
    values = np.percentile(finite, levels)
    lo, hi = float(finite.min()), float(finite.max())
    counts, edges = np.histogram(finite, bins=n_bins, range=(lo, hi if hi > lo else lo + 1))
    return VolumeSummary(
        shape=volume.shape,
        dtype=volume.source_dtype,
        spacing_mm=tuple(float(s) for s in volume.spacing),
        extent_mm=tuple(float(e) for e in volume.extent_mm),
        origin_mm=tuple(float(o) for o in volume.origin),
        value_min=lo,
        value_max=hi,
        percentiles={f"p{p}": float(v) for p, v in zip(levels, values)},
        histogram_counts=counts,
        histogram_edges=edges,
        memory_bytes=int(volume.bricks.nbytes),
        n_nonfinite=count_nonfinite(data),
    )
