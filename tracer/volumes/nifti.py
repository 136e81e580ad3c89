"""NIfTI-1 and NIfTI-2 volumes (``.nii``, ``.nii.gz``) through nibabel.

World positions come from the file's sform (when its code is set) or else its qform: voxel (i, j, k) sits at
``affine @ [i, j, k, 1]``, which is the NRRD-style ``origin + i d0 + j d1 + k d2`` with d_a the affine's
column a. NIfTI's world is RAS+ (x toward the subject's right, y anterior, z superior), recorded as the
space ``right-anterior-superior``; lengths are converted to millimetres from the header's unit.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..errors import UserError
from .optional import require
from .volume import ACCEPTED_DTYPES, RawVolume, check_budget

MM_PER_UNIT = {"mm": 1.0, "meter": 1000.0, "micron": 1e-3, "unknown": 1.0}


def is_nifti(path: Path) -> bool:
    name = path.name.lower()
    return name.endswith(".nii") or name.endswith(".nii.gz")


def read_nifti(path: Path, budget: int) -> RawVolume:
    nibabel = require("nibabel", path)
    if not path.exists():
        raise UserError(f"{path}: file not found")
    try:
        image = nibabel.load(str(path))
    except Exception as error:                     # nibabel raises several kinds for damaged headers
        raise UserError(f"{path}: not a readable NIfTI file: {str(error).splitlines()[0] if str(error) else type(error).__name__}")
    shape = image.shape
    if len(shape) == 4 and shape[3] == 1:
        shape = shape[:3]
    if len(shape) != 3:
        raise UserError(f"{path}: a volume must be 3-D, this image has shape {tuple(image.shape)}")
    if min(shape) < 2:
        raise UserError(f"{path}: every axis needs at least 2 samples, got shape {tuple(shape)}")
    dtype = np.dtype(image.get_data_dtype()).newbyteorder("=").name
    if dtype not in ACCEPTED_DTYPES:
        raise UserError(f"{path}: dtype {dtype} is not supported; use one of {', '.join(ACCEPTED_DTYPES)}")
    check_budget(path, shape, dtype, budget)
    header = image.header
    sform_code, qform_code = int(header["sform_code"]), int(header["qform_code"])
    if sform_code > 0:
        affine, which = image.get_sform(), "sform"
    elif qform_code > 0:
        affine, which = image.get_qform(), "qform"
    else:
        affine, which = image.affine, "pixdim only (no sform or qform)"
    unit = header.get_xyzt_units()[0]
    scale = MM_PER_UNIT.get(unit, 1.0)
    affine = np.asarray(affine, np.float64)
    data = np.asanyarray(image.dataobj).reshape(shape)           # applies scl_slope / scl_inter when set
    slope, intercept = header.get_slope_inter()
    rescaled = slope is not None and (slope != 1 or (intercept or 0) != 0)
    data = np.asarray(data, dtype=np.float32 if rescaled else data.dtype.newbyteorder("="))
    details = (("affine", which), ("length unit", "not given in the header: taken as mm" if unit == "unknown" else
                                   "mm" if unit == "mm" else f"{unit} (x {scale:g} to mm)"))
    if rescaled:
        details += (("rescale", f"value = stored x {slope:g} + {intercept or 0:g}"),)
    return RawVolume(data=data, origin=affine[:3, 3] * scale, directions=affine[:3, :3].T * scale, dtype=dtype,
                     space="right-anterior-superior", format="NIfTI-2" if header.sizeof_hdr == 540 else "NIfTI-1",
                     details=details)
