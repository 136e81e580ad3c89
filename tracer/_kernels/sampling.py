"""Field sampling, transfer-function lookup, phase functions and direction sampling.

Coordinates passed here are in voxel-index space: voxel (i, j, k) sits at integer (i, j, k)
and the field is trilinear between them. Callers keep points inside [0, n-1] per axis.
"""

import math

import numpy as np

from numba import njit

from ..config import JIT

INV_PI = 1.0 / math.pi
INV_4PI = 1.0 / (4.0 * math.pi)


@njit(**JIT)
def blend_corners(v000, v100, v010, v110, v001, v101, v011, v111, fx, fy, fz):
    """Trilinear blend of a cell's 8 corner values (v_ijk at offsets i, j, k) at fractions fx, fy, fz."""
    c00 = v000 * (1.0 - fx) + v100 * fx
    c10 = v010 * (1.0 - fx) + v110 * fx
    c01 = v001 * (1.0 - fx) + v101 * fx
    c11 = v011 * (1.0 - fx) + v111 * fx
    c0 = c00 * (1.0 - fy) + c10 * fy
    c1 = c01 * (1.0 - fy) + c11 * fy
    return c0 * (1.0 - fz) + c1 * fz


@njit(**JIT)
def locate(nx, ny, nz, x, y, z):
    """The cell of index point (x, y, z), clamped to the box of an (nx, ny, nz) field: its lower
    corner (i, j, k) and the fractions (fx, fy, fz) inside it."""
    x = min(max(x, 0.0), nx - 1.0)
    y = min(max(y, 0.0), ny - 1.0)
    z = min(max(z, 0.0), nz - 1.0)
    i = min(int(x), nx - 2)
    j = min(int(y), ny - 2)
    k = min(int(z), nz - 2)
    return i, j, k, x - i, y - j, z - k


@njit(**JIT)
def trilinear(field, x, y, z):
    """Trilinear value of ``field`` (nx, ny, nz) float32 at index point (x, y, z), clamped to the box."""
    i, j, k, fx, fy, fz = locate(field.shape[0], field.shape[1], field.shape[2], x, y, z)
    return blend_corners(field[i, j, k], field[i + 1, j, k], field[i, j + 1, k], field[i + 1, j + 1, k],
                         field[i, j, k + 1], field[i + 1, j, k + 1], field[i, j + 1, k + 1], field[i + 1, j + 1, k + 1],
                         fx, fy, fz)


#: Voxel intervals per brick; bricks store BRICK + 1 samples per axis (one shared with the next brick),
#: so the 8 voxels of any trilinear lookup lie in one brick (filled by ``tracer.volumes.bricking``).
BRICK = 8
BRICK_SHIFT = 3
BRICK_MASK = BRICK - 1
# unsigned copies: numba adds a negative-index wrap-around test to every signed index, and these lookups are
# the march's inner loop (indices here are never negative, so the values are the same)
_U_SHIFT = np.uint64(BRICK_SHIFT)
_U_MASK = np.uint64(BRICK_MASK)
_U_ONE = np.uint64(1)


@njit(**JIT)
def trilinear_bricked(bricks, shape, x, y, z):
    """:func:`trilinear` on the bricked copy of the field; ``shape`` (3,) is the field's shape. Same values."""
    i, j, k, fx, fy, fz = locate(shape[0], shape[1], shape[2], x, y, z)
    ui, uj, uk = np.uint64(i), np.uint64(j), np.uint64(k)
    brick = bricks[ui >> _U_SHIFT, uj >> _U_SHIFT, uk >> _U_SHIFT]
    i0, j0, k0 = ui & _U_MASK, uj & _U_MASK, uk & _U_MASK       # i % BRICK for i >= 0
    i1, j1, k1 = i0 + _U_ONE, j0 + _U_ONE, k0 + _U_ONE
    return blend_corners(brick[i0, j0, k0], brick[i1, j0, k0], brick[i0, j1, k0], brick[i1, j1, k0],
                         brick[i0, j0, k1], brick[i1, j0, k1], brick[i0, j1, k1], brick[i1, j1, k1],
                         fx, fy, fz)


