"""``load_volume``: one entry point that picks the reader by the file's suffix."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..config import memory_budget
from ..errors import UserError
from .npy import read_npy
from .volume import Volume, count_nonfinite


def load_volume(path, *, spacing_mm=None, origin_mm=None, budget_bytes: int | None = None,
                allow_nonfinite: bool = False) -> Volume:
    """Load a ``.nrrd``, ``.nhdr`` or ``.npy`` volume as float32 in [x, y, z] order.

    Parameters
    ----------
    path : str or Path
    spacing_mm, origin_mm : 3 numbers, optional
        Geometry for ``.npy`` files (defaults 1 mm and 0); NRRD files carry their own.
    budget_bytes : int, optional
        Refuse volumes that need more memory than this (default: :func:`tracer.config.memory_budget`).
    allow_nonfinite : bool
        Accept NaN or Inf voxels (``tracer info`` reports them); rendering refuses them.

    Raises
    ------
    UserError
        One line naming the file and the problem.
    """
    path = Path(path)
    budget = memory_budget() if budget_bytes is None else int(budget_bytes)
    suffix = path.suffix.lower()
    if suffix in (".nrrd", ".nhdr"):
        from .nrrd import read_nrrd

        if spacing_mm is not None or origin_mm is not None:
            raise UserError(f"{path}: spacing_mm and origin_mm apply to .npy volumes only; NRRD carries its own geometry")
        raw = read_nrrd(path, budget)
        data, origin, directions, dtype, space = raw.data, raw.origin, raw.directions, raw.dtype, raw.space
    elif suffix == ".npy":
        data, dtype = read_npy(path, budget)
        spacing = np.ones(3) if spacing_mm is None else np.asarray(spacing_mm, dtype=np.float64)
        if spacing.shape != (3,) or np.any(~np.isfinite(spacing)) or np.any(spacing <= 0):
            raise UserError(f"{path}: spacing_mm must be three positive numbers, got {np.asarray(spacing_mm).tolist()}")
        directions = np.diag(spacing)
        origin = np.zeros(3) if origin_mm is None else np.asarray(origin_mm, dtype=np.float64)
        space = None
    else:
        raise UserError(f"{path}: unknown volume format {path.suffix!r}; use .nrrd, .nhdr or .npy")

    if not allow_nonfinite:
        bad = count_nonfinite(data)
        if bad:
            raise UserError(f"{path}: data: {bad} voxels are NaN or Inf; fix or mask them before rendering")
    return Volume(data=data, origin=origin, directions=directions, source=str(path), source_dtype=dtype,
                  space=space)
