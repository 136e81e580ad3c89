"""DICOM series (a folder of single-frame slices) through pydicom.

Geometry by the DICOM standard (PS3.3, C.7.6.2.1.1): the centre of pixel (column i, row j) of a slice lies at
``Image Position (Patient) + i * Δc * X + j * Δr * Y``, X and Y the row and column direction cosines of
Image Orientation (Patient), Δc and Δr the column and row spacing of Pixel Spacing ``[Δr, Δc]``. The volume's
index axes are (column i, row j, slice k): slices ordered along the normal X x Y by their positions, the third
direction the mean step between them. A gantry tilt (slices shifted along the image plane as well as along
the normal) is kept exactly as that sheared grid, never resampled. Values: ``stored x Rescale Slope +
Rescale Intercept`` (Hounsfield units for CT). World space: the DICOM patient frame, LPS.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..errors import UserError
from .optional import require
from .volume import RawVolume, check_budget

#: Slice steps may differ from their median by this fraction (or 0.01 mm, whichever is larger).
SPACING_TOLERANCE = 0.01
#: A step this many times the median means slices are missing.
GAP_FACTOR = 1.5


def is_dicom_folder(path: Path) -> bool:
    return path.is_dir() and any(p.suffix.lower() in (".dcm", ".ima", "") and p.is_file()
                                 for p in path.iterdir() if not p.name.startswith("."))


def _tag(dataset, keyword, code, where):
    value = getattr(dataset, keyword, None)
    if value is None or value == "":
        raise UserError(f"{where}: missing {code} {keyword}; tracer needs it to place the slice")
    return value


def read_dicom_series(path: Path, budget: int) -> RawVolume:
    pydicom = require("pydicom", path)
    from pydicom.errors import InvalidDicomError

    if not path.exists():
        raise UserError(f"{path}: folder not found")
    chosen_series = None
    if path.is_file():
        head = pydicom.dcmread(str(path), stop_before_pixels=True)
        chosen_series, path = getattr(head, "SeriesInstanceUID", None), path.parent
    headers = []
    for file in sorted(p for p in path.iterdir() if p.is_file() and not p.name.startswith(".")):
        try:
            headers.append((file, pydicom.dcmread(str(file), stop_before_pixels=True)))
        except (InvalidDicomError, OSError, EOFError):
            continue                                   # not DICOM: ignored (a folder may hold notes, thumbnails)
    headers = [(f, h) for f, h in headers if getattr(h, "Rows", None) is not None]
    if not headers:
        raise UserError(f"{path}: no DICOM image files in this folder")
    series: dict = {}
    for file, header in headers:
        series.setdefault(str(getattr(header, "SeriesInstanceUID", "")), []).append((file, header))
    if chosen_series is not None:
        series = {uid: items for uid, items in series.items() if uid == chosen_series}
    if len(series) > 1:
        names = ", ".join(f"{str(getattr(items[0][1], 'SeriesDescription', '') or '?')!r} ({len(items)} files)"
                          for items in series.values())
        raise UserError(f"{path}: holds {len(series)} DICOM series ({names}); (0020,000E) Series Instance UID must be "
                        "the same for all: put each series in its own folder, or name one file of the series")
    items = next(iter(series.values()))
    if len(items) < 2:
        raise UserError(f"{path}: the series has {len(items)} slice; a volume needs at least 2")
    first = items[0][1]
    if int(getattr(first, "NumberOfFrames", 1) or 1) > 1:
        raise UserError(f"{items[0][0]}: (0028,0008) Number of Frames is {first.NumberOfFrames}; multi-frame DICOM "
                        "is not supported, only series of single-frame slices")
    orientation = np.array(_tag(first, "ImageOrientationPatient", "(0020,0037)", items[0][0]), np.float64)
    rows, columns = int(first.Rows), int(first.Columns)
    spacing = np.array(_tag(first, "PixelSpacing", "(0028,0030)", items[0][0]), np.float64)
    positions = []
    for file, header in items:
        other = np.array(_tag(header, "ImageOrientationPatient", "(0020,0037)", file), np.float64)
        if not np.allclose(other, orientation, atol=1e-4):
            raise UserError(f"{file}: (0020,0037) Image Orientation (Patient) differs from the other slices "
                            f"({other.round(4).tolist()} vs {orientation.round(4).tolist()})")
        if (int(header.Rows), int(header.Columns)) != (rows, columns):
            raise UserError(f"{file}: (0028,0010)/(0028,0011) slice size {int(header.Rows)} x {int(header.Columns)} "
                            f"differs from the others ({rows} x {columns})")
        if not np.allclose(np.array(_tag(header, "PixelSpacing", "(0028,0030)", file), np.float64), spacing):
            raise UserError(f"{file}: (0028,0030) Pixel Spacing differs from the other slices")
        positions.append(np.array(_tag(header, "ImagePositionPatient", "(0020,0032)", file), np.float64))
    row_direction, column_direction = orientation[:3], orientation[3:]
    normal = np.cross(row_direction, column_direction)
    along = np.array([p @ normal for p in positions])
    order = np.argsort(along, kind="stable")
    items = [items[k] for k in order]
    positions = [positions[k] for k in order]
    steps = np.diff(along[order])
    if np.any(steps <= 1e-6):
        k = int(np.argmin(steps))
        raise UserError(f"{items[k + 1][0]}: (0020,0032) Image Position (Patient) repeats that of {items[k][0].name}; "
                        "two slices at one position (a duplicate, or two series mixed)")
    median = float(np.median(steps))
    if np.max(np.abs(steps - median)) > max(SPACING_TOLERANCE * median, 0.01):
        k = int(np.argmax(steps))
        if steps[k] > GAP_FACTOR * median:
            raise UserError(f"{path}: missing slices: (0020,0032) Image Position (Patient) jumps {steps[k]:.3f} mm after "
                            f"{items[k][0].name} where the "
                            f"others are {median:.3f} mm apart (about {round(steps[k] / median) - 1} missing)")
        raise UserError(f"{path}: uneven slice spacing: (0020,0032) Image Position (Patient) steps from {steps.min():.3f} to {steps.max():.3f} mm "
                        f"(tolerance {max(SPACING_TOLERANCE * median, 0.01):.3f} mm)")
    check_budget(path, (columns, rows, len(items)), np.float32, budget)

    data = np.empty((columns, rows, len(items)), np.float32)
    slopes, intercepts = set(), set()
    stored_dtype = None
    for k, (file, _) in enumerate(items):
        dataset = pydicom.dcmread(str(file))
        try:
            pixels = dataset.pixel_array
        except Exception as error:                   # pydicom raises several kinds when it has no decoder
            syntax = dataset.file_meta.get("TransferSyntaxUID", "?")
            name = getattr(syntax, "name", str(syntax))
            raise UserError(f"{file}: (0002,0010) Transfer Syntax {syntax} ({name}): cannot decode its pixel data here "
                            f"({type(error).__name__}); decompress the series first, or install a pydicom decoder "
                            "plugin for it") from None
        stored_dtype = stored_dtype or pixels.dtype.name
        slope = float(getattr(dataset, "RescaleSlope", 1.0) or 1.0)
        intercept = float(getattr(dataset, "RescaleIntercept", 0.0) or 0.0)
        slopes.add(slope)
        intercepts.add(intercept)
        data[:, :, k] = (pixels.astype(np.float64) * slope + intercept).T
    step = (positions[-1] - positions[0]) / (len(items) - 1)
    directions = np.stack([row_direction * spacing[1], column_direction * spacing[0], step])
    tilt = np.degrees(np.arccos(min(1.0, abs(step @ normal) / np.linalg.norm(step))))
    modality = str(getattr(first, "Modality", "") or "?")
    details = (("modality", modality), ("series", str(getattr(first, "SeriesDescription", "") or "(no description)")),
               ("slices", f"{len(items)}, {median:.3f} mm apart"),
               ("rescale", "value = stored x " + "/".join(f"{s:g}" for s in sorted(slopes)) + " + "
                + "/".join(f"{i:g}" for i in sorted(intercepts)) + (" (Hounsfield units)" if modality == "CT" else "")))
    if tilt > 0.01:
        details += (("gantry tilt", f"{tilt:.2f} degrees: kept as a sheared grid, not resampled"),)
    return RawVolume(data=data, origin=positions[0], directions=directions, dtype=stored_dtype or "float32",
                     space="left-posterior-superior", format="DICOM", details=details)