@njit(**JIT)
def gradient_bricked(bricks, shape, x, y, z):
    """Central differences of the trilinear field, one voxel either side, in value per voxel.

    At the box faces the stencil is clamped and divided by its true width, so at voxel centres
    this equals ``numpy.gradient`` (first-order one-sided differences at the edges). Samples the
    bricked copy of the field; returns (gx, gy, gz).
    """
    xp = min(x + 1.0, shape[0] - 1.0)
    xm = max(x - 1.0, 0.0)
    yp = min(y + 1.0, shape[1] - 1.0)
    ym = max(y - 1.0, 0.0)
    zp = min(z + 1.0, shape[2] - 1.0)
    zm = max(z - 1.0, 0.0)
    gx = (trilinear_bricked(bricks, shape, xp, y, z) - trilinear_bricked(bricks, shape, xm, y, z)) / max(xp - xm, 1e-12)
    gy = (trilinear_bricked(bricks, shape, x, yp, z) - trilinear_bricked(bricks, shape, x, ym, z)) / max(yp - ym, 1e-12)
    gz = (trilinear_bricked(bricks, shape, x, y, zp) - trilinear_bricked(bricks, shape, x, y, zm)) / max(zp - zm, 1e-12)
    return gx, gy, gz


@njit(**JIT)
def table_position(lookup, n_entries, value):
    """Fractional entry of ``value`` in a baked table, clamped to [0, n_entries - 1]."""
    u = (value - lookup[0]) * lookup[1]
    return min(max(u, 0.0), n_entries - 1.0)


@njit(**JIT)
def extinction_at(extinction, lookup, value):
    """Extinction per mm at a scalar value, linear between table entries."""
    n = extinction.shape[0]
    u = table_position(lookup, n, value)
    e = min(int(u), n - 2)
    f = u - e
    ue = np.uint64(e)
    return extinction[ue] * (1.0 - f) + extinction[ue + _U_ONE] * f


@njit(**JIT)
def albedo_at(albedo, lookup, value):
    """Linear RGB albedo at a scalar value, linear between table entries."""
    n = albedo.shape[0]
    u = table_position(lookup, n, value)
    e = min(int(u), n - 2)
    f = u - e
    e0 = np.uint64(e)
    e1 = e0 + _U_ONE
    return (albedo[e0, 0] * (1.0 - f) + albedo[e1, 0] * f,
            albedo[e0, 1] * (1.0 - f) + albedo[e1, 1] * f,
            albedo[e0, 2] * (1.0 - f) + albedo[e1, 2] * f)


@njit(**JIT)
def henyey_greenstein(cos_theta, g):
    """Henyey-Greenstein phase function per steradian (Henyey and Greenstein 1941).

    ``cos_theta`` is the cosine between the direction of travel before and after scattering;
    ``g > 0`` favours forward scattering; the mean cosine is ``g``.
    """
    denominator = 1.0 + g * g - 2.0 * g * cos_theta
    return INV_4PI * (1.0 - g * g) / (denominator * math.sqrt(denominator))


@njit(**JIT)
def sample_henyey_greenstein_cos(g, u):
    """Inverse-CDF sample of the scattering cosine for Henyey-Greenstein (Henyey and Greenstein 1941)."""
    if abs(g) < 1e-3:
        return 1.0 - 2.0 * u
    s = (1.0 - g * g) / (1.0 - g + 2.0 * g * u)
    return min(max((1.0 + g * g - s * s) / (2.0 * g), -1.0), 1.0)


@njit(**JIT)
def orthonormal_basis(nx, ny, nz):
    """Two unit vectors completing the unit vector n to a right-handed frame (Duff et al. 2017)."""
    sign = 1.0 if nz >= 0.0 else -1.0
    a = -1.0 / (sign + nz)
    b = nx * ny * a
    return (1.0 + sign * nx * nx * a, sign * b, -sign * nx), (b, sign + ny * ny * a, -ny)


@njit(**JIT)
def direction_around(ax, ay, az, cos_theta, phi):
    """The unit vector at angle acos(cos_theta) from axis a, at azimuth phi."""
    sin_theta = math.sqrt(max(0.0, 1.0 - cos_theta * cos_theta))
    t, b = orthonormal_basis(ax, ay, az)
    cp = math.cos(phi) * sin_theta
    sp = math.sin(phi) * sin_theta
    return (t[0] * cp + b[0] * sp + ax * cos_theta,
            t[1] * cp + b[1] * sp + ay * cos_theta,
            t[2] * cp + b[2] * sp + az * cos_theta)


@njit(**JIT)
def sample_henyey_greenstein(dx, dy, dz, g, u1, u2):
    """A scattered direction around the travel direction d, distributed as Henyey-Greenstein."""
    return direction_around(dx, dy, dz, sample_henyey_greenstein_cos(g, u1), 2.0 * math.pi * u2)


@njit(**JIT)
def sample_cosine(nx, ny, nz, u1, u2):
    """A direction in the hemisphere around n with density cos(theta)/pi (Lambert)."""
    return direction_around(nx, ny, nz, math.sqrt(1.0 - u1), 2.0 * math.pi * u2)
