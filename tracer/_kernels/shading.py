"""Shading at a path vertex: the environment, the local frame, and the blended scattering lobe."""

import math

import numpy as np
from numba import njit

from ..config import JIT
from .geometry import to_index
from .rng import uniform
from .sampling import (INV_PI, gradient_bricked, henyey_greenstein, sample_cosine, sample_henyey_greenstein,
                       trilinear_bricked)

# integer codes (strings never reach compiled code)
SCATTER_MEDIUM = 0
SCATTER_INTERFACE = 1
SCATTER_GRADED = 2
ENV_CONSTANT = 0
ENV_SKY = 1
ENV_IMAGE = 2
LIGHT_DIRECTIONAL = 0
LIGHT_POINT = 1
MAX_LIGHTS = 16


@njit(**JIT)
def environment_radiance(env_kind, env_colors, env_image, dx, dy, dz):
    """Environment radiance seen along unit direction d (world +z up).

    constant: ``env_colors[0]``; sky: horizon -> zenith by sqrt(z) above the horizon, horizon
    -> ground within a few degrees below it; image: lat-long, row 0 at +z, column 0 at
    azimuth 0 (+x), azimuth growing toward +y, bilinear with wrap in azimuth.
    """
    if env_kind == ENV_CONSTANT:
        return env_colors[0, 0], env_colors[0, 1], env_colors[0, 2]
    if env_kind == ENV_SKY:
        z = min(max(dz, -1.0), 1.0)
        if z >= 0.0:
            s = math.sqrt(z)
            return (env_colors[1, 0] * (1 - s) + env_colors[0, 0] * s,
                    env_colors[1, 1] * (1 - s) + env_colors[0, 1] * s,
                    env_colors[1, 2] * (1 - s) + env_colors[0, 2] * s)
        s = min(1.0, -z * 8.0)
        return (env_colors[1, 0] * (1 - s) + env_colors[2, 0] * s,
                env_colors[1, 1] * (1 - s) + env_colors[2, 1] * s,
                env_colors[1, 2] * (1 - s) + env_colors[2, 2] * s)
    h, w = env_image.shape[0], env_image.shape[1]
    theta = math.acos(min(max(dz, -1.0), 1.0))
    phi = math.atan2(dy, dx)
    if phi < 0.0:
        phi += 2.0 * math.pi
    v = theta / math.pi * h - 0.5
    u = phi / (2.0 * math.pi) * w - 0.5
    r0 = int(math.floor(v))
    c0 = int(math.floor(u))
    fv = v - r0
    fu = u - c0
    ra = min(max(r0, 0), h - 1)
    rb = min(max(r0 + 1, 0), h - 1)
    ca = c0 % w
    cb = (c0 + 1) % w
    out0 = 0.0
    out1 = 0.0
    out2 = 0.0
    for rr, wr in ((ra, 1.0 - fv), (rb, fv)):
        for cc, wc in ((ca, 1.0 - fu), (cb, fu)):
            wt = wr * wc
            out0 += wt * env_image[rr, cc, 0]
            out1 += wt * env_image[rr, cc, 1]
            out2 += wt * env_image[rr, cc, 2]
    return out0, out1, out2


@njit(**JIT)
def background_along(background_is_env, env_kind, env_colors, env_image, background, dx, dy, dz):
    """What a camera ray along d sees past the volume: the environment, or the scene's background colour."""
    if background_is_env:
        return environment_radiance(env_kind, env_colors, env_image, dx, dy, dz)
    return background[0], background[1], background[2]


@njit(**JIT)
def light_toward(lights, light, px, py, pz):
    """Unit direction from p toward light ``light``, its distance (inf for a directional light) and the
    falloff (1, or 1 / r^2 for a point light; 0 for a point light at p itself, which delivers nothing)."""
    if lights[light, 0] == LIGHT_DIRECTIONAL:
        return lights[light, 1], lights[light, 2], lights[light, 3], np.inf, 1.0
    lx, ly, lz = lights[light, 1] - px, lights[light, 2] - py, lights[light, 3] - pz
    distance = math.sqrt(lx * lx + ly * ly + lz * lz)
    if distance <= 0.0:
        return 0.0, 0.0, 1.0, 0.0, 0.0
    return lx / distance, ly / distance, lz / distance, distance, 1.0 / (distance * distance)


@njit(**JIT)
def event_frame(bricks, shape, world_to_index, gradient_to_world, px, py, pz, dx, dy, dz):
    """Scalar value, unit normal (facing the incoming ray) and world gradient magnitude at p."""
    ix, iy, iz = to_index(world_to_index, px, py, pz)
    value = trilinear_bricked(bricks, shape, ix, iy, iz)
    gi, gj, gk = gradient_bricked(bricks, shape, ix, iy, iz)
    g = gradient_to_world
    gx = g[0, 0] * gi + g[0, 1] * gj + g[0, 2] * gk
    gy = g[1, 0] * gi + g[1, 1] * gj + g[1, 2] * gk
    gz = g[2, 0] * gi + g[2, 1] * gj + g[2, 2] * gk
    magnitude = math.sqrt(gx * gx + gy * gy + gz * gz)
    if magnitude > 0.0:
        nx, ny, nz = -gx / magnitude, -gy / magnitude, -gz / magnitude
        if nx * dx + ny * dy + nz * dz > 0.0:
            nx, ny, nz = -nx, -ny, -nz
    else:
        nx, ny, nz = -dx, -dy, -dz
    return value, nx, ny, nz, magnitude


@njit(**JIT)
def interface_weight(scattering, gradient_scale, magnitude):
    """Weight of the interface (Lambert) lobe: 0 for medium, 1 for interface, ``1 - exp(-|grad| * scale)`` for graded."""
    if scattering == SCATTER_MEDIUM:
        return 0.0
    if scattering == SCATTER_INTERFACE:
        return 1.0
    return 1.0 - math.exp(-magnitude * gradient_scale)


@njit(**JIT)
def lobe(weight, g, nx, ny, nz, dx, dy, dz, lx, ly, lz):
    """Blended scattering lobe per steradian for light arriving from direction l toward a ray travelling along d.

    Surface part: Lambert ``max(0, n.l)/pi``; volume part: Henyey-Greenstein of the
    scattering cosine ``d.l`` (light travelling along -l turns to travel along -d).
    """
    value = 0.0
    if weight > 0.0:
        value += weight * max(0.0, nx * lx + ny * ly + nz * lz) * INV_PI
    if weight < 1.0:
        value += (1.0 - weight) * henyey_greenstein(dx * lx + dy * ly + dz * lz, g)
    return value


@njit(**JIT)
def sample_lobe(weight, g, nx, ny, nz, dx, dy, dz, seed, pixel, sample, dim):
    """A direction from the blended lobe (its density is the lobe, so the path weight stays 1)."""
    u_lobe = uniform(seed, pixel, sample, dim)
    u1 = uniform(seed, pixel, sample, dim + 1)
    u2 = uniform(seed, pixel, sample, dim + 2)
    if u_lobe < weight:
        return sample_cosine(nx, ny, nz, u1, u2)
    return sample_henyey_greenstein(dx, dy, dz, g, u1, u2)
