"""The march and the default path kernel (one bounce): free-flight events by stratified opacity thresholds.

Its camera-ray helpers (``camera_ray``, ``march_camera_ray``, ``add_feature``, ``add_levels``, ``add_radiance``,
``marched_direct_light``) are shared with :mod:`.transport`, so the feature buffers mean the same under
every transport option; this module never calls the tracking code (the default kernel compiles without it).

For each pixel and sample the camera ray is marched through the field's box with a random
offset, accumulating optical depth from piecewise-constant extinction (midpoint of each
step). Event k of K is where the composited opacity ``1 - T(t)`` first exceeds a threshold
drawn in [(k-1)/K, k/K), located exactly inside the step. Each event gathers direct light
through a shadow ray and one environment direction drawn from the blended lobe. This is
stratified inverse-CDF sampling of ``L = int T sigma S dt + T(exit) L_bg`` (Beer-Lambert
transmittance; single scattering).

Accumulator layout, float64, shape (H, W, C) (see :mod:`tracer.accumulate`):
``[0:3]`` radiance sum, ``[3:6]`` radiance square sum, ``[6]`` alpha sum, ``[7:10]`` albedo sum
(at event 1), then one block of 8 per feature event (event 1, event 2, level 1, level 2):
``[count, position x3, normal x3, depth]``. With candidate features on (``extras`` >= 0, the offset of their
block), EXTRA_CHANNELS more: per event 1 and 2 ``[value, gradient magnitude, extinction, interface weight,
light transmittance]``, then ``[opacity before event 1, expected-depth numerator, its denominator, optical depth,
background part x3]`` (README, "Candidate features"). They use no random number of the path's own; the
transmittance toward the first light draws its step offset from dimension DIM_FEATURE_LIGHT + event, so
the radiance's bits do not depend on them.
"""

import math

import numpy as np
from numba import njit, prange

from ..config import JIT, JIT_PARALLEL
from .rng import uniform
from .geometry import box_interval, enter_cell, next_segment_after, segment_bounds, to_index, to_index_direction
from .sampling import albedo_at, extinction_at, trilinear_bricked
from .shading import (background_along, environment_radiance, event_frame, interface_weight, light_toward, lobe,
                      sample_lobe)

MAX_EVENTS = 4
MAX_LEVELS = 2
SCRATCH = 2 * MAX_EVENTS + 2 * MAX_LEVELS + 3      # + the whole chord's optical depth, the expected depth's two integrals
N_BASE_CHANNELS = 10
BLOCK = 8
EXTRA_EVENT = 5
EXTRA_CHANNELS = 2 * EXTRA_EVENT + 7

# random dimensions per path
DIM_JITTER = 0          # 0, 1
DIM_OFFSET = 2
DIM_THRESHOLD = 3       # 3 .. 3 + MAX_EVENTS
DIM_EVENT = 16          # event k uses DIM_EVENT + DIM_EVENT_STRIDE * k + ...
DIM_EVENT_STRIDE = 64
DIM_FEATURE_LIGHT = 1 << 31   # + event index: the step offset of a feature's transmittance toward the first light
ROULETTE_BELOW = 0.02   # Russian roulette on shadow rays once transmittance falls below this
ROULETTE_SURVIVE = 0.25
ROULETTE_DEPTH = -math.log(ROULETTE_BELOW)   # compare optical depth, not exp(-tau), per step
#: A camera ray stops once all its events are found and its transmittance is below exp(-this):
#: alpha is then exact to 1e-5 (early ray termination, common practice).
TERMINATE_OPTICAL_DEPTH = 11.5129


