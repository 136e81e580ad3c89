"""A micro-kernel that only samples the trilinear field along coherent rays and accumulates: the
roofline the renderer's effective sampling rate is measured against."""

from __future__ import annotations

import numpy as np
from numba import njit, prange

from tracer._kernels.integrate import transmittance
from tracer._kernels.sampling import trilinear


@njit(parallel=True, cache=True)
def coherent_sampling(field, n_rays_side, n_steps, out):
    """n_rays_side^2 rays parallel to the x axis, spread over the y-z face, each taking n_steps
    trilinear samples at half-voxel steps (wrapping in x). out : (n_rays_side,) float64 sums."""
    nx, ny, nz = field.shape
    for a in prange(n_rays_side):
        total = 0.0
        y = 0.5 + a * (ny - 2.0) / n_rays_side
        for b in range(n_rays_side):
            z = 0.5 + b * (nz - 2.0) / n_rays_side
            x = 0.25
            for _ in range(n_steps):
                total += trilinear(field, x, y, z)
                x += 0.5
                if x > nx - 1.0:
                    x -= nx - 1.0
        out[a] = total


@njit(parallel=True, cache=True)
def coherent_march(field, bricks, shape, cells, world_to_index, extinction, lookup, n_rays_side, step, counts):
    """The renderer's own march (``transmittance``, no skipping) along the same kind of coherent rays:
    the per-step bookkeeping without shading or incoherence. counts : (n_rays_side, 2) int64."""
    nx, ny, nz = field.shape
    out = np.zeros(n_rays_side)
    for a in prange(n_rays_side):
        total = 0.0
        for b in range(n_rays_side):
            y = 0.5 + a * (ny - 2.0) / n_rays_side
            z = 0.5 + b * (nz - 2.0) / n_rays_side
            px = (0.0 - world_to_index[0, 3]) / world_to_index[0, 0]
            py = (y - world_to_index[1, 3]) / world_to_index[1, 1]
            pz = (z - world_to_index[2, 3]) / world_to_index[2, 2]
            total += transmittance(bricks, shape, cells, world_to_index, extinction, lookup, px, py, pz, 1.0, 0.0, 0.0,
                                   np.inf, step, np.inf, 0.3, 0.0, False, counts, a)
        out[a] = total
    return out
