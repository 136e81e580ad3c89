"""``load_volume``: one entry point that picks the reader by the file's suffix."""

from __future__ import annotations

import numpy as np

from ..config import memory_budget
from ..errors import UserError
from .npy import read_npy
from .bricking import Slabs, bricks_from_slabs, whole
from .volume import RawVolume, Volume


def load_volume(path, *, spacing_mm=None, origin_mm=None, budget_bytes: int | None = None,
                allow_nonfinite: bool = False) -> Volume:
    """Load a volume in [x, y, z] order, held as the renderer's bricks only (see :class:`Volume`): NRRD
    (``.nrrd``, ``.nhdr``), ``.npy``, NIfTI (``.nii``, ``.nii.gz``), a DICOM series (a folder), TIFF (a
    multi-page file or a folder of pages), zarr / OME-Zarr (``.zarr``) or HDF5 (``.h5::dataset``); all but NRRD and
    ``.npy`` need the ``formats`` extra.

    Parameters
    ----------
    path : str or Path
    spacing_mm, origin_mm : 3 numbers, optional
        Geometry for ``.npy``, TIFF, zarr and HDF5 (defaults 1 mm and 0, or a TIFF's own calibration);
        NRRD, NIfTI, DICOM and OME-Zarr carry their own and refuse them.
    budget_bytes : int, optional
        Refuse volumes that need more memory than this (default: :func:`tracer.config.memory_budget`).
    allow_nonfinite : bool
        Accept NaN or Inf voxels (``tracer info`` reports them); rendering refuses them.

    Raises
    ------
    UserError
        One line naming the file and the problem.
    """
    from .chunked import is_chunked, read_chunked, split_member
    from .nifti import is_nifti, read_nifti
    from .tiff import TIFF_SUFFIXES, read_tiff, tiff_pages

    path, member = split_member(str(path))
    budget = memory_budget() if budget_bytes is None else int(budget_bytes)
    suffix = path.suffix.lower()
    if member is not None and not is_chunked(path):
        raise UserError(f"{path}::{member}: '::' names an array inside a .zarr or .h5 store only")
    given_geometry = spacing_mm is not None or origin_mm is not None
    if given_geometry and (suffix in (".nrrd", ".nhdr", ".dcm", ".ima") or is_nifti(path)):
        raise UserError(f"{path}: spacing_mm and origin_mm do not apply: the file carries its own geometry")
    own_geometry = None                 # the format that carries its own geometry (no spacing_mm / origin_mm)
    if suffix in (".nrrd", ".nhdr"):
        from .nrrd import read_nrrd

        raw, own_geometry = read_nrrd(path, budget), "NRRD"
    elif suffix == ".npy":
        slabs, dtype = read_npy(path, budget)
        raw = RawVolume(data=slabs, origin=np.zeros(3), directions=np.eye(3), dtype=dtype, format="npy")
        del slabs
    elif is_nifti(path):
        raw, own_geometry = read_nifti(path, budget), "NIfTI"
    elif suffix in TIFF_SUFFIXES or (path.is_dir() and suffix != ".zarr" and tiff_pages(path)):
        raw = read_tiff(path, budget)
    elif is_chunked(path):
        raw = read_chunked(path, member, budget)
        own_geometry = "OME-Zarr" if raw.format == "OME-Zarr" else None
    elif path.is_dir() or suffix in (".dcm", ".ima"):
        from .dicom import read_dicom_series

        raw, own_geometry = read_dicom_series(path, budget), "DICOM"
    elif not path.exists():
        raise UserError(f"{path}: file not found")
    else:
        raise UserError(f"{path}: unknown volume format {path.suffix!r}; use .nrrd, .nhdr, .npy, .nii, .nii.gz, "
                        ".tif/.tiff (or a folder of them), a DICOM series folder, .zarr or .h5 (STORE::ARRAY)")
    origin, directions, dtype, space = raw.origin, raw.directions, raw.dtype, raw.space
    format_name, details = raw.format, raw.details
    if own_geometry is not None and given_geometry:
        raise UserError(f"{path}: spacing_mm and origin_mm do not apply: {own_geometry} carries its own geometry")
    if spacing_mm is not None or own_geometry is None:
        spacing = np.linalg.norm(directions, axis=1) if spacing_mm is None else np.asarray(spacing_mm, dtype=np.float64)
        if spacing.shape != (3,) or np.any(~np.isfinite(spacing)) or np.any(spacing <= 0):
            raise UserError(f"{path}: spacing_mm must be three positive numbers, got {np.asarray(spacing_mm).tolist()}")
        directions = np.diag(spacing)
    if origin_mm is not None:
        origin = np.asarray(origin_mm, dtype=np.float64)

    slabs = raw.data if isinstance(raw.data, Slabs) else whole(raw.data)
    shape = slabs.shape
    if len(shape) != 3 or min(shape) < 2:
        raise UserError(f"{path}: a volume must be 3-D with at least 2 samples per axis, got shape {tuple(shape)}")
    del raw                              # a whole array read by the reader is dropped once bricked
    bricks = bricks_from_slabs(slabs, path, allow_nonfinite)
    return Volume(bricks=bricks, shape=shape, origin=origin, directions=directions,
                  source=str(path) + (f"::{member}" if member else ""), source_dtype=dtype, space=space,
                  source_format=format_name, details=details)