@njit(**JIT)
def transmittance(bricks, shape, cells, world_to_index, extinction, lookup, px, py, pz, dx, dy, dz, t_max, step,
                  roulette_depth, u_offset, u_roulette, skip, counts, row):
    """Unbiased transmittance estimate from world point p along unit direction d up to ``t_max`` mm.

    Marches steps of ``step`` mm with a random first step, extinction at each step's midpoint,
    stepping over empty macrocells (exact: they contribute zero optical depth); once the
    optical depth passes ``roulette_depth`` (ROULETTE_DEPTH: transmittance ROULETTE_BELOW; infinity
    turns roulette off), one Russian-roulette draw ends the ray or divides on by the survival
    probability. With ``skip`` false, empty cells are marched through (for
    measurements). ``counts[row, 0]`` gains the field samples taken, ``counts[row, 1]`` those that fell
    in non-empty cells.
    """
    ox, oy, oz = to_index(world_to_index, px, py, pz)
    ix, iy, iz = to_index_direction(world_to_index, dx, dy, dz)
    t0, t1 = box_interval(shape, ox, oy, oz, ix, iy, iz)
    t1 = min(t1, t_max)
    if t1 <= t0:
        return 1.0
    tau = 0.0
    weight = 1.0
    rouletted = False
    n_samples = 0
    n_useful = 0
    cell_end = -np.inf
    empty = False
    ca, cb, cc, ea, eb, ec = -1, -1, -1, np.inf, np.inf, np.inf
    j = 0
    while True:
        ta, tb = segment_bounds(t0, t1, step, u_offset, j)
        if ta >= t1:
            break
        tm = 0.5 * (ta + tb)
        qx, qy, qz = ox + tm * ix, oy + tm * iy, oz + tm * iz
        if tm >= cell_end:       # entered another macrocell: look it up once
            empty, cell_end, ca, cb, cc, ea, eb, ec = enter_cell(cells, ox, oy, oz, ix, iy, iz, qx, qy, qz, ca, cb, cc,
                                                                 ea, eb, ec)
            if empty and skip:
                j = next_segment_after(t0, step, u_offset, j, cell_end)
                continue
        n_useful += not empty
        value = trilinear_bricked(bricks, shape, qx, qy, qz)
        n_samples += 1
        tau += extinction_at(extinction, lookup, value) * (tb - ta)
        if not rouletted and tau > roulette_depth:
            rouletted = True
            if u_roulette >= ROULETTE_SURVIVE:
                counts[row, 0] += n_samples
                counts[row, 1] += n_useful
                return 0.0
            weight = 1.0 / ROULETTE_SURVIVE
        j += 1
    counts[row, 0] += n_samples
    counts[row, 1] += n_useful
    return weight * math.exp(-tau)


@njit(**JIT)
def marched_direct_light(bricks, shape, cells, world_to_index, extinction, lookup, lights, step, roulette_depth, g,
                         weight, px, py, pz, nx, ny, nz, dx, dy, dz, seed, pixel, sample, base_dim, skip, counts, row):
    """Direct light at event p from every light through marched shadow rays, before the albedo."""
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
        dim = base_dim + 16 + 2 * light
        t = transmittance(bricks, shape, cells, world_to_index, extinction, lookup, px, py, pz, lx, ly, lz, distance, step,
                          roulette_depth, uniform(seed, pixel, sample, dim), uniform(seed, pixel, sample, dim + 1), skip,
                          counts, row)
        scale = f * falloff * t
        s0 += scale * lights[light, 4]
        s1 += scale * lights[light, 5]
        s2 += scale * lights[light, 6]
    return s0, s1, s2


@njit(**JIT)
def scattered_light(bricks, shape, cells, world_to_index, extinction, lookup, lights, env_kind, env_colors, env_image,
                    step, roulette_depth, g, weight, px, py, pz, nx, ny, nz, dx, dy, dz, seed, pixel, sample, base_dim,
                    skip, counts, row):
    """Single-scattered radiance S at p before the albedo: direct lights plus one environment direction."""
    s0, s1, s2 = marched_direct_light(bricks, shape, cells, world_to_index, extinction, lookup, lights, step,
                                      roulette_depth, g, weight, px, py, pz, nx, ny, nz, dx, dy, dz, seed, pixel, sample,
                                      base_dim, skip, counts, row)
    # environment: one direction from the blended lobe (pdf = lobe, so the weight is 1)
    wx, wy, wz = sample_lobe(weight, g, nx, ny, nz, dx, dy, dz, seed, pixel, sample, base_dim)
    t = transmittance(bricks, shape, cells, world_to_index, extinction, lookup, px, py, pz, wx, wy, wz, np.inf, step,
                      roulette_depth, uniform(seed, pixel, sample, base_dim + 3), uniform(seed, pixel, sample, base_dim + 4),
                      skip, counts, row)
    if t > 0.0:
        e0, e1, e2 = environment_radiance(env_kind, env_colors, env_image, wx, wy, wz)
        s0 += t * e0
        s1 += t * e1
        s2 += t * e2
    return s0, s1, s2


