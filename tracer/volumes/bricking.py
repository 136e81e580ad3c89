"""Building the renderer's bricks from a file part by part, so a loaded volume never holds its plain array.

A reader that can read a range of planes along one axis cheaply (``.npy``, raw and gzip NRRD, zarr and
HDF5: see :class:`Slabs`) hands the loader a :class:`Slabs`; the bricks are then filled one layer of
bricks (8 planes, plus the one shared with the next layer) at a time, and the whole field exists only
as bricks. Readers that return a whole array (NIfTI, DICOM, TIFF) are bricked the same way from that
array, which is then dropped. Either way the bricks are the same bits as bricking the whole
array at once (tested).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

from ..errors import UserError
from .bricks import fill_brick_layer
from .volume import brick_grid, count_nonfinite, storage_dtype


@dataclass(frozen=True)
class Slabs:
    """A volume a reader can deliver in consecutive ranges of planes.

    shape : (nx, ny, nz) in [x, y, z] order
    dtype : the file's value type
    axis : the index axis the planes are cut across (the one the file stores slowest)
    read : ``read(start, stop)`` -> the planes ``[start, stop)`` along ``axis`` as an array in [x, y, z]
        order; called with consecutive ranges only (0 to n), so a compressed stream can be read forward.
    """

    shape: tuple
    dtype: np.dtype
    axis: int
    read: Callable[[int, int], np.ndarray]


def whole(data: np.ndarray) -> Slabs:
    """An array already in memory, as slabs along its first axis."""
    return Slabs(tuple(data.shape), data.dtype, 0, lambda start, stop: data[start:stop])


def bricks_from_slabs(slabs: Slabs, source, allow_nonfinite: bool = False) -> np.ndarray:
    """The bricks of the field ``slabs`` delivers, filled one layer of bricks at a time.

    Values are stored as :func:`~tracer.volumes.volume.storage_dtype` of the file's type. Non-finite voxels
    are refused (one line naming ``source``) unless ``allow_nonfinite``.
    """
    from .._kernels.sampling import BRICK

    shape, axis = tuple(int(n) for n in slabs.shape), slabs.axis
    bricks = np.empty(brick_grid(shape), storage_dtype(slabs.dtype))
    shape_array = np.array(shape, np.int64)
    n = shape[axis]
    previous = None                      # the last plane of the layer before: the first of this one
    nonfinite = 0
    for layer in range(bricks.shape[axis]):
        start, stop = layer * BRICK, min(layer * BRICK + BRICK, n - 1) + 1
        fresh = slabs.read(start if previous is None else start + 1, stop)
        expected = list(shape)
        expected[axis] = stop - start - (previous is not None)
        if tuple(fresh.shape) != tuple(expected):
            raise UserError(f"{source}: data: read planes of shape {tuple(fresh.shape)}, expected {tuple(expected)}")
        fresh = np.asarray(fresh, dtype=bricks.dtype)
        nonfinite += count_nonfinite(fresh)
        slab = fresh if previous is None else np.concatenate([previous, fresh], axis=axis)
        fill_brick_layer(slab, axis, layer, shape_array, bricks)
        previous = np.take(slab, [slab.shape[axis] - 1], axis=axis)
    if nonfinite and not allow_nonfinite:
        raise UserError(f"{source}: data: {nonfinite} voxels are NaN or Inf; fix or mask them before rendering")
    return bricks
