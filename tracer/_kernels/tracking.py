"""Tracking against majorant cells: free flights, transmittance, and paths of many bounces.

Free-flight distances come from delta tracking (Woodcock et al. 1965): tentative collisions at
exponential distances of the cell's majorant, each real with probability sigma / majorant.
Transmittance comes from ratio tracking (Novak, Selle and Jarosz 2014): the product of
``1 - sigma / majorant`` over the tentative collisions. Both are unbiased for any majorant that
bounds the extinction, so they have no step size; empty cells (majorant 0) are crossed at no cost.
The ray walks a grid of TRACK_CELL^3-voxel majorant cells (finer than the march's macrocells), restarting the
exponential at each cell boundary (memoryless).

Random numbers: each tracked ray owns a stream of :data:`STREAM_LENGTH` dimensions of its own,
``stream(chain, vertex, slot)``; a chain is one camera event of the march (0..MAX_EVENTS-1) or the
tracked camera path (:data:`TRACK_CHAIN`). Slot 0 holds a vertex's direction and roulette draws,
slots 1..MAX_LIGHTS its shadow rays, :data:`SLOT_FLIGHT` the flight that leaves it.
"""

import math

import numpy as np
from numba import njit

from ..config import JIT
from .geometry import INV_TRACK_CELL, TRACK_CELL, box_interval, cell_faces_exit, to_index, to_index_direction
from .rng import path_key, uniform, uniform_at
from .sampling import albedo_at, extinction_at, trilinear_bricked
from .shading import (MAX_LIGHTS, environment_radiance, event_frame, interface_weight, light_toward, lobe,
                      sample_lobe)

MAX_CHAINS = 5                    # MAX_EVENTS march chains + the tracked camera path
TRACK_CHAIN = 4
#: The most vertices a path may have (the scene's ``bounces`` is at most this).
MAX_VERTICES = 4096
SLOTS = MAX_LIGHTS + 2
SLOT_FLIGHT = MAX_LIGHTS + 1
STREAM_LENGTH = 1 << 20
#: Tracking dimensions start here, far above the march's (which stay below 2**10).
DIM_TRACKING = 1 << 32
#: Throughput roulette (unbiased) from this vertex on: survive with the largest channel of the throughput.
ROULETTE_FROM_VERTEX = 4
ESCAPED = -1.0
EXHAUSTED = -2.0                  # a ray that used its whole stream (over a million tentative collisions)


@njit(**JIT)
def stream(chain, vertex, slot):
    """First random dimension of a tracked ray's stream."""
    return DIM_TRACKING + ((chain * (MAX_VERTICES + 1) + vertex) * SLOTS + slot) * STREAM_LENGTH


@njit(**JIT)
def cell_span(cells, ox, oy, oz, ix, iy, iz, t):
    """Majorant of the macrocell holding the ray point at ``t`` (nudged forward, so a point on a cell face
    belongs to the cell ahead), and the ray parameter where the ray leaves that cell (always > t)."""
    nudge = 1e-9 * (1.0 + abs(t))
    s = t + nudge
    a = min(max(int((ox + s * ix) * INV_TRACK_CELL), 0), cells.shape[0] - 1)
    b = min(max(int((oy + s * iy) * INV_TRACK_CELL), 0), cells.shape[1] - 1)
    c = min(max(int((oz + s * iz) * INV_TRACK_CELL), 0), cells.shape[2] - 1)
    return cells[a, b, c], max(cell_faces_exit(a, b, c, TRACK_CELL, ox, oy, oz, ix, iy, iz), s)


