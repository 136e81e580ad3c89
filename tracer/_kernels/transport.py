"""The path kernel of the transport options: many bounces, and the "track" estimator.

A separate kernel from :func:`tracer._kernels.integrate.render_rows`, so the default render (march,
one bounce) compiles without the tracking code. It shares that kernel's camera ray, camera-ray march
and feature records, so the feature buffers mean the same under every option:

- ``estimator = "march"``, ``bounces > 1``: events, emission along the camera ray and direct light at
  each event exactly as the default; the environment direction drawn at an event is followed on by
  :func:`tracer._kernels.tracking.follow_path` (delta tracking) for the remaining bounces.
- ``estimator = "track"``: the march still finds the feature events, levels and alpha; the radiance is
  one tracked path per sample (:func:`tracer._kernels.tracking.tracked_camera_path`).
"""

import math

import numpy as np
from numba import njit, prange

from ..config import JIT, JIT_PARALLEL
from .integrate import (BLOCK, DIM_EVENT, DIM_EVENT_STRIDE, MAX_EVENTS, MAX_LEVELS, N_BASE_CHANNELS, SCRATCH,
                        add_camera_extras, add_event_extras, add_feature, add_levels, add_radiance, camera_ray,
                        light_transmittance, march_camera_ray, marched_direct_light, row_stride)
from .sampling import albedo_at, extinction_at
from .shading import background_along, event_frame, interface_weight, sample_lobe
from .tracking import follow_path, tracked_camera_path

ESTIMATOR_MARCH = 0
ESTIMATOR_TRACK = 1


@njit(**JIT)
def trace_transport(volume, transfer, cells, camera, lights, env_kind, env_colors, env_image, background,
                    background_is_env, scattering, n_events, levels, step, g, gradient_scale, roulette_depth, extras,
                    bounces, estimator, track_cells, seed, row, col, width, height, sample, skip, acc, counts, scratch):
    """One sample path of pixel (row, col) under ``bounces`` and ``estimator``; adds it to ``acc[row, col]``."""
    _field, world_to_index, _index_to_world, gradient_to_world, bricks, shape = volume
    albedo, extinction, lookup, _emission, _emitting = transfer
    track = estimator == ESTIMATOR_TRACK
    pixel = row * width + col
    px, py, pz, dx, dy, dz = camera_ray(camera, seed, pixel, sample, row, col, width, height)
    b0, b1, b2 = background_along(background_is_env, env_kind, env_colors, env_image, background, dx, dy, dz)
    tau, glow0, glow1, glow2 = march_camera_ray(volume, transfer, cells, n_events, levels, step, seed, pixel, sample,
                                                px, py, pz, dx, dy, dz, not track, extras >= 0, skip, counts, row,
                                                scratch)
    alpha = -math.expm1(-tau)

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
        if track and k >= 2:
            continue                      # no feature of its own, and the radiance comes from the tracked path
        qx, qy, qz = px + t * dx, py + t * dy, pz + t * dz
        value, nx, ny, nz, magnitude = event_frame(bricks, shape, world_to_index, gradient_to_world, qx, qy, qz, dx, dy, dz)
        counts[row, 0] += 7
        counts[row, 1] += 7
        a0, a1, a2 = albedo_at(albedo, lookup, value)
        if not track:
            weight = interface_weight(scattering, gradient_scale, magnitude)
            base_dim = DIM_EVENT + DIM_EVENT_STRIDE * k
            s0, s1, s2 = marched_direct_light(bricks, shape, cells, world_to_index, extinction, lookup, lights, step,
                                              roulette_depth, g, weight, qx, qy, qz, nx, ny, nz, dx, dy, dz, seed, pixel,
                                              sample, base_dim, skip, counts, row)
            wx, wy, wz = sample_lobe(weight, g, nx, ny, nz, dx, dy, dz, seed, pixel, sample, base_dim)
            e0, e1, e2 = follow_path(volume, transfer, track_cells, lights, env_kind, env_colors, env_image, scattering, g,
                                     gradient_scale, roulette_depth, bounces, 1, qx, qy, qz, wx, wy, wz, seed, pixel,
                                     sample, k, counts, row)
            r0 += a0 * (s0 + e0)
            r1 += a1 * (s1 + e1)
            r2 += a2 * (s2 + e2)
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
                                 interface_weight(scattering, gradient_scale, magnitude), light_t)
    add_levels(volume, levels, px, py, pz, dx, dy, dz, acc, row, col, counts, scratch)
    if extras >= 0:
        add_camera_extras(acc, row, col, extras, b0, b1, b2, scratch)
    if track:
        r0, r1, r2 = tracked_camera_path(volume, transfer, track_cells, lights, env_kind, env_colors, env_image, scattering, g,
                                         gradient_scale, roulette_depth, bounces, px, py, pz, dx, dy, dz, b0, b1, b2,
                                         seed, pixel, sample, counts, row)
    else:
        r0 = r0 / n_events + glow0
        r1 = r1 / n_events + glow1
        r2 = r2 / n_events + glow2
    add_radiance(acc, row, col, r0, r1, r2, alpha)


@njit(**JIT_PARALLEL)
def render_rows_transport(volume, transfer, cells, camera, lights, env_kind, env_colors, env_image, background,
                          background_is_env, scattering, n_events, levels, step, g, gradient_scale, roulette_depth,
                          extras, bounces, estimator, track_cells, seed, row_start, row_end, sample_start, sample_end, skip,
                          acc, counts, done):
    """:func:`tracer._kernels.integrate.render_rows` (same arguments, same row order and ``done`` protocol) with
    ``extras`` first, then ``bounces`` (the most scattering events of a path), ``estimator`` (ESTIMATOR_MARCH or ESTIMATOR_TRACK) and
    ``track_cells`` (the majorants of TRACK_CELL^3-voxel cells that tracking uses) before ``seed``."""
    width = acc.shape[1]
    n_rows = row_end - row_start
    stride = row_stride(n_rows)
    for slot in prange(n_rows):
        row = row_start + (slot * stride) % n_rows
        scratch = np.empty(SCRATCH)
        for col in range(width):
            for sample in range(sample_start, sample_end):
                trace_transport(volume, transfer, cells, camera, lights, env_kind, env_colors, env_image, background,
                                background_is_env, scattering, n_events, levels, step, g, gradient_scale,
                                roulette_depth, extras, bounces, estimator, track_cells, seed, row, col, width, acc.shape[0],
                                sample, skip, acc, counts, scratch)
    done[0] = row_end
