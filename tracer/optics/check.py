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
    glowing_fraction: float | None = None        # voxels (opacity > 0) glowing above 1% of the brightest; None: no emission
    brightest_glow: tuple | None = None          # ((r, g, b) of (1 - albedo) L_e, the value where it peaks)

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
        ] + ([] if self.glowing_fraction is None else [
            f"emission              {100 * self.glowing_fraction:.2f}% of voxels glow above 1% of the brightest, "
            "(1 - albedo) L_e = "
            f"({', '.join(f'{c:.3g}' for c in self.brightest_glow[0])}) at value {self.brightest_glow[1]:.6g}",
        ]) + [
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

    glowing_fraction = brightest = None
    if tf.emission_values is not None or tf.temperature_values is not None:
        # what the medium emits per unit extinction: (1 - albedo) L_e (absorption-emission, Max 1995)
        glow_over_range = (1.0 - tf.albedo_at(grid)) * tf.emission_at(grid) * (opacity_over_range > 0)[:, None]
        peak = int(np.argmax(glow_over_range.max(axis=1)))
        brightest = (tuple(float(c) for c in glow_over_range[peak]), float(grid[peak]))
        sample = data.ravel()[nonempty]
        brightest_level = glow_over_range[peak].max()
        glows = ((1.0 - tf.albedo_at(sample)) * tf.emission_at(sample)).max(axis=1) > 0.01 * brightest_level \
            if sample.size and brightest_level > 0 else np.zeros(0)
        glowing_fraction = float(glows.sum() / data.size)
        if glow_over_range.max() == 0:
            warnings.append("the emission is zero wherever the opacity or the absorption (1 - albedo) is: nothing "
                            "will glow (sigma_a = sigma (1 - albedo) carries the emission)")

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
        mean_free_path_mm=free_path, verdict=verdict, warnings=warnings, glowing_fraction=glowing_fraction,
        brightest_glow=brightest,
    )


def clipped_histogram(values: np.ndarray, low: float, high: float, n_bins: int = 200):
    """Voxel shares (%) per value bin, with a ceiling that keeps a huge spike (the background around a
    scan, say) from flattening the rest: bins above 2.5 x the 90th percentile of the occupied bins are
    clipped. Returns (centres, shares, ceiling, clipped bin indices)."""
    counts, edges = np.histogram(values, bins=n_bins, range=(low, high if high > low else low + 1))
    shares = 100.0 * counts / max(counts.sum(), 1)
    occupied = shares[shares > 0]
    ceiling = 2.5 * float(np.percentile(occupied, 90)) if occupied.size else 1.0
    if shares.max() <= ceiling:
        ceiling = float(max(shares.max(), 1e-9)) * 1.05
    clipped = np.flatnonzero(shares > ceiling)
    return 0.5 * (edges[1:] + edges[:-1]), shares, ceiling, clipped