@njit(**JIT)
def free_flight(bricks, shape, cells, world_to_index, extinction, lookup, px, py, pz, dx, dy, dz, t_max, seed, pixel,
                sample, dim, counts, row):
    """Delta tracking from world point p along unit d: the distance (mm) to the first real collision, or
    :data:`ESCAPED` when the ray leaves the box (or passes ``t_max``), :data:`EXHAUSTED` past its stream."""
    ox, oy, oz = to_index(world_to_index, px, py, pz)
    ix, iy, iz = to_index_direction(world_to_index, dx, dy, dz)
    t0, t1 = box_interval(shape, ox, oy, oz, ix, iy, iz)
    t1 = min(t1, t_max)
    if t1 <= t0:
        return ESCAPED
    key = path_key(seed, pixel, sample)
    t = t0
    draw = 0
    n_samples = 0
    result = ESCAPED
    cell_end = t0
    majorant = 0.0
    while True:
        if t >= cell_end:            # entered the next macrocell (or left the box)
            if t >= t1:
                break
            majorant, cell_end = cell_span(cells, ox, oy, oz, ix, iy, iz, t)
            cell_end = min(cell_end, t1)
        if majorant <= 0.0:
            t = cell_end
            continue
        if draw >= STREAM_LENGTH - 1:
            result = EXHAUSTED
            break
        t_next = t - math.log1p(-uniform_at(key, dim + draw)) / majorant
        draw += 1
        if t_next >= cell_end:
            t = cell_end
            continue
        t = t_next
        value = trilinear_bricked(bricks, shape, ox + t * ix, oy + t * iy, oz + t * iz)
        n_samples += 1
        sigma = extinction_at(extinction, lookup, value)
        if uniform_at(key, dim + draw) * majorant < sigma:
            result = t
            break
        draw += 1
    counts[row, 0] += n_samples
    counts[row, 1] += n_samples
    return result


@njit(**JIT)
def ratio_tracking(bricks, shape, cells, world_to_index, extinction, lookup, px, py, pz, dx, dy, dz, t_max,
                   roulette_depth, seed, pixel, sample, dim, counts, row):
    """Ratio-tracking estimate of the transmittance from p along unit d up to ``t_max`` mm.

    Whenever the running estimate falls below exp(-roulette_depth) (0.02, as for the march's shadow
    rays), Russian roulette ends it or, with probability 0.25, divides it by 0.25.
    """
    ox, oy, oz = to_index(world_to_index, px, py, pz)
    ix, iy, iz = to_index_direction(world_to_index, dx, dy, dz)
    t0, t1 = box_interval(shape, ox, oy, oz, ix, iy, iz)
    t1 = min(t1, t_max)
    if t1 <= t0:
        return 1.0
    below = math.exp(-roulette_depth)
    estimate = 1.0
    key = path_key(seed, pixel, sample)
    t = t0
    draw = 0
    n_samples = 0
    cell_end = t0
    majorant = 0.0
    while True:
        if t >= cell_end:            # entered the next macrocell (or left the box)
            if t >= t1:
                break
            majorant, cell_end = cell_span(cells, ox, oy, oz, ix, iy, iz, t)
            cell_end = min(cell_end, t1)
        if majorant <= 0.0:
            t = cell_end
            continue
        if draw >= STREAM_LENGTH - 1:
            estimate = 0.0
            break
        t_next = t - math.log1p(-uniform_at(key, dim + draw)) / majorant
        draw += 1
        if t_next >= cell_end:
            t = cell_end
            continue
        t = t_next
        value = trilinear_bricked(bricks, shape, ox + t * ix, oy + t * iy, oz + t * iz)
        n_samples += 1
        estimate *= max(0.0, 1.0 - extinction_at(extinction, lookup, value) / majorant)
        if estimate <= 0.0:
            break
        if estimate < below:
            if uniform_at(key, dim + draw) >= 0.25:
                estimate = 0.0
                break
            draw += 1
            estimate *= 4.0
    counts[row, 0] += n_samples
    counts[row, 1] += n_samples
    return estimate


