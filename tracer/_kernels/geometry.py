"""Ray geometry in voxel-index space: the box, macrocells, and the march's step boundaries."""

import math

import numpy as np
from numba import njit

from ..config import JIT

#: Macrocells span this many voxel intervals per axis.
CELL = 8
INV_CELL = 1.0 / CELL
#: Tracking's majorant cells are finer (a thin dense structure then raises the majorant of less air).
TRACK_CELL = 4
INV_TRACK_CELL = 1.0 / TRACK_CELL


@njit(**JIT)
def box_interval(field_shape, ox, oy, oz, dx, dy, dz):
    """Ray-box slab test in index space against [0, n-1]^3; returns (t_enter, t_exit), t_exit < t_enter if missed."""
    t0 = 0.0
    t1 = np.inf
    for axis in range(3):
        o = ox if axis == 0 else (oy if axis == 1 else oz)
        d = dx if axis == 0 else (dy if axis == 1 else dz)
        high = field_shape[axis] - 1.0
        if abs(d) < 1e-300:
            if o < 0.0 or o > high:
                return 1.0, 0.0
        else:
            a = (0.0 - o) / d
            b = (high - o) / d
            if a > b:
                a, b = b, a
            t0 = max(t0, a)
            t1 = min(t1, b)
    return t0, t1


@njit(**JIT)
def to_index(world_to_index, px, py, pz):
    m = world_to_index
    return (m[0, 0] * px + m[0, 1] * py + m[0, 2] * pz + m[0, 3],
            m[1, 0] * px + m[1, 1] * py + m[1, 2] * pz + m[1, 3],
            m[2, 0] * px + m[2, 1] * py + m[2, 2] * pz + m[2, 3])


@njit(**JIT)
def to_index_direction(world_to_index, dx, dy, dz):
    m = world_to_index
    return (m[0, 0] * dx + m[0, 1] * dy + m[0, 2] * dz,
            m[1, 0] * dx + m[1, 1] * dy + m[1, 2] * dz,
            m[2, 0] * dx + m[2, 1] * dy + m[2, 2] * dz)


@njit(**JIT)
def cell_faces_exit(a, b, c, size, ox, oy, oz, ix, iy, iz):
    """The ray parameter where the ray o + t i leaves cell (a, b, c) of a grid of ``size``-voxel cells."""
    t_exit = np.inf
    if ix > 0.0:
        t_exit = min(t_exit, ((a + 1) * size - ox) / ix)
    elif ix < 0.0:
        t_exit = min(t_exit, (a * size - ox) / ix)
    if iy > 0.0:
        t_exit = min(t_exit, ((b + 1) * size - oy) / iy)
    elif iy < 0.0:
        t_exit = min(t_exit, (b * size - oy) / iy)
    if iz > 0.0:
        t_exit = min(t_exit, ((c + 1) * size - oz) / iz)
    elif iz < 0.0:
        t_exit = min(t_exit, (c * size - oz) / iz)
    return t_exit


@njit(**JIT)
def axis_exit(a, size, o, d):
    """Where the ray o + t d (one axis) leaves slab ``a`` of ``size``-voxel cells; inf when d is 0."""
    if d > 0.0:
        return ((a + 1) * size - o) / d
    if d < 0.0:
        return (a * size - o) / d
    return np.inf


@njit(**JIT)
def enter_cell(cells, ox, oy, oz, ix, iy, iz, px, py, pz, a0, b0, c0, ea, eb, ec):
    """For index point p on the ray o + t i: whether its macrocell is empty, the ray parameter where the ray
    leaves that cell (the same number as :func:`cell_faces_exit`), and the walk's state for the next call.

    The state is the previous cell (a0, b0, c0) (-1 before the first) and the exits of its slabs (ea, eb, ec):
    only the axes whose slab changed are recomputed, since a march crosses about one face per cell.
    """
    a = min(int(px * INV_CELL), cells.shape[0] - 1)
    b = min(int(py * INV_CELL), cells.shape[1] - 1)
    c = min(int(pz * INV_CELL), cells.shape[2] - 1)
    if a != a0:
        ea = axis_exit(a, CELL, ox, ix)
    if b != b0:
        eb = axis_exit(b, CELL, oy, iy)
    if c != c0:
        ec = axis_exit(c, CELL, oz, iz)
    empty = cells[np.uint64(a), np.uint64(b), np.uint64(c)] <= 0.0
    return empty, min(min(ea, eb), ec), a, b, c, ea, eb, ec


@njit(**JIT)
def segment_bounds(t0, t1, step, u_offset, j):
    """Segment j of a march: [t0, t0 + u step], then steps of ``step``; computed, not accumulated,
    so skipping ahead lands on the very same boundaries."""
    ta = t0 if j == 0 else t0 + (u_offset + (j - 1)) * step
    tb = min(t0 + (u_offset + j) * step, t1)
    return ta, tb


@njit(**JIT)
def next_segment_after(t0, step, u_offset, j, t_exit):
    """The first segment after j whose (unclipped) midpoint lies at or beyond t_exit."""
    candidate = int(math.ceil((t_exit - t0) / step - u_offset + 0.5))
    return max(j + 1, candidate)
