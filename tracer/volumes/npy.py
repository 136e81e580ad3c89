"""Reading ``.npy`` volumes: memory-mapped first, so the shape, dtype and budget are checked before any data is read."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..errors import UserError
from .volume import ACCEPTED_DTYPES, bytes_per_voxel


def read_npy(path: Path, budget: int) -> tuple[np.ndarray, str]:
    try:
        mapped = np.load(path, mmap_mode="r", allow_pickle=False)
    except FileNotFoundError:
        raise UserError(f"{path}: file not found")
    except (ValueError, OSError, EOFError) as error:
        raise UserError(f"{path}: not a readable .npy array: {str(error).splitlines()[0] if str(error) else type(error).__name__}")
    if mapped.ndim != 3:
        raise UserError(f"{path}: a volume must be 3-D, this array has shape {mapped.shape}")
    if min(mapped.shape) < 2:
        raise UserError(f"{path}: every axis needs at least 2 samples, got shape {mapped.shape}")
    name = mapped.dtype.newbyteorder("=").name
    if name not in ACCEPTED_DTYPES:
        raise UserError(f"{path}: dtype {mapped.dtype} is not supported; use one of {', '.join(ACCEPTED_DTYPES)}")
    n_bytes = int(mapped.size * bytes_per_voxel(mapped.dtype))
    if n_bytes > budget:
        raise UserError(
            f"{path}: shape {mapped.shape} needs {n_bytes / 2**20:.0f} MiB, over the memory budget of "
            f"{budget / 2**20:.0f} MiB (set TRACER_MEMORY_BUDGET_MB to raise it)"
        )
    data = np.array(mapped, dtype=mapped.dtype.newbyteorder("="))
    del mapped
    return data, name