@njit(**JIT)
def tracked_direct_light(bricks, shape, cells, world_to_index, extinction, lookup, lights, roulette_depth, g, weight,
                         px, py, pz, nx, ny, nz, dx, dy, dz, seed, pixel, sample, chain, vertex, counts, row):
    """Next-event estimation toward every light from vertex p (ray travelling along d), shadow rays by ratio tracking."""
    s0 = 0.0
    s1 = 0.0
    s2 = 0.0
    for light in range(lights.shape[0]):
        lx, ly, lz, distance, falloff = light_toward(lights, light, px, py, pz)
        if falloff <= 0.0:
            continue
        f = lobe(weight, g, nx, ny, nz, dx, dy, dz, lx, ly, lz)
        if f <= 0.0:
            continue
        t = ratio_tracking(bricks, shape, cells, world_to_index, extinction, lookup, px, py, pz, lx, ly, lz, distance,
                           roulette_depth, seed, pixel, sample, stream(chain, vertex, 1 + light), counts, row)
        scale = f * falloff * t
        s0 += scale * lights[light, 4]
        s1 += scale * lights[light, 5]
        s2 += scale * lights[light, 6]
    return s0, s1, s2


@njit(**JIT)
def follow_path(volume, transfer, cells, lights, env_kind, env_colors, env_image, scattering, g, gradient_scale,
                roulette_depth, bounces, vertex, px, py, pz, wx, wy, wz, seed, pixel, sample, chain, counts, row):
    """Radiance arriving at vertex number ``vertex`` (1 = the camera ray's event) at p from direction w,
    which the caller drew from the vertex's lobe; before the albedo of that vertex.

    Until the path has ``bounces`` vertices it flies on by delta tracking: escaping, it sees the
    environment; colliding, it collects the emission ``(1 - albedo) L_e`` there, takes the albedo into
    its throughput, estimates the lights (ratio tracking) and draws its next direction from the local
    lobe. From the last vertex the environment direction is weighted by ratio tracking instead, so
    emitted light is scattered at most ``bounces - 1`` times (as with one bounce, where it is seen
    only directly). Throughput roulette from vertex :data:`ROULETTE_FROM_VERTEX` on keeps long paths finite.
    """
    _field, world_to_index, _index_to_world, gradient_to_world, bricks, shape = volume
    albedo, extinction, lookup, emission, emitting = transfer
    w0 = 1.0
    w1 = 1.0
    w2 = 1.0
    r0 = 0.0
    r1 = 0.0
    r2 = 0.0
    while True:
        if vertex >= bounces:
            t = ratio_tracking(bricks, shape, cells, world_to_index, extinction, lookup, px, py, pz, wx, wy, wz, np.inf,
                               roulette_depth, seed, pixel, sample, stream(chain, vertex, SLOT_FLIGHT), counts, row)
            if t > 0.0:
                e0, e1, e2 = environment_radiance(env_kind, env_colors, env_image, wx, wy, wz)
                r0 += w0 * t * e0
                r1 += w1 * t * e1
                r2 += w2 * t * e2
            break
        t = free_flight(bricks, shape, cells, world_to_index, extinction, lookup, px, py, pz, wx, wy, wz, np.inf, seed,
                        pixel, sample, stream(chain, vertex, SLOT_FLIGHT), counts, row)
        if t == ESCAPED:
            e0, e1, e2 = environment_radiance(env_kind, env_colors, env_image, wx, wy, wz)
            r0 += w0 * e0
            r1 += w1 * e1
            r2 += w2 * e2
            break
        if t < 0.0:
            break
        px, py, pz = px + t * wx, py + t * wy, pz + t * wz
        value, nx, ny, nz, magnitude = event_frame(bricks, shape, world_to_index, gradient_to_world, px, py, pz, wx, wy, wz)
        counts[row, 0] += 7
        counts[row, 1] += 7
        a0, a1, a2 = albedo_at(albedo, lookup, value)
        if emitting:
            l0, l1, l2 = albedo_at(emission, lookup, value)
            r0 += w0 * (1.0 - a0) * l0
            r1 += w1 * (1.0 - a1) * l1
            r2 += w2 * (1.0 - a2) * l2
        w0 *= a0
        w1 *= a1
        w2 *= a2
        vertex += 1
        if vertex >= ROULETTE_FROM_VERTEX:
            survive = min(1.0, max(w0, max(w1, w2)))
            if survive <= 0.0:
                break
            if survive < 1.0:
                if uniform(seed, pixel, sample, stream(chain, vertex, 0) + 3) >= survive:
                    break
                w0 /= survive
                w1 /= survive
                w2 /= survive
        weight = interface_weight(scattering, gradient_scale, magnitude)
        s0, s1, s2 = tracked_direct_light(bricks, shape, cells, world_to_index, extinction, lookup, lights, roulette_depth,
                                          g, weight, px, py, pz, nx, ny, nz, wx, wy, wz, seed, pixel, sample, chain,
                                          vertex, counts, row)
        r0 += w0 * s0
        r1 += w1 * s1
        r2 += w2 * s2
        wx, wy, wz = sample_lobe(weight, g, nx, ny, nz, wx, wy, wz, seed, pixel, sample, stream(chain, vertex, 0))
    return r0, r1, r2