@njit(**JIT)
def camera_ray(camera, seed, pixel, sample, row, col, width, height):
    """Origin and unit direction of a camera ray through a uniform point of pixel (row, col) (box filter)."""
    sx = (col + uniform(seed, pixel, sample, DIM_JITTER)) / width * 2.0 - 1.0
    sy = 1.0 - (row + uniform(seed, pixel, sample, DIM_JITTER + 1)) / height * 2.0
    dx = camera[1, 0] + sx * camera[2, 0] + sy * camera[3, 0]
    dy = camera[1, 1] + sx * camera[2, 1] + sy * camera[3, 1]
    dz = camera[1, 2] + sx * camera[2, 2] + sy * camera[3, 2]
    norm = math.sqrt(dx * dx + dy * dy + dz * dz)
    return camera[0, 0], camera[0, 1], camera[0, 2], dx / norm, dy / norm, dz / norm


@njit(**JIT)
def march_camera_ray(volume, transfer, cells, n_events, levels, step, seed, pixel, sample, px, py, pz, dx, dy, dz,
                     collect_glow, extras, skip, counts, row, scratch):
    """The camera ray's march: writes the event and level distances into ``scratch`` (-1: none) and returns
    (optical depth, emitted radiance collected along the ray); the glow only when ``collect_glow``.

    ``scratch`` (SCRATCH,) float64: event thresholds, level thresholds, event distances, level distances, and
    with ``extras`` the whole chord's optical depth and the expected depth's ``int t T sigma dt`` and
    ``int T sigma dt`` (exact per step of constant extinction). With ``extras`` the ray is marched on to the
    box's exit, but the optical depth returned and the glow stop where they would have stopped without them,
    so every other buffer keeps its bits.
    """
    _field, world_to_index, _index_to_world, _gradient_to_world, bricks, shape = volume
    albedo, extinction, lookup, emission, emitting = transfer
    n_levels = levels.shape[0]
    targets = scratch[0:MAX_EVENTS]
    level_targets = scratch[MAX_EVENTS:MAX_EVENTS + MAX_LEVELS]
    event_t = scratch[MAX_EVENTS + MAX_LEVELS:2 * MAX_EVENTS + MAX_LEVELS]
    level_t = scratch[2 * MAX_EVENTS + MAX_LEVELS:SCRATCH]
    for k in range(n_events):
        u = (k + uniform(seed, pixel, sample, DIM_THRESHOLD + k)) / n_events
        targets[k] = -math.log1p(-u)
        event_t[k] = -1.0
    for k in range(n_levels):
        level_targets[k] = -math.log1p(-levels[k])
        level_t[k] = -1.0

    ox, oy, oz = to_index(world_to_index, px, py, pz)
    ix, iy, iz = to_index_direction(world_to_index, dx, dy, dz)
    t0, t1 = box_interval(shape, ox, oy, oz, ix, iy, iz)
    tau = 0.0
    next_event = 0
    next_level = 0
    glow0 = 0.0
    glow1 = 0.0
    glow2 = 0.0
    depth_numerator = 0.0
    depth_denominator = 0.0
    terminated = False
    tau_stop = 0.0
    if t1 > t0:
        u_offset = uniform(seed, pixel, sample, DIM_OFFSET)
        n_samples = 0
        n_useful = 0
        cell_end = -np.inf
        empty = False
        ca, cb, cc, ea, eb, ec = -1, -1, -1, np.inf, np.inf, np.inf
        j = 0
        while True:
            ta, tb = segment_bounds(t0, t1, step, u_offset, j)
            if ta >= t1:
                break
            if not terminated and next_event >= n_events and next_level >= n_levels and tau > TERMINATE_OPTICAL_DEPTH:
                if not extras:
                    break
                terminated = True
                tau_stop = tau
            tm = 0.5 * (ta + tb)
            qx, qy, qz = ox + tm * ix, oy + tm * iy, oz + tm * iz
            if tm >= cell_end:       # entered another macrocell: look it up once
                empty, cell_end, ca, cb, cc, ea, eb, ec = enter_cell(cells, ox, oy, oz, ix, iy, iz, qx, qy, qz, ca, cb, cc,
                                                                     ea, eb, ec)
                if empty and skip:
                    j = next_segment_after(t0, step, u_offset, j, cell_end)
                    continue
            n_useful += not empty
            value = trilinear_bricked(bricks, shape, qx, qy, qz)
            n_samples += 1
            sigma = extinction_at(extinction, lookup, value)
            dtau = sigma * (tb - ta)
            while next_event < n_events and tau + dtau >= targets[next_event]:
                event_t[next_event] = ta + (targets[next_event] - tau) / sigma
                next_event += 1
            while next_level < n_levels and tau + dtau >= level_targets[next_level]:
                level_t[next_level] = ta + (level_targets[next_level] - tau) / sigma
                next_level += 1
            if collect_glow and emitting and sigma > 0.0 and not terminated:
                # absorption-emission (Max 1995): int T sigma_a L_e dt over the step, sigma_a = sigma (1 - albedo),
                # exact for the step's constant extinction
                absorbed = math.exp(-tau) * -math.expm1(-dtau)     # the step's share of the light, T(a) (1 - e^-dtau)
                l0, l1, l2 = albedo_at(emission, lookup, value)
                a0, a1, a2 = albedo_at(albedo, lookup, value)
                glow0 += absorbed * (1.0 - a0) * l0
                glow1 += absorbed * (1.0 - a1) * l1
                glow2 += absorbed * (1.0 - a2) * l2
            if extras and sigma > 0.0:
                # int over the step of t T sigma dt and of T sigma dt, T = T(a) e^{-sigma (t - a)}
                transmitted = math.exp(-tau)
                share = -math.expm1(-dtau)
                depth_denominator += transmitted * share
                depth_numerator += transmitted * (ta * share + (share - dtau * math.exp(-dtau)) / sigma)
            tau += dtau
            j += 1
        counts[row, 0] += n_samples
        counts[row, 1] += n_useful
    scratch[SCRATCH - 3] = tau
    scratch[SCRATCH - 2] = depth_numerator
    scratch[SCRATCH - 1] = depth_denominator
    return tau_stop if terminated else tau, glow0, glow1, glow2


