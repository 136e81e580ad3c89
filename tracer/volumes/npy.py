"""Reading ``.npy`` volumes plane by plane: the header gives the shape, dtype and order, so the budget is
checked before any data is read, and the loader then reads 9 planes at a time (never the whole array)."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..errors import UserError
from .bricking import Slabs
from .volume import ACCEPTED_DTYPES, check_budget


def read_npy(path: Path, budget: int) -> tuple[Slabs, str]:
    """The file's planes (along x for C order, along z for Fortran order) and its dtype name."""
    try:
        with open(path, "rb") as handle:
            version = np.lib.format.read_magic(handle)
            reader = np.lib.format.read_array_header_1_0 if version == (1, 0) else np.lib.format.read_array_header_2_0
            shape, fortran, dtype = reader(handle)
            offset = handle.tell()
    except FileNotFoundError:
        raise UserError(f"{path}: file not found")
    except (ValueError, OSError, EOFError, SyntaxError) as error:
        raise UserError(f"{path}: not a readable .npy array: {str(error).splitlines()[0] if str(error) else type(error).__name__}")
    if len(shape) != 3:
        raise UserError(f"{path}: a volume must be 3-D, this array has shape {shape}")
    if min(shape) < 2:
        raise UserError(f"{path}: every axis needs at least 2 samples, got shape {shape}")
    if dtype.hasobject:
        raise UserError(f"{path}: not a readable .npy array: it holds Python objects (dtype {dtype}), not numbers")
    name = dtype.newbyteorder("=").name
    if name not in ACCEPTED_DTYPES:
        raise UserError(f"{path}: dtype {dtype} is not supported; use one of {', '.join(ACCEPTED_DTYPES)}")
    check_budget(path, shape, dtype, budget, streamed=True)
    nx, ny, nz = shape
    axis = 2 if fortran else 0
    plane = nx * ny if fortran else ny * nz
    size = path.stat().st_size
    if size < offset + nx * ny * nz * dtype.itemsize:
        raise UserError(f"{path}: data: the file is shorter than its header's shape {shape} needs (truncated?)")

    def read(start: int, stop: int) -> np.ndarray:
        with open(path, "rb") as handle:
            handle.seek(offset + start * plane * dtype.itemsize)
            values = np.fromfile(handle, dtype=dtype, count=(stop - start) * plane)
        values = values.astype(dtype.newbyteorder("="), copy=False)
        if fortran:
            return values.reshape((nx, ny, stop - start), order="F")
        return values.reshape((stop - start, ny, nz))

    return Slabs(tuple(shape), dtype.newbyteorder("="), axis, read), name