def plot_transfer_check(volume: Volume, tf: TransferFunction, check: TransferCheck, path) -> None:
    """A one-page report (PNG): what the function makes of each value, and how far light gets.

    Top: the opacity per reference length as an area tinted by the albedo at each value, over the
    volume's value distribution (voxel shares, with a background spike clipped and labelled).
    Bottom: the mean free path 1/sigma per value on a log scale, with the lengths at which the
    verdict changes marked ("only the outer shell" below, "nearly invisible" above), and the
    typical material's free path. The verdict and the key figures are printed beside.
    """
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    from matplotlib.patches import Polygon

    from ..io.atomic import atomic_path

    lo, hi = check.data_range
    a, b = check.tf_span
    x_lo, x_hi = min(lo, a), max(hi, b)
    if x_hi == x_lo:
        x_hi = x_lo + 1
    grid = np.linspace(x_lo, x_hi, 1024)
    opacity = tf.opacity_at(grid)
    albedo = np.clip(tf.albedo_at(grid), 0, 1)
    ink, muted, accent = "#1f2a36", "#8a94a6", "#b5651d"

    figure = plt.figure(figsize=(10, 5.6), layout="constrained")
    spec = figure.add_gridspec(2, 2, width_ratios=[3.2, 1], height_ratios=[1.25, 1])
    top = figure.add_subplot(spec[0, 0])
    bottom = figure.add_subplot(spec[1, 0], sharex=top)
    notes = figure.add_subplot(spec[:, 1])

    # opacity as an albedo-tinted area: a colour strip clipped to the region under the curve
    top.imshow(albedo[None], aspect="auto", extent=(x_lo, x_hi, 0, 1), origin="lower", zorder=1)
    under = Polygon(np.column_stack([np.r_[x_lo, grid, x_hi], np.r_[0, opacity, 0]]), closed=True,
                    transform=top.transData, facecolor="none", edgecolor="none")
    top.add_patch(under)
    top.images[0].set_clip_path(under)
    top.plot(grid, opacity, color=ink, lw=1.2, zorder=3)
    top.set_ylim(0, 1.05)
    top.set_ylabel(f"opacity per {tf.reference_length_mm:g} mm\n(area tinted by albedo)", fontsize=8)
    share_axis = top.twinx()
    data = volume.data                         # assembled from the bricks once
    centres, shares, ceiling, clipped = clipped_histogram(data[np.isfinite(data)].ravel(), lo, hi)
    # drawn on the opacity axes (scaled to the share axis) so the area never hides it
    to_top = 1.05 / (ceiling * 1.1)
    top.step(centres, np.minimum(shares, ceiling) * to_top, where="mid", color="#4d5b73", lw=0.9, zorder=4)
    runs = np.split(clipped, np.flatnonzero(np.diff(clipped) > 1) + 1) if clipped.size else []
    for run in runs:
        index = run[np.argmax(shares[run])]
        top.annotate(f"{shares[run].sum():.0f}% of voxels\n(clipped)", xy=(centres[index], ceiling * to_top),
                     xytext=(6, -18), textcoords="offset points", fontsize=7, color=ink, zorder=5,
                     bbox=dict(boxstyle="round,pad=0.15", fc=(1, 1, 1, 0.8), ec="none"),
                     arrowprops=dict(arrowstyle="-", color=muted, lw=0.6))
    share_axis.set_ylim(0, ceiling * 1.1)
    share_axis.set_ylabel("voxels per bin (%)", color=muted, fontsize=8)
    share_axis.tick_params(axis="y", colors=muted, labelsize=7)
    top.set_zorder(share_axis.get_zorder() + 1)
    top.patch.set_visible(False)
    for edge in (lo, hi):
        top.axvline(edge, color=muted, lw=0.6, ls=":")
    top.set_title("what each value becomes", fontsize=9, loc="left")

    # mean free path per value, against the verdict's thresholds
    sigma = tf.extinction_at(grid)
    with np.errstate(divide="ignore"):
        free_path = np.where(sigma > 0, 1.0 / np.maximum(sigma, 1e-300), np.nan)
    shell = SHELL_FRACTION * check.diagonal_mm
    faint = check.diagonal_mm / NEARLY_INVISIBLE_DEPTH
    finite = free_path[np.isfinite(free_path)]
    y_low = min(shell / 4, finite.min() / 2) if finite.size else shell / 4
    y_high = max(faint * 4, finite.max() * 2) if finite.size else faint * 4
    bottom.axhspan(y_low, shell, color=accent, alpha=0.10, lw=0)
    bottom.axhspan(faint, y_high, color=muted, alpha=0.12, lw=0)
    bottom.axhline(shell, color=accent, lw=0.9, ls="--")
    bottom.axhline(faint, color=muted, lw=0.9, ls="--")
    bottom.text(x_lo, shell, "  only the outer shell shows below", va="top", fontsize=7, color=accent)
    bottom.text(x_lo, faint, "  nearly invisible above", va="bottom", fontsize=7, color=muted)
    bottom.plot(grid, free_path, color=ink, lw=1.4)
    if math.isfinite(check.mean_free_path_mm):
        bottom.axhline(check.mean_free_path_mm, color=ink, lw=0.6, ls=":")
        bottom.text(x_hi, check.mean_free_path_mm, "typical material  ", ha="right", va="bottom", fontsize=7, color=ink)
    bottom.set_yscale("log")
    bottom.set_ylim(y_low, y_high)
    bottom.set_ylabel("mean free path (mm)", fontsize=8)
    bottom.set_xlabel("scalar value" + (" (HU)" if tf.scale == "HU" else ""), fontsize=8)
    bottom.set_xlim(x_lo, x_hi)
    bottom.set_title("how far light gets into material of each value (none drawn where transparent)", fontsize=9,
                     loc="left")

    notes.set_axis_off()
    lines = [("verdict", check.verdict)] + [(line[:22].strip(), line[22:].strip()) for line in check.lines()[:-1]]
    text = "\n".join(f"{label}\n    {value}" for label, value in lines)
    if check.warnings:
        text += "\n\nwarnings\n" + "\n".join(f"    {w}" for w in check.warnings)
    import textwrap

    wrapped = "\n".join(textwrap.fill(line, 40, subsequent_indent="    ") for line in text.splitlines())
    notes.text(0.0, 1.0, wrapped, va="top", ha="left", fontsize=7.5, color=ink, family="monospace",
               transform=notes.transAxes)
    figure.suptitle(f"{tf.name} on {volume.source.split('/')[-1]}", fontsize=10, color=ink)
    with atomic_path(path) as temporary:
        figure.savefig(temporary, dpi=100, format="png")
    plt.close(figure)
