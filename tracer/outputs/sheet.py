"""Contact sheets: every buffer of a render on one labelled PNG, each mapped to be read at a glance.

Radiance and albedo through exposure and the sRGB curve; normals as RGB (n * 0.5 + 0.5);
positions as RGB over their bounding box; depth with a colour bar; alpha and hit fractions in
grey; variance on a log scale with a colour bar.
"""

from __future__ import annotations

import numpy as np

from ..rendering.buffers import Frame
from .png import to_display


#: Where a per-event buffer has no event (depth): a dark grey of our own, so that an empty pixel never
#: reads as a value of the colour map.
NO_EVENT = "#2b2d33"


def draw_buffer(figure, axis, frame: Frame, key: str, exposure: float = 0.0) -> None:
    """Draw buffer ``key`` of ``frame`` into ``axis`` the way every sheet shows it (module docstring),
    with a colour bar for depth and variance. Used by render sheets and dataset sheets alike."""
    import matplotlib

    data = frame[key]
    colorbar = None
    if key in ("radiance", "albedo"):
        axis.imshow(to_display(data, exposure if key == "radiance" else 0.0))
    elif key == "radiance_variance":
        variance = data.mean(axis=2)
        positive = variance[variance > 0]
        # the colour range spans the bulk of the noisy pixels, so a few outliers do not squash it
        low, high = np.percentile(positive, [1, 99.5]) if positive.size else (1e-12, 1e-11)
        values = np.log10(np.clip(variance, low, max(high, low * 10)))
        colorbar = axis.imshow(values, cmap="magma")
    elif key.endswith("_normal"):
        axis.imshow(np.clip(data * 0.5 + 0.5, 0, 1) * (np.linalg.norm(data, axis=2, keepdims=True) > 0))
    elif key.endswith("_position"):
        hit = frame[key.replace("_position", "_hit")] > 0
        if hit.any():
            low = data[hit].min(axis=0)
            span = np.maximum(data[hit].max(axis=0) - low, 1e-9)
            axis.imshow(np.clip((data - low) / span, 0, 1) * hit[..., None])
        else:
            axis.imshow(np.zeros_like(data))
    elif key.endswith("_depth"):
        hit = frame[key.replace("_depth", "_hit")] > 0
        values = np.where(hit, data, np.nan)
        finite = values[hit]
        cmap = matplotlib.colormaps["viridis"].with_extremes(bad=NO_EVENT)
        colorbar = axis.imshow(values, cmap=cmap,
                               vmin=finite.min() if finite.size else 0, vmax=finite.max() if finite.size else 1)
    else:
        axis.imshow(data, cmap="gray", vmin=0, vmax=1)
    if colorbar is not None:
        bar = figure.colorbar(colorbar, ax=axis, fraction=0.046, pad=0.02)
        bar.ax.tick_params(labelsize=7)


def write_contact_sheet(frame: Frame, path, exposure: float = 0.0, title: str | None = None) -> None:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from ..io.atomic import atomic_path

    panels = [("radiance", "radiance (sRGB)"), ("radiance_variance", "variance (log10)"), ("alpha", "alpha"),
              ("albedo", "albedo (sRGB)")]
    prefixes = ["event1", "event2"] + [f"level{i + 1}" for i in range(frame.n_levels)]
    for prefix in prefixes:
        panels += [(f"{prefix}_position", f"{prefix} position"), (f"{prefix}_normal", f"{prefix} normal"),
                   (f"{prefix}_depth", f"{prefix} depth (mm)"), (f"{prefix}_hit", f"{prefix} hit fraction")]
    n_cols = 4
    n_rows = (len(panels) + n_cols - 1) // n_cols
    height, width = frame["radiance"].shape[:2]
    aspect = height / width
    figure, axes = plt.subplots(n_rows, n_cols, figsize=(3.2 * n_cols, 3.2 * aspect * n_rows + 0.6), squeeze=False)
    for axis in axes.ravel():
        axis.set_axis_off()
    for axis, (key, label) in zip(axes.ravel(), panels):
        draw_buffer(figure, axis, frame, key, exposure)
        axis.set_title(label, fontsize=9)
    spp = frame.meta.get("spp", "?")
    figure.suptitle(title or f"{frame.meta.get('scene', {}).get('volume', {}).get('path', '').split('/')[-1]}: "
                    f"{width} x {height}, {spp} spp", fontsize=11)
    figure.tight_layout()
    with atomic_path(path) as temporary:
        figure.savefig(temporary, dpi=90, format="png")
    plt.close(figure)
