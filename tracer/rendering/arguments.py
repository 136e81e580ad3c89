"""The scene as the plain arrays and integer codes the path kernel takes (strings never reach compiled code)."""

from __future__ import annotations

import numpy as np

from ..scene import Scene

SCATTERING_CODES = {"medium": 0, "interface": 1, "graded": 2}
ENVIRONMENT_CODES = {"constant": 0, "sky": 1, "image": 2}
LIGHT_CODES = {"directional": 0, "point": 1}
ESTIMATOR_CODES = {"march": 0, "track": 1}


def kernel_arguments(scene: Scene, skipping: bool = True, roulette: bool = True) -> tuple:
    """The scene as the plain arrays and codes of :func:`tracer._kernels.integrate.render_rows` (before rows/samples/acc).

    The macrocell grid of the current transfer function is built every time (exact: empty cells
    have zero extinction everywhere); ``skipping`` decides whether rays step over empty cells;
    ``roulette`` whether shadow and environment rays play Russian roulette (off only for measurements).
    """
    from .._kernels.integrate import ROULETTE_DEPTH
    from .accumulate import extras_offset

    volume = scene.volume
    low, high = volume.value_range
    transfer = scene.transfer_function.bake(low, high)
    cells = macrocells(volume, transfer)
    settings = scene.settings
    lights = np.zeros((len(scene.lights), 7))
    for index, light in enumerate(scene.lights):
        lights[index, 0] = LIGHT_CODES[light.kind]
        lights[index, 1:4] = light.vector
        lights[index, 4:7] = light.power
    environment = scene.environment
    image = scene.environment_image if scene.environment_image is not None else np.zeros((2, 2, 3), np.float32)
    background = np.zeros(3) if environment.background is None else np.asarray(environment.background, np.float64)
    value_range = max(high - low, 1e-12)
    gradient_scale = float(np.mean(volume.spacing)) / (value_range * settings.interface_gradient)
    return (
        volume.to_arrays(), transfer, cells, scene.camera.to_array(), lights,
        ENVIRONMENT_CODES[environment.kind], np.asarray(environment.colors, dtype=np.float64),
        np.ascontiguousarray(image, dtype=np.float32), background, environment.background is None,
        SCATTERING_CODES[settings.scattering], settings.events, np.asarray(settings.feature_levels, dtype=np.float64),
        float(settings.step_mm), float(settings.phase_g), gradient_scale, ROULETTE_DEPTH if roulette else np.inf,
        extras_offset(len(settings.feature_levels), bool(settings.features)),
    ), bool(skipping)


def uses_transport_kernel(scene: Scene) -> bool:
    """Whether the scene needs :func:`tracer._kernels.transport.render_rows_transport` (more than one bounce, or
    the "track" estimator); the default (march, one bounce) runs the leaner ``render_rows``."""
    return scene.settings.bounces > 1 or scene.settings.estimator != "march"


def transport_arguments(scene: Scene, arguments: tuple) -> tuple:
    """The arguments ``render_rows_transport`` takes after those of :func:`kernel_arguments` (``arguments``):
    bounces, the estimator's code and tracking's finer majorant grid."""
    from .._kernels.geometry import TRACK_CELL

    track_cells = macrocells(scene.volume, arguments[1], TRACK_CELL)
    return int(scene.settings.bounces), ESTIMATOR_CODES[scene.settings.estimator], track_cells


def macrocells(volume, transfer, size: int | None = None) -> np.ndarray:
    """(ceil((nx-1)/size), ...) float32: the largest extinction any point of each size^3-voxel cell of ``volume``
    can take (default the march's 8^3 macrocells), read from its bricks.

    Cell c covers voxel indices [size c, size c + size] per axis (the trilinear field inside it is a convex
    combination of those voxels), all inside one brick (past the field's end a brick repeats its last voxel,
    which changes no minimum or maximum); its value is the largest table entry over the table interval
    spanning the cell's [min, max] value, so a cell holding 0 has zero extinction everywhere inside it, exactly.
    ``size`` divides BRICK (CELL for the march's skipping, TRACK_CELL for tracking).
    """
    from .._kernels.geometry import CELL
    from .._kernels.sampling import BRICK

    size = CELL if size is None else int(size)
    shape = tuple(max(1, -(-(n - 1) // size)) for n in volume.shape)
    bricks = volume.bricks
    per = BRICK // size
    extinction, lookup = transfer.extinction, transfer.lookup
    n = extinction.shape[0]
    entries = np.append(extinction, np.float32(0.0))
    out = np.empty(shape, np.float32)
    for brick_row in range(bricks.shape[0]):       # a layer of bricks at a time: the temporaries stay small
        cells = slice(brick_row * per, min(brick_row * per + per, shape[0]))
        grid = (per, bricks.shape[1] * per, bricks.shape[2] * per)
        low, high = np.empty(grid, bricks.dtype), np.empty(grid, bricks.dtype)
        for da, db, dc in np.ndindex(per, per, per):
            block = bricks[brick_row, :, :, da * size:da * size + size + 1, db * size:db * size + size + 1,
                           dc * size:dc * size + size + 1]
            low[da, db::per, dc::per] = block.min(axis=(2, 3, 4))
            high[da, db::per, dc::per] = block.max(axis=(2, 3, 4))
        kept = (slice(0, cells.stop - cells.start), slice(0, shape[1]), slice(0, shape[2]))
        low, high = low[kept], high[kept]

        def position(values):           # the kernels' table_position, in the same float64 operations
            return np.minimum(np.maximum((values.astype(np.float64) - lookup[0]) * lookup[1], 0.0), n - 1.0)

        first = np.floor(position(low)).astype(np.int64).ravel()
        last = np.minimum(np.ceil(position(high)).astype(np.int64), n - 1).ravel()
        bounds = np.empty(2 * first.size, np.int64)
        bounds[0::2], bounds[1::2] = first, last + 1          # each cell's entries [first, last]
        largest = np.maximum.reduceat(entries, bounds)[0::2]
        out[cells] = np.maximum(largest, 0.0).astype(np.float32).reshape(low.shape)
    return out