@njit(**JIT)
def tracked_camera_path(volume, transfer, cells, lights, env_kind, env_colors, env_image, scattering, g, gradient_scale,
                        roulette_depth, bounces, px, py, pz, dx, dy, dz, b0, b1, b2, seed, pixel, sample, counts, row):
    """The "track" estimator's radiance of one camera ray from p along d (background b when it escapes):
    delta tracking to its first collision, then as :func:`follow_path`."""
    _field, world_to_index, _index_to_world, gradient_to_world, bricks, shape = volume
    albedo, extinction, lookup, emission, emitting = transfer
    t = free_flight(bricks, shape, cells, world_to_index, extinction, lookup, px, py, pz, dx, dy, dz, np.inf, seed, pixel,
                    sample, stream(TRACK_CHAIN, 0, SLOT_FLIGHT), counts, row)
    if t == ESCAPED:
        return b0, b1, b2
    if t < 0.0:
        return 0.0, 0.0, 0.0
    qx, qy, qz = px + t * dx, py + t * dy, pz + t * dz
    value, nx, ny, nz, magnitude = event_frame(bricks, shape, world_to_index, gradient_to_world, qx, qy, qz, dx, dy, dz)
    counts[row, 0] += 7
    counts[row, 1] += 7
    a0, a1, a2 = albedo_at(albedo, lookup, value)
    r0 = 0.0
    r1 = 0.0
    r2 = 0.0
    if emitting:
        l0, l1, l2 = albedo_at(emission, lookup, value)
        r0 += (1.0 - a0) * l0
        r1 += (1.0 - a1) * l1
        r2 += (1.0 - a2) * l2
    weight = interface_weight(scattering, gradient_scale, magnitude)
    s0, s1, s2 = tracked_direct_light(bricks, shape, cells, world_to_index, extinction, lookup, lights, roulette_depth, g,
                                      weight, qx, qy, qz, nx, ny, nz, dx, dy, dz, seed, pixel, sample, TRACK_CHAIN, 1,
                                      counts, row)
    wx, wy, wz = sample_lobe(weight, g, nx, ny, nz, dx, dy, dz, seed, pixel, sample, stream(TRACK_CHAIN, 1, 0))
    e0, e1, e2 = follow_path(volume, transfer, cells, lights, env_kind, env_colors, env_image, scattering, g,
                             gradient_scale, roulette_depth, bounces, 1, qx, qy, qz, wx, wy, wz, seed, pixel, sample,
                             TRACK_CHAIN, counts, row)
    return r0 + a0 * (s0 + e0), r1 + a1 * (s1 + e1), r2 + a2 * (s2 + e2)