@njit(**JIT)
def add_feature(acc, row, col, block, qx, qy, qz, nx, ny, nz, t):
    """One sample's feature event into its block: count, position, normal, depth."""
    acc[row, col, block] += 1.0
    acc[row, col, block + 1] += qx
    acc[row, col, block + 2] += qy
    acc[row, col, block + 3] += qz
    acc[row, col, block + 4] += nx
    acc[row, col, block + 5] += ny
    acc[row, col, block + 6] += nz
    acc[row, col, block + 7] += t


@njit(**JIT)
def add_levels(volume, levels, px, py, pz, dx, dy, dz, acc, row, col, counts, scratch):
    """The fixed-opacity feature events found by :func:`march_camera_ray` into their blocks."""
    _field, world_to_index, _index_to_world, gradient_to_world, bricks, shape = volume
    level_t = scratch[2 * MAX_EVENTS + MAX_LEVELS:SCRATCH]
    for k in range(levels.shape[0]):
        t = level_t[k]
        if t < 0.0:
            continue
        qx, qy, qz = px + t * dx, py + t * dy, pz + t * dz
        value, nx, ny, nz, magnitude = event_frame(bricks, shape, world_to_index, gradient_to_world, qx, qy, qz, dx, dy, dz)
        counts[row, 0] += 7
        counts[row, 1] += 7
        add_feature(acc, row, col, N_BASE_CHANNELS + BLOCK * (2 + k), qx, qy, qz, nx, ny, nz, t)


@njit(**JIT)
def light_transmittance(bricks, shape, cells, world_to_index, extinction, lookup, lights, step, px, py, pz, seed,
                        pixel, sample, event, skip, counts, row):
    """Transmittance from p toward the first light (to its position, or out of the box), without roulette;
    its step offset is dimension DIM_FEATURE_LIGHT + event. 0 without lights."""
    if lights.shape[0] == 0:
        return 0.0
    lx, ly, lz, distance, _falloff = light_toward(lights, 0, px, py, pz)
    if distance <= 0.0:
        return 1.0
    return transmittance(bricks, shape, cells, world_to_index, extinction, lookup, px, py, pz, lx, ly, lz, distance, step,
                         np.inf, uniform(seed, pixel, sample, DIM_FEATURE_LIGHT + event), 0.0, skip, counts, row)


