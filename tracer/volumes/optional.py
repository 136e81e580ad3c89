"""Optional readers' libraries: imported on first use, with one line naming the extra that installs them."""

from __future__ import annotations

import importlib

from ..errors import UserError

#: module -> what it reads (for the message)
READERS = {"nibabel": "NIfTI", "pydicom": "DICOM", "tifffile": "TIFF", "zarr": "zarr", "h5py": "HDF5"}


def require(module: str, path):
    """Import ``module`` or raise a one-line UserError naming ``pip install "tracer-denoise-lab[formats]"``."""
    try:
        return importlib.import_module(module)
    except ImportError:
        raise UserError(f"{path}: reading {READERS.get(module, module)} needs the optional package {module}; install "
                        f'the formats extra: python -m pip install ".[formats]" (or "tracer-denoise-lab[formats]")') from None
