"""Checking a transfer function against a volume before a long render.

The question a user asks is "what will this show?". We answer with numbers that need no
render: how much of the volume is non-empty, whether the function's control points cover
the data, and the optical depth a ray meets crossing the volume through typical material
(Beer-Lambert: transmittance = exp(-optical depth)).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .transfer import TransferFunction
from ..volumes.volume import Volume

#: Optical depth below which a crossing ray keeps 90 % of its light: "nearly invisible".
NEARLY_INVISIBLE_DEPTH = 0.105
#: A ray loses 1/e of its light within this fraction of the diagonal: "only the outer shell will show".
SHELL_FRACTION = 0.02


@dataclass(frozen=True)
class TransferCheck:
    """Findings of :func:`check_transfer_function`; ``warnings`` are the problems worth acting on."""

    data_range: tuple[float, float]
    tf_span: tuple[float, float]
    span_coverage: float              # fraction of the data range inside the function's span
    nonzero_fraction: float           # fraction of voxels with opacity > 0
    median_extinction_per_mm: float   # over non-empty voxels
    diagonal_mm: float
    optical_depth: float              # crossing the longest diagonal through median non-empty material
    mean_free_path_mm: float
    verdict: str
    warnings: list[str] = field(default_factory=list)

    def lines(self) -> list[str]:
        lo, hi = self.data_range
        a, b = self.tf_span
        return [
            f"data range            {lo:.6g} .. {hi:.6g}",
            f"transfer span         {a:.6g} .. {b:.6g} (covers {100 * self.span_coverage:.1f}% of the data range)",
            f"non-empty voxels      {100 * self.nonzero_fraction:.2f}% have opacity > 0",
            f"median extinction     {self.median_extinction_per_mm:.4g} per mm in non-empty voxels",
            f"diagonal crossing     {self.diagonal_mm:.4g} mm -> optical depth {self.optical_depth:.3g}, "
            f"transmittance {math.exp(-min(self.optical_depth, 700.0)):.3g}",
            f"mean free path        {self.mean_free_path_mm:.4g} mm",
            f"verdict               {self.verdict}",
        ]


def check_transfer_function(volume: Volume, tf: TransferFunction) -> TransferCheck:
    data = volume.data
    lo, hi = volume.value_range
    a, b = tf.span
    coverage = 1.0 if hi == lo else max(0.0, min(hi, b) - max(lo, a)) / (hi - lo)
    opacity = tf.opacity_at(data.ravel())
    nonempty = opacity > 0
    nonzero_fraction = float(nonempty.mean())
    if nonempty.any():
        median_sigma = float(np.median(tf.extinction_at(data.ravel()[nonempty])))
    else:
        median_sigma = 0.0
    diagonal = volume.diagonal_mm
    depth = median_sigma * diagonal
    free_path = math.inf if median_sigma == 0 else 1.0 / median_sigma

    warnings = []
    grid = np.linspace(lo, hi, 4097)
    opacity_over_range = tf.opacity_at(grid)
    if opacity_over_range.max() == 0:
        warnings.append("the transfer function is transparent over the whole data range: the render will show only background")
    elif opacity_over_range.min() >= 0.99:
        warnings.append("the transfer function is opaque over the whole data range: the render will show only the volume's outer box")
    if coverage < 0.5 and not warnings:
        warnings.append(f"the transfer function's control points cover only {100 * coverage:.0f}% of the data range; "
                        "values outside are clamped to the end points")
    if not warnings and nonzero_fraction == 0:
        warnings.append("no voxel has nonzero opacity: the render will show only background")

    if nonzero_fraction == 0 or opacity_over_range.max() == 0:
        verdict = "invisible: nothing will show"
    elif depth < NEARLY_INVISIBLE_DEPTH:
        verdict = "nearly invisible: even the longest crossing keeps over 90% of the light"
    elif free_path < SHELL_FRACTION * diagonal:
        verdict = (f"only the outer shell will show: light goes {free_path:.3g} mm into typical material, "
                   f"{100 * free_path / diagonal:.2g}% of the diagonal")
    elif depth < 3.0:
        verdict = "semi-transparent: inner structure will show through"
    else:
        verdict = "mostly opaque in bulk, with visible depth near surfaces"
    return TransferCheck(
        data_range=(lo, hi), tf_span=(a, b), span_coverage=coverage, nonzero_fraction=nonzero_fraction,
        median_extinction_per_mm=median_sigma, diagonal_mm=diagonal, optical_depth=depth,
        mean_free_path_mm=free_path, verdict=verdict, warnings=warnings,
    )


def plot_transfer_check(volume: Volume, tf: TransferFunction, check: TransferCheck, path) -> None:
    """A PNG: the value histogram (log count) under the opacity curve and an albedo colour band."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from ..io.atomic import atomic_path

    lo, hi = check.data_range
    a, b = check.tf_span
    x_lo, x_hi = min(lo, a), max(hi, b)
    if x_hi == x_lo:
        x_hi = x_lo + 1
    counts, edges = np.histogram(volume.data, bins=256, range=(lo, hi if hi > lo else lo + 1))
    figure, (axis, band) = plt.subplots(2, 1, figsize=(8, 4.8), sharex=True, layout="constrained",
                                        gridspec_kw={"height_ratios": [6, 1]})
    centres = 0.5 * (edges[1:] + edges[:-1])
    axis.fill_between(centres, np.maximum(counts, 0.8), 0.8, step="mid", color="0.75", label="voxel count (log)")
    axis.set_yscale("log")
    axis.set_ylim(0.8, max(counts.max(), 1) * 2)
    axis.set_ylabel("voxels (log)")
    curve = axis.twinx()
    grid = np.linspace(x_lo, x_hi, 1024)
    curve.plot(grid, tf.opacity_at(grid), color="black", lw=2, label="opacity per reference length")
    curve.plot(tf.opacity_values, tf.opacity, "o", color="black", ms=4)
    curve.set_ylim(-0.02, 1.05)
    curve.set_ylabel(f"opacity per {tf.reference_length_mm:g} mm")
    axis.axvspan(x_lo, lo, color="tab:red", alpha=0.08)
    axis.axvspan(hi, x_hi, color="tab:red", alpha=0.08)
    axis.set_title(f"{tf.name} on {volume.source.split('/')[-1]}: {check.verdict}", fontsize=9)
    colors = np.clip(tf.albedo_at(grid), 0, 1)
    band.imshow(colors[None], aspect="auto", extent=(x_lo, x_hi, 0, 1))
    band.set_yticks([])
    band.set_ylabel("albedo", rotation=0, ha="right", va="center")
    band.set_xlabel("scalar value")
    handles = axis.get_legend_handles_labels()[0] + curve.get_legend_handles_labels()[0]
    axis.legend(handles, [h.get_label() for h in handles], loc="upper left", fontsize=8, framealpha=0.9)
    with atomic_path(path) as temporary:
        figure.savefig(temporary, dpi=110, format="png")
    plt.close(figure)
