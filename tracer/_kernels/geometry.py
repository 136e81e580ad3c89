"""Ray geometry in voxel-index space: the box, macrocells, and the march's step boundaries."""

import math

import numpy as np
from numba import njit, prange

from ..config import JIT, JIT_PARALLEL
from .sampling import BRICK_MASK, BRICK_SHIFT, table_position

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


@njit(**JIT_PARALLEL)
def build_macrocells(bricks, extinction, lookup, size, out):
    """Largest extinction any point of each macrocell can take, read from the bricked field.

    bricks (gx, gy, gz, BRICK+1, BRICK+1, BRICK+1) (see ``sampling.fill_brick_layer``); extinction (n,)
    float32 table; lookup (2,) float64; size: voxel intervals per cell, a divisor of BRICK (CELL for
    the march's skipping, TRACK_CELL for tracking); out (ceil((nx-1)/size), ...) float32. Cell c
    covers voxel indices [size c, size c + size] (the trilinear field inside it is a convex
    combination of those voxels), all inside one brick (past the field's end the brick repeats its
    last voxel, which changes no minimum or maximum); its value is the largest table entry over the
    table interval spanning the cell's [min, max] value, so a cell holding 0 has zero extinction
    everywhere inside it, exactly.
    """
    cx, cy, cz = out.shape
    n_entries = extinction.shape[0]
    for a in prange(cx):
        brick_a, i0 = (a * size) >> BRICK_SHIFT, (a * size) & BRICK_MASK
        for b in range(cy):
            brick_b, j0 = (b * size) >> BRICK_SHIFT, (b * size) & BRICK_MASK
            for c in range(cz):
                brick_c, k0 = (c * size) >> BRICK_SHIFT, (c * size) & BRICK_MASK
                brick = bricks[brick_a, brick_b, brick_c]
                low = np.inf
                high = -np.inf
                for i in range(i0, i0 + size + 1):
                    for j in range(j0, j0 + size + 1):
                        for k in range(k0, k0 + size + 1):
                            value = brick[i, j, k]
                            low = min(low, value)
                            high = max(high, value)
                e0 = int(math.floor(table_position(lookup, n_entries, low)))
                e1 = min(int(math.ceil(table_position(lookup, n_entries, high))), n_entries - 1)
                largest = 0.0
                for e in range(e0, e1 + 1):
                    largest = max(largest, extinction[e])
                out[a, b, c] = largest


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
def cell_exit(cells, ox, oy, oz, ix, iy, iz, px, py, pz):
    """For index point p on the ray o + t i: whether its macrocell is empty, and the ray parameter
    where the ray leaves that cell."""
    a = min(int(px * INV_CELL), cells.shape[0] - 1)
    b = min(int(py * INV_CELL), cells.shape[1] - 1)
    c = min(int(pz * INV_CELL), cells.shape[2] - 1)
    return cells[a, b, c] <= 0.0, cell_faces_exit(a, b, c, CELL, ox, oy, oz, ix, iy, iz)


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
