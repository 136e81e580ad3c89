"""Demo volumes, generated deterministically from our own counter-based generator.

The scenario: a small materials lab that scans what passes through it.

- ``figurine``: a fired-clay owl figurine from an industrial CT scanner; int16 on a
  Hounsfield-like scale, anisotropic voxels, a thin steel armature wire inside and trapped
  air pores. Clay near 1800 HU and steel saturating at 3071 HU are values from memory
  (typical of ceramics and of the 12-bit ceiling of CT reconstructions), not measurements.
- ``lattice``: a gyroid lattice test coupon from an additive-manufacturing lab (uint8
  micro-CT grey values), struts 2-3 voxels thick between two solid plates.
- ``plume``: a soft, semi-transparent density field from a combustion simulation (float32),
  smoke-like, with no sharp surfaces.
- ``flame``: the lab's kiln burner, a gas-flame tongue and the hot smoke above it, as a
  temperature field in kelvin (uint16): ambient 300 K, about 1900 K in the flame's core. One
  field drives both the glow (blackbody emission) and the soot that scatters it.

``tracer demo-volumes --out DIR`` writes them; the same code gives the same bits every time.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from .._kernels.rng import mix64_numpy, uniform_numpy

AIR_HU = -1000.0      # fixed point of the Hounsfield scale
CLAY_HU = 1800.0      # from memory: fired ceramics read roughly 1500-2500 HU
STEEL_HU = 3071.0     # from memory: the usual 12-bit ceiling of CT reconstructions


@dataclass(frozen=True)
class Sample:
    name: str
    data: np.ndarray        # [x, y, z]
    spacing_mm: tuple[float, float, float]
    description: str


def _grid(shape, spacing, centre_xy=True):
    """World coordinates (mm) of voxel centres, x and y centred on the volume's axis."""
    axes = []
    for n, d, centred in zip(shape, spacing, (centre_xy, centre_xy, False)):
        coords = np.arange(n, dtype=np.float64) * d
        axes.append(coords - coords[-1] / 2 if centred else coords)
    return np.meshgrid(*axes, indexing="ij", sparse=True)


def _gaussian_noise(shape, seed, stream):
    """Approximately standard-normal noise: the sum of four counter-based uniforms (Irwin-Hall), rescaled."""
    index = np.arange(int(np.prod(shape)), dtype=np.uint64)
    total = sum(uniform_numpy(seed, index, stream, d) for d in range(4))
    return ((total - 2.0) * np.sqrt(3.0)).reshape(shape)


def _value_noise(x, y, z, cell, seed):
    """Smooth value noise in [0, 1]: hashed lattice values, smoothstep-interpolated."""
    fx, fy, fz = x / cell, y / cell, z / cell
    ix, iy, iz = np.floor(fx), np.floor(fy), np.floor(fz)
    tx, ty, tz = (t * t * (3 - 2 * t) for t in (fx - ix, fy - iy, fz - iz))
    total = 0.0
    for dx in (0, 1):
        for dy in (0, 1):
            for dz in (0, 1):
                key = (((ix + dx).astype(np.int64) * 73856093) ^ ((iy + dy).astype(np.int64) * 19349663)
                       ^ ((iz + dz).astype(np.int64) * 83492791)).astype(np.uint64)
                value = (mix64_numpy(key ^ np.uint64(seed * 0x9E37 + 1)) >> np.uint64(11)).astype(np.float64) * 2.0**-53
                weight = (tx if dx else 1 - tx) * (ty if dy else 1 - ty) * (tz if dz else 1 - tz)
                total = total + weight * value
    return total


def _occupancy(signed_distance, voxel_mm):
    """Partial-volume fraction of a shape given its signed distance (negative inside), in mm."""
    return np.clip(0.5 - signed_distance / voxel_mm, 0.0, 1.0)


def _blur(values):
    """A [1, 2, 1] / 4 binomial blur along each axis (a small point-spread function), edges repeated."""
    out = np.asarray(values, dtype=np.float64)
    for axis in range(3):
        padded = np.concatenate([np.take(out, [0], axis), out, np.take(out, [-1], axis)], axis=axis)
        n = out.shape[axis]
        out = 0.25 * np.take(padded, range(0, n), axis) + 0.5 * np.take(padded, range(1, n + 1), axis) \
            + 0.25 * np.take(padded, range(2, n + 2), axis)
    return out


