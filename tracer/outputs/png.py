"""PNG previews: exposure, clamp and the sRGB transfer curve (IEC 61966-2-1), then 8 bits."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..io.atomic import atomic_path


def srgb_encode(linear) -> np.ndarray:
    """The sRGB transfer curve of IEC 61966-2-1 on values clamped to [0, 1]."""
    x = np.clip(np.asarray(linear, dtype=np.float64), 0.0, 1.0)
    return np.where(x <= 0.0031308, 12.92 * x, 1.055 * np.power(x, 1.0 / 2.4) - 0.055)


def to_display(radiance, exposure: float = 0.0) -> np.ndarray:
    """Display-referred values in [0, 1]: scale by 2**exposure, clamp, sRGB curve."""
    return srgb_encode(np.asarray(radiance, dtype=np.float64) * 2.0**exposure)


def to_uint8(display) -> np.ndarray:
    return np.clip(np.rint(np.asarray(display) * 255.0), 0, 255).astype(np.uint8)


def write_png(path, image) -> Path:
    """Write an 8-bit image (H, W) or (H, W, 3|4) atomically."""
    import imageio.v3 as iio

    path = Path(path)
    with atomic_path(path) as temporary:
        iio.imwrite(temporary, np.asarray(image, dtype=np.uint8), extension=".png")
    return path


def write_preview(path, radiance, exposure: float = 0.0) -> Path:
    return write_png(path, to_uint8(to_display(radiance, exposure)))