@njit(**JIT)
def add_event_extras(acc, row, col, extras, event, value, magnitude, sigma, weight, light_t):
    """One sample's candidate features at event ``event`` (0 or 1) into the block at ``extras``."""
    c = extras + EXTRA_EVENT * event
    acc[row, col, c] += value
    acc[row, col, c + 1] += magnitude
    acc[row, col, c + 2] += sigma
    acc[row, col, c + 3] += weight
    acc[row, col, c + 4] += light_t


@njit(**JIT)
def add_camera_extras(acc, row, col, extras, b0, b1, b2, scratch):
    """One sample's camera-ray features: opacity in front of event 1 (the whole ray's where it has none), the
    expected depth's numerator and denominator, the optical depth to the exit, and the background part."""
    c = extras + 2 * EXTRA_EVENT
    event1 = scratch[MAX_EVENTS + MAX_LEVELS]
    tau = scratch[SCRATCH - 3]
    acc[row, col, c] += -math.expm1(-scratch[0]) if event1 >= 0.0 else -math.expm1(-tau)
    acc[row, col, c + 1] += scratch[SCRATCH - 2]
    acc[row, col, c + 2] += scratch[SCRATCH - 1]
    acc[row, col, c + 3] += tau
    transmitted = math.exp(-tau)
    acc[row, col, c + 4] += transmitted * b0
    acc[row, col, c + 5] += transmitted * b1
    acc[row, col, c + 6] += transmitted * b2


@njit(**JIT)
def add_radiance(acc, row, col, r0, r1, r2, alpha):
    acc[row, col, 0] += r0
    acc[row, col, 1] += r1
    acc[row, col, 2] += r2
    acc[row, col, 3] += r0 * r0
    acc[row, col, 4] += r1 * r1
    acc[row, col, 5] += r2 * r2
    acc[row, col, 6] += alpha


@njit(**JIT)
def trace_path(volume, transfer, cells, camera, lights, env_kind, env_colors, env_image, background,
               background_is_env, scattering, n_events, levels, step, g, gradient_scale, roulette_depth, extras, seed, row,
               col, width, height, sample, skip, acc, counts, scratch):
    """One sample path of pixel (row, col) (the default: march, single scattering); adds it to ``acc[row, col]``.

    ``scratch`` (SCRATCH,) float64 is the row's work space (allocated once per row, not per path).
    """
    _field, world_to_index, _index_to_world, gradient_to_world, bricks, shape = volume
    albedo, extinction, lookup, _emission, _emitting = transfer
    pixel = row * width + col
    px, py, pz, dx, dy, dz = camera_ray(camera, seed, pixel, sample, row, col, width, height)
    b0, b1, b2 = background_along(background_is_env, env_kind, env_colors, env_image, background, dx, dy, dz)
    tau, glow0, glow1, glow2 = march_camera_ray(volume, transfer, cells, n_events, levels, step, seed, pixel, sample,
                                                px, py, pz, dx, dy, dz, True, extras >= 0, skip, counts, row, scratch)
    alpha = -math.expm1(-tau)

    # shade each stratum
    event_t = scratch[MAX_EVENTS + MAX_LEVELS:2 * MAX_EVENTS + MAX_LEVELS]
    r0 = 0.0
    r1 = 0.0
    r2 = 0.0
    for k in range(n_events):
        t = event_t[k]
        if t < 0.0:
            r0 += b0
            r1 += b1
            r2 += b2
            continue
        qx, qy, qz = px + t * dx, py + t * dy, pz + t * dz
        value, nx, ny, nz, magnitude = event_frame(bricks, shape, world_to_index, gradient_to_world, qx, qy, qz, dx, dy, dz)
        counts[row, 0] += 7
        counts[row, 1] += 7
        a0, a1, a2 = albedo_at(albedo, lookup, value)
        weight = interface_weight(scattering, gradient_scale, magnitude)
        s0, s1, s2 = scattered_light(bricks, shape, cells, world_to_index, extinction, lookup, lights, env_kind, env_colors,
                                     env_image, step, roulette_depth, g, weight, qx, qy, qz, nx, ny, nz, dx, dy, dz,
                                     seed, pixel, sample, DIM_EVENT + DIM_EVENT_STRIDE * k, skip, counts, row)
        r0 += a0 * s0
        r1 += a1 * s1
        r2 += a2 * s2
        if k < 2:
            add_feature(acc, row, col, N_BASE_CHANNELS + BLOCK * k, qx, qy, qz, nx, ny, nz, t)
            if k == 0:
                acc[row, col, 7] += a0
                acc[row, col, 8] += a1
                acc[row, col, 9] += a2
            if extras >= 0:
                light_t = light_transmittance(bricks, shape, cells, world_to_index, extinction, lookup, lights, step,
                                              qx, qy, qz, seed, pixel, sample, k, skip, counts, row)
                add_event_extras(acc, row, col, extras, k, value, magnitude, extinction_at(extinction, lookup, value),
                                 weight, light_t)
    add_levels(volume, levels, px, py, pz, dx, dy, dz, acc, row, col, counts, scratch)
    if extras >= 0:
        add_camera_extras(acc, row, col, extras, b0, b1, b2, scratch)
    add_radiance(acc, row, col, r0 / n_events + glow0, r1 / n_events + glow1, r2 / n_events + glow2, alpha)