def _ellipsoid(x, y, z, centre, radii):
    q = np.sqrt(((x - centre[0]) / radii[0]) ** 2 + ((y - centre[1]) / radii[1]) ** 2 + ((z - centre[2]) / radii[2]) ** 2)
    return (q - 1.0) * min(radii)


def _segment(x, y, z, a, b, radius):
    a, b = np.asarray(a, float), np.asarray(b, float)
    ab = b - a
    t = np.clip(((x - a[0]) * ab[0] + (y - a[1]) * ab[1] + (z - a[2]) * ab[2]) / ab.dot(ab), 0, 1)
    return np.sqrt((x - a[0] - t * ab[0]) ** 2 + (y - a[1] - t * ab[1]) ** 2 + (z - a[2] - t * ab[2]) ** 2) - radius


def figurine(seed: int = 11) -> Sample:
    """A clay owl on a round base, 120 x 120 x 112 voxels of 0.4 x 0.4 x 0.5 mm."""
    shape, spacing = (120, 120, 112), (0.4, 0.4, 0.5)
    x, y, z = _grid(shape, spacing)
    voxel = min(spacing)
    body = _ellipsoid(x, y, z, (0, 0, 22), (14, 12, 16))
    head = _ellipsoid(x, y, z, (0, -1, 40), (10.5, 9.5, 9))
    ears = np.minimum(_ellipsoid(x, y, z, (-6, -1, 49), (2.5, 2.2, 4.5)), _ellipsoid(x, y, z, (6, -1, 49), (2.5, 2.2, 4.5)))
    base = np.maximum(np.sqrt(x**2 + y**2) - 16.0, np.maximum(2.0 - z, z - 8.0))
    clay = np.minimum(np.minimum(body, head), np.minimum(ears, base))
    # eye sockets and a beak groove carved in
    eyes = np.minimum(_ellipsoid(x, y, z, (-4.2, -10.6, 41.5), (2.8, 2.2, 2.8)),
                      _ellipsoid(x, y, z, (4.2, -10.6, 41.5), (2.8, 2.2, 2.8)))
    wings = np.minimum(_segment(x, y, z, (-13.6, -3, 28), (-11, -7, 12), 0.7),
                       _segment(x, y, z, (13.6, -3, 28), (11, -7, 12), 0.7))
    clay = np.maximum(clay, -np.minimum(eyes, wings))
    occupancy = _occupancy(clay, voxel)
    # trapped air pores: 70 small spheres at hashed places inside the body
    counter = np.arange(70, dtype=np.uint64)
    px = (uniform_numpy(seed, counter, 1, 0) - 0.5) * 20
    py = (uniform_numpy(seed, counter, 1, 1) - 0.5) * 16
    pz = 10 + uniform_numpy(seed, counter, 1, 2) * 26
    pr = 0.4 + 1.1 * uniform_numpy(seed, counter, 1, 3)
    for cx, cy, cz, r in zip(px, py, pz, pr):
        occupancy = occupancy * (1 - _occupancy(_ellipsoid(x, y, z, (cx, cy, cz), (r, r, r)), voxel))
    hu = _blur(AIR_HU + occupancy * (CLAY_HU - AIR_HU))    # the scanner's point-spread function
    # the armature: a 1.2 mm steel wire up the spine and across the shoulders
    wire = np.minimum(_segment(x, y, z, (0, 1, 4), (0, 1, 41), 0.6), _segment(x, y, z, (-9, 1, 30), (9, 1, 30), 0.6))
    metal = _occupancy(wire, voxel)
    hu = hu + metal * (STEEL_HU - hu)
    hu = hu + 18.0 * _gaussian_noise(shape, seed, 2)
    data = np.clip(np.rint(hu), -1024, 3071).astype(np.int16)
    return Sample("figurine", data, spacing, "fired-clay owl figurine, industrial CT (HU-like int16)")


