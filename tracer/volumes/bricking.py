"""Building the renderer's bricks from a file part by part, so a loaded volume never holds its plain array.

A reader that can read a range of planes along one axis cheaply (``.npy``, raw and gzip NRRD, zarr and
HDF5: see :class:`Slabs`) hands the loader a :class:`Slabs`; the bricks are then filled one layer of
bricks (8 planes, plus the one shared with the next layer) at a time, and the whole field exists only
as bricks. Readers that return a whole array (NIfTI, DICOM, TIFF) are bricked the same way from that
array, which is then dropped. Either way the bricks are the same bits as bricking the whole
array at once (tested).

Filling and unfilling bricks is plain copying, done here in NumPy: nothing is compiled to load a volume.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

from ..errors import UserError
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


def fill_brick_layer(slab: np.ndarray, axis: int, layer: int, shape, out: np.ndarray) -> None:
    """Fill the bricks of index ``layer`` along ``axis`` from ``slab``, a part of the field: the planes
    ``[BRICK layer, min(BRICK layer + BRICK, n - 1)]`` along ``axis`` (n = ``shape[axis]``) and the whole
    extent along the other two, in [x, y, z] order.

    Brick (a, b, c) holds voxels [BRICK a, BRICK a + BRICK] per axis (edge-clamped past the end), so the 8
    voxels of a trilinear lookup lie in one brick, a few kilobytes apart at most instead of whole planes
    apart: rays in any direction stay in cache (a bricked layout; it pays on large volumes, see benchmarks/).
    """
    from .._kernels.sampling import BRICK

    padding = []
    for ax in range(3):                     # edge-clamp: pad to BRICK g + 1 planes (the layer's own BRICK + 1)
        planes = BRICK + 1 if ax == axis else BRICK * out.shape[ax] + 1
        have = slab.shape[ax] if ax == axis else int(shape[ax])
        padding.append((0, planes - have))
    padded = np.pad(slab, padding, mode="edge") if any(p[1] for p in padding) else np.ascontiguousarray(slab)
    grid = tuple(1 if ax == axis else out.shape[ax] for ax in range(3))
    steps = padded.strides
    view = np.lib.stride_tricks.as_strided(padded, grid + (BRICK + 1,) * 3,
                                           tuple(BRICK * step for step in steps) + steps, writeable=False)
    target = [slice(None)] * 3
    target[axis] = slice(layer, layer + 1)
    out[tuple(target)] = view


def unbrick(bricks: np.ndarray, shape) -> np.ndarray:
    """The plain field of ``shape`` back from its bricks (the inverse of filling every layer).

    Voxel x < BRICK g of an axis is offset x % BRICK of brick x // BRICK; the last voxel of an axis with
    n = BRICK g + 1 is offset BRICK of brick g - 1. Each of the 8 combinations is one strided copy.
    """
    import itertools

    from .._kernels.sampling import BRICK

    grid = bricks.shape[:3]
    out = np.empty(tuple(int(n) for n in shape), bricks.dtype)
    for last in itertools.product((False, True), repeat=3):
        if any(flag and out.shape[ax] != BRICK * grid[ax] + 1 for ax, flag in enumerate(last)):
            continue
        which = tuple(slice(g - 1, g) if flag else slice(None) for flag, g in zip(last, grid))
        offsets = tuple(slice(BRICK, BRICK + 1) if flag else slice(0, BRICK) for flag in last)
        part = bricks[which + offsets].transpose(0, 3, 1, 4, 2, 5)
        part = part.reshape(tuple(part.shape[2 * ax] * part.shape[2 * ax + 1] for ax in range(3)))
        target = tuple(slice(BRICK * g, BRICK * g + 1) if flag else slice(0, min(n, BRICK * g))
                       for flag, g, n in zip(last, grid, out.shape))
        out[target] = part[tuple(slice(0, t.stop - t.start) for t in target)]
    return out


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
