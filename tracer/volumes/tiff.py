"""TIFF stacks through tifffile: one multi-page file, or a folder of single-page files.

Page k is the slice z = k; within a page, rows are y and columns x, so the array becomes [x, y, z] =
``stack.transpose(2, 1, 0)``. Spacing: the scene's ``spacing_mm`` when given; otherwise an ImageJ file's
own calibration (``spacing`` for z, the resolution tags for x and y, its ``unit`` in mm, micron or nm);
otherwise 1 mm, as for ``.npy``.
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np

from ..errors import UserError
from .optional import require
from .bricking import Slabs
from .volume import ACCEPTED_DTYPES, RawVolume, check_budget

TIFF_SUFFIXES = (".tif", ".tiff")
MM_PER = {"mm": 1.0, "millimeter": 1.0, "micron": 1e-3, "um": 1e-3, "\\u00b5m": 1e-3, "µm": 1e-3, "nm": 1e-6,
          "nanometer": 1e-6}


def _natural(path: Path):
    return [int(part) if part.isdigit() else part for part in re.split(r"(\d+)", path.name)]


def tiff_pages(folder: Path) -> list[Path]:
    return sorted((p for p in folder.iterdir() if p.suffix.lower() in TIFF_SUFFIXES and not p.name.startswith(".")),
                  key=_natural)


def read_tiff(path: Path, budget: int) -> RawVolume:
    tifffile = require("tifffile", path)
    if not path.exists():
        raise UserError(f"{path}: file not found")
    calibration = None
    try:
        if path.is_dir():
            pages = tiff_pages(path)
            if len(pages) < 2:
                raise UserError(f"{path}: a folder of TIFF pages needs at least 2 .tif files, found {len(pages)}")
            first = tifffile.TiffFile(str(pages[0]))
            shape2d = first.pages[0].shape
            dtype = np.dtype(first.pages[0].dtype)
            first.close()
            if len(shape2d) != 2 or dtype.newbyteorder("=").name not in ACCEPTED_DTYPES:
                raise UserError(f"{pages[0]}: a page must be grey 2-D of one of {', '.join(ACCEPTED_DTYPES)}, "
                                f"this one has shape {shape2d} and dtype {dtype}")
            check_budget(path, (len(pages),) + tuple(shape2d), dtype, budget, streamed=True)
            return RawVolume(data=Slabs((shape2d[1], shape2d[0], len(pages)), dtype.newbyteorder("="), 2,
                                        lambda start, stop: _pages(pages[start:stop], shape2d, dtype)),
                             origin=np.zeros(3), directions=np.eye(3), dtype=dtype.newbyteorder("=").name,
                             format="TIFF stack", details=(("spacing", "not in the files: 1 mm unless the scene "
                                                            "gives spacing_mm"),))
        else:
            with tifffile.TiffFile(str(path)) as handle:
                series = handle.series[0]
                check_budget(path, series.shape, series.dtype, budget)
                stack = series.asarray()
                calibration = _calibration(handle)
    except UserError:
        raise
    except Exception as error:
        raise UserError(f"{path}: not a readable TIFF: {str(error).splitlines()[0] if str(error) else type(error).__name__}")
    stack = np.squeeze(stack)
    if stack.ndim != 3:
        raise UserError(f"{path}: a TIFF volume must be a stack of grey 2-D pages, this one has shape {stack.shape}")
    name = stack.dtype.newbyteorder("=").name
    if name not in ACCEPTED_DTYPES:
        raise UserError(f"{path}: dtype {stack.dtype} is not supported; use one of {', '.join(ACCEPTED_DTYPES)}")
    stack = stack.astype(stack.dtype.newbyteorder("="), copy=False)
    # pages are z planes of (y, x) pixels: handed over plane by plane in [x, y, z] order, never transposed whole
    data = Slabs(tuple(stack.shape[::-1]), stack.dtype, 2,
                 lambda start, stop: stack[start:stop].transpose(2, 1, 0))
    spacing = calibration if calibration is not None else (1.0, 1.0, 1.0)
    details = (("spacing", "from the file's ImageJ calibration" if calibration is not None else
                "not in the file: 1 mm unless the scene gives spacing_mm"),)
    return RawVolume(data=data, origin=np.zeros(3), directions=np.diag(spacing), dtype=name,
                     format="TIFF stack" if path.is_dir() else "TIFF", details=details)


def _pages(pages: list[Path], shape2d: tuple, dtype: np.dtype) -> np.ndarray:
    """Pages of a folder as planes [x, y, k] (read when the loader asks for them)."""
    import tifffile

    planes = []
    for page in pages:
        try:
            image = tifffile.imread(str(page))
        except Exception as error:
            raise UserError(f"{page}: not a readable TIFF: {str(error).splitlines()[0] if str(error) else type(error).__name__}")
        if image.shape != shape2d:
            raise UserError(f"{page}: page shape {image.shape} differs from the first page's {shape2d}")
        planes.append(image.astype(dtype.newbyteorder("="), copy=False).T)
    return np.stack(planes, axis=2)


def _calibration(handle) -> tuple[float, float, float] | None:
    """(x, y, z) spacing in mm from ImageJ metadata and the resolution tags, or None."""
    meta = handle.imagej_metadata
    if not meta or "spacing" not in meta:
        return None
    unit = str(meta.get("unit", "")).strip().lower()
    if unit not in MM_PER:
        return None
    page = handle.pages[0]
    try:
        x_resolution = page.tags["XResolution"].value
        y_resolution = page.tags["YResolution"].value
        dx = x_resolution[1] / x_resolution[0]
        dy = y_resolution[1] / y_resolution[0]
    except (KeyError, ZeroDivisionError):
        return None
    scale = MM_PER[unit]
    return dx * scale, dy * scale, float(meta["spacing"]) * scale