def lattice(seed: int = 23) -> Sample:
    """A gyroid strut lattice between two plates, 112 x 112 x 128 voxels of 0.1 mm."""
    shape, spacing = (112, 112, 128), (0.1, 0.1, 0.1)
    x, y, z = _grid(shape, spacing)
    period = 2.8
    k = 2 * np.pi / period
    sx, cx = np.sin(k * x), np.cos(k * x)
    sy, cy = np.sin(k * y), np.cos(k * y)
    sz, cz = np.sin(k * z), np.cos(k * z)
    gyroid = sx * cy + sy * cz + sz * cx
    gradient = k * np.sqrt((cx * cy - sz * sx) ** 2 + (-sx * sy + cy * cz) ** 2 + (-sy * sz + cz * cx) ** 2)
    strut = -(gyroid - 1.3) / np.maximum(gradient, 0.5 * k)   # signed distance (approx.), negative inside
    side = np.maximum(np.abs(x) - 5.2, np.abs(y) - 5.2)
    strut = np.maximum(strut, side)
    plates = np.maximum(side, np.minimum(z - 1.0, 11.7 - z))
    solid = np.minimum(strut, plates)
    solid = np.maximum(solid, np.maximum(0.5 - z, z - 12.2))
    occupancy = _occupancy(solid, spacing[0])
    grey = 12.0 + occupancy * 188.0 + 5.0 * _gaussian_noise(shape, seed, 3)
    data = np.clip(np.rint(grey), 0, 255).astype(np.uint8)
    return Sample("lattice", data, spacing, "gyroid lattice coupon, additive manufacturing (micro-CT uint8)")


def plume(seed: int = 37) -> Sample:
    """A rising, turbulent smoke plume, 88 x 88 x 120 cells of 0.5 mm (float32 density)."""
    shape, spacing = (88, 88, 120), (0.5, 0.5, 0.5)
    x, y, z = _grid(shape, spacing)
    height = z / z.max()
    wobble_x = 2.0 * np.sin(6.0 * height + 0.5)
    wobble_y = 1.5 * np.sin(4.3 * height + 2.0)
    radius = 3.0 + 13.0 * height**0.8
    rho = np.sqrt((x - wobble_x) ** 2 + (y - wobble_y) ** 2)
    envelope = np.exp(-((rho / radius) ** 2)) * np.clip(z / 4.0, 0, 1) * np.clip((z.max() - z) / 8.0, 0, 1)
    turbulence = np.zeros(np.broadcast_shapes(x.shape, y.shape, z.shape))
    for octave, (cell, weight) in enumerate(((8.0, 0.5), (4.0, 0.27), (2.0, 0.15), (1.0, 0.08))):
        turbulence = turbulence + weight * _value_noise(x + 0.0 * z, y, z - 3.0 * octave, cell, seed + octave)
    density = np.clip(envelope * (0.35 + 1.3 * turbulence) - 0.18, 0.0, None) * (1.0 - 0.5 * height)
    density = np.round(density * 4096.0) / 4096.0   # quantised so that the file compresses
    return Sample("plume", density.astype(np.float32), spacing, "combustion-simulation smoke plume (float32 density)")


#: Time steps of the drifting plume (README, "Sequences").
DRIFT_STEPS = 12


def plume_drift(step: int, steps: int = DRIFT_STEPS, seed: int = 37) -> Sample:
    """Time step ``step`` of a smaller smoke plume drifting sideways and rising: 64 x 64 x 88 cells of 0.5 mm.

    Over the steps the column leans 6 mm along +x and its turbulence rises 8 mm, so consecutive steps
    differ the way a simulation's frames do (float32 density, quantised like the plume)."""
    shape, spacing = (64, 64, 88), (0.5, 0.5, 0.5)
    t = step / max(steps - 1, 1)
    x, y, z = _grid(shape, spacing)
    height = z / z.max()
    wobble_x = 2.0 * np.sin(6.0 * height + 0.5 + 1.5 * t) + 6.0 * t * height
    wobble_y = 1.5 * np.sin(4.3 * height + 2.0)
    radius = 2.5 + 9.0 * height**0.8
    rho = np.sqrt((x - wobble_x) ** 2 + (y - wobble_y) ** 2)
    envelope = np.exp(-((rho / radius) ** 2)) * np.clip(z / 4.0, 0, 1) * np.clip((z.max() - z) / 8.0, 0, 1)
    turbulence = np.zeros(np.broadcast_shapes(x.shape, y.shape, z.shape))
    for octave, (cell, weight) in enumerate(((6.0, 0.5), (3.0, 0.3), (1.5, 0.2))):
        turbulence = turbulence + weight * _value_noise(x, y, z - 8.0 * t - 3.0 * octave, cell, seed + octave)
    density = np.clip(envelope * (0.35 + 1.3 * turbulence) - 0.18, 0.0, None) * (1.0 - 0.5 * height)
    density = np.round(density * 4096.0) / 4096.0
    return Sample(f"plume_drift_{step:02d}", density.astype(np.float32), spacing,
                  f"drifting smoke plume, time step {step} of {steps} (float32 density)")