@njit(**JIT)
def row_stride(n_rows):
    """A step coprime with n_rows near 0.618 n_rows: slot -> (slot * step) mod n_rows is a scattered permutation."""
    if n_rows <= 2:
        return 1
    step = max(1, int(n_rows * 0.6180339887))
    while True:
        a, b = step, n_rows
        while b:
            a, b = b, a % b
        if a == 1:
            return step
        step += 1


@njit(**JIT_PARALLEL)
def render_rows(volume, transfer, cells, camera, lights, env_kind, env_colors, env_image, background,
                background_is_env, scattering, n_events, levels, step, g, gradient_scale, roulette_depth, extras, seed,
                row_start, row_end, sample_start, sample_end, skip, acc, counts, done):
    """Add samples [sample_start, sample_end) of rows [row_start, row_end) to ``acc``.

    Parameters
    ----------
    volume : VolumeArrays (field (nx, ny, nz) float32; world_to_index (3, 4); index_to_world (3, 4);
        gradient_to_world (3, 3) float64; bricks (gx, gy, gz, 9, 9, 9) float32 the same field bricked;
        shape (3,) int64)
    transfer : TransferArrays (albedo (n, 3) float32; extinction (n,) float32 per mm; lookup (2,) float64;
        emission (n, 3) float32; emitting bool: whether the march collects emission at all)
    cells : (cx, cy, cz) float32 macrocell maxima from ``tracer.rendering.arguments.macrocells``
    skip : bool; step over empty cells (exact); false marches through them (for measurements)
    camera : (4, 3) float64 rows: position (mm), forward (unit), right and up scaled by the
        half-extent of the image plane at distance 1
    lights : (n_lights, 7) float64 rows ``[kind, x, y, z, r, g, b]``: toward (unit) and irradiance for
        directional lights, position (mm) and intensity for point lights
    env_colors : (3, 3) float64; env_image : (h, w, 3) float32; background : (3,) float64
    levels : (n_levels,) float64 opacity levels of the fixed feature events
    roulette_depth : float; shadow and environment rays play Russian roulette once their optical depth
        passes this (ROULETTE_DEPTH); infinity turns roulette off (for measurements)
    extras : int; the channel where the candidate features' block starts, or -1 (off)
    acc : (H, W, C) float64 accumulator; each row is written by exactly one iteration, and
        each pixel receives its samples in increasing order, so the sums are bit-identical for
        any thread count or pass split.
    counts : (H, 2) int64; per row, the field samples taken (march, shadow and environment rays, and
        the 7 of value and gradient at each event) and those of them that fell in non-empty macrocells.
    done : (1,) int64; set to ``row_end`` as the last act of the call. A Ctrl-C arriving while the kernel
        runs is raised by Python only after it returns, so the caller reads here whether the rows were added.
    """
    width = acc.shape[1]
    height = acc.shape[0]
    n_rows = row_end - row_start
    stride = row_stride(n_rows)
    for slot in prange(n_rows):
        # visit rows in a scattered order so that each thread's share of the range mixes cheap
        # (background) and costly rows; which thread adds to a row never changes its bits
        row = row_start + (slot * stride) % n_rows
        scratch = np.empty(SCRATCH)
        for col in range(width):
            for sample in range(sample_start, sample_end):
                trace_path(volume, transfer, cells, camera, lights, env_kind, env_colors, env_image, background,
                           background_is_env, scattering, n_events, levels, step, g, gradient_scale, roulette_depth,
                           extras, seed, row, col, width, height, sample, skip, acc, counts, scratch)
    done[0] = row_end
