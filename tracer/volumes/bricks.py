"""The renderer's brick layout, filled and unfilled by plain copying in NumPy: nothing is compiled to load a volume."""

from __future__ import annotations

import numpy as np


def fill_brick_layer(slab: np.ndarray, axis: int, layer: int, shape, out: np.ndarray) -> None:
    """Fill the bricks of index ``layer`` along ``axis`` from ``slab``, a part of the field: the planes
    ``[BRICK layer, min(BRICK layer + BRICK, n - 1)]`` along ``axis`` (n = ``shape[axis]``) and the whole
    extent along the other two, in [x, y, z] order.

    Brick (a, b, c) holds voxels [BRICK a, BRICK a + BRICK] per axis (edge-clamped past the end), so the 8
    voxels of a trilinear lookup lie in one brick, a few kilobytes apart at most instead of whole planes
    apart: rays in any direction stay in cache (a bricked layout; it pays on large volumes, see benchmarks/).
    """
    import itertools

    from .._kernels.sampling import BRICK

    grid = tuple(1 if ax == axis else out.shape[ax] for ax in range(3))
    have = tuple(slab.shape[ax] if ax == axis else int(shape[ax]) for ax in range(3))
    # per axis, bricks [0, full) lie wholly inside the slab and are copied straight from it; only the last
    # brick, if it reaches past the field's end, is copied from a small edge-padded piece (no copy of the slab)
    parts = []
    for ax in range(3):
        full = min(grid[ax], (have[ax] - 1) // BRICK)
        parts.append([span for span in ((0, full), (full, grid[ax])) if span[1] > span[0]])
    for spans in itertools.product(*parts):
        piece = slab[tuple(slice(BRICK * a0, min(BRICK * a1 + 1, n)) for (a0, a1), n in zip(spans, have))]
        missing = [(0, BRICK * (a1 - a0) + 1 - piece.shape[ax]) for ax, (a0, a1) in enumerate(spans)]
        if any(m[1] for m in missing):
            piece = np.pad(piece, missing, mode="edge")
        steps = piece.strides
        view = np.lib.stride_tricks.as_strided(piece, tuple(a1 - a0 for a0, a1 in spans) + (BRICK + 1,) * 3,
                                               tuple(BRICK * step for step in steps) + steps, writeable=False)
        target = [slice(a0, a1) for a0, a1 in spans]
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