def write_drifting_plume(out_dir, steps: int = DRIFT_STEPS, progress=None) -> list[Path]:
    """The drifting plume's time steps as ``out_dir/step00.nrrd, ...`` (gzip NRRD, one origin for all)."""
    from .nrrd import write_nrrd

    out_dir = Path(out_dir)
    paths = []
    for step in range(steps):
        sample = plume_drift(step, steps)
        shape = np.array(sample.data.shape)
        origin = np.array([-(shape[0] - 1) * sample.spacing_mm[0] / 2, -(shape[1] - 1) * sample.spacing_mm[1] / 2, 0.0])
        path = out_dir / f"step{step:02d}.nrrd"
        write_nrrd(path, sample.data, origin, np.diag(sample.spacing_mm))
        paths.append(path)
        if progress is not None:
            progress(sample.name, path)
    return paths


AMBIENT_K = 300.0
FLAME_PEAK_K = 1950.0     # a hydrocarbon flame's core; about 1900-2000 K is the usual figure (from memory)


def flame(seed: int = 41) -> Sample:
    """A burner flame 64 x 64 x 96 cells of 0.5 mm: temperature (K, uint16), flame tongue below, smoke above."""
    shape, spacing = (64, 64, 96), (0.5, 0.5, 0.5)
    x, y, z = _grid(shape, spacing)
    tip = 24.0                                            # flame length, mm
    s = np.clip(z / tip, 0.0, None)
    sway = 1.2 * np.sin(5.0 * s + 0.7) * s
    rho = np.sqrt((x - sway) ** 2 + (y - 0.6 * sway) ** 2)
    radius = 1.0 + 7.5 * np.clip(s, 1e-6, 1.0) ** 0.35 * np.clip(1.0 - s, 0.0, 1.0) ** 0.55
    turbulence = np.zeros(np.broadcast_shapes(x.shape, y.shape, z.shape))
    for octave, (cell, weight) in enumerate(((6.0, 0.55), (3.0, 0.3), (1.5, 0.15))):
        turbulence = turbulence + weight * _value_noise(x, y, z - 4.0 * octave, cell, seed + octave)
    tongue = np.exp(-((rho / radius) ** 3)) * np.clip(z / 1.5, 0, 1) * np.clip((1.15 - s) / 0.3, 0, 1)
    above = np.clip(z - 0.7 * tip, 0.0, None)
    smoke_radius = 3.0 + 0.35 * above
    smoke = 0.38 * np.exp(-((rho / smoke_radius) ** 2)) * np.exp(-above / 22.0) * np.clip(above / 4.0, 0, 1) \
        * np.clip((z.max() - z) / 6.0, 0, 1)
    heat = np.maximum(tongue * (0.75 + 0.45 * turbulence), smoke * (0.5 + 1.0 * turbulence))
    kelvin = AMBIENT_K + (FLAME_PEAK_K - AMBIENT_K) * np.clip(heat, 0.0, 1.0)
    return Sample("flame", np.round(kelvin).astype(np.uint16), spacing,
                  "kiln burner flame and its smoke (temperature in kelvin, uint16)")


GENERATORS = {"figurine": figurine, "lattice": lattice, "plume": plume, "flame": flame}


def generate(name: str) -> Sample:
    return GENERATORS[name]()


def write_demo_volumes(out_dir, names=None, progress=None) -> list[Path]:
    """Write the demo volumes as gzip NRRD files into ``out_dir``; returns the paths."""
    from .nrrd import write_nrrd

    out_dir = Path(out_dir)
    paths = []
    for name in names or GENERATORS:
        sample = generate(name)
        path = out_dir / f"{name}.nrrd"
        shape = np.array(sample.data.shape)
        origin = np.array([-(shape[0] - 1) * sample.spacing_mm[0] / 2, -(shape[1] - 1) * sample.spacing_mm[1] / 2, 0.0])
        write_nrrd(path, sample.data, origin, np.diag(sample.spacing_mm))
        paths.append(path)
        if progress is not None:
            progress(name, path)
    return paths
