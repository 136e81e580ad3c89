"""Volumes: a float32 scalar field on a grid, with its index -> world affine.

Conventions (README, "Conventions"): arrays are indexed ``[i, j, k] = [x, y, z]``; the voxel at
index (i, j, k) sits at ``origin + i*d0 + j*d1 + k*d2`` in world millimetres; the field is
trilinear between voxel centres and defined on the box they span (index 0 to n-1 per axis).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import NamedTuple

import numpy as np

from ..errors import UserError

#: Integer types kept as they are (every value exact in float32, so renders do not change); other types are
#: held as float32.
KEPT_DTYPES = ("uint8", "int8", "uint16", "int16")
#: Bricks hold 9^3 samples per 8^3 voxels (1.424 x the field), rounded up for the slab being read.
BRICK_OVERHEAD = 1.5


def bytes_per_voxel(dtype, streamed: bool = False) -> float:
    """What a voxel of a file of ``dtype`` costs while it is loaded and once it is bricked (the memory check
    counts this). A loaded volume keeps only its bricks, in :func:`storage_dtype`; a reader that reads
    planes (``streamed``: ``.npy``, raw and gzip NRRD, zarr, HDF5) needs nothing more, the others hold the
    file's whole array (and its float32 copy, for types not kept) until it is bricked."""
    dtype = np.dtype(dtype)
    held = BRICK_OVERHEAD * storage_dtype(dtype).itemsize
    if streamed:
        return held
    converted = 0 if dtype.newbyteorder("=") == storage_dtype(dtype) else storage_dtype(dtype).itemsize
    return held + dtype.itemsize + converted


#: File dtypes a volume may have (NRRD ``type`` values by the numpy dtype they read as; ``.npy`` likewise).
ACCEPTED_DTYPES = ("int8", "uint8", "int16", "uint16", "int32", "uint32", "float32", "float64")


@dataclass(frozen=True)
class RawVolume:
    """What a volume file holds: the array in [x, y, z] order and its geometry (what every reader returns)."""

    data: np.ndarray          # (nx, ny, nz), file dtype (or float32 after a rescale), native byte order
    origin: np.ndarray        # (3,) mm
    directions: np.ndarray    # (3, 3) row a = world step (mm) of index axis a
    dtype: str
    space: str | None = None  # the header's ``space`` field, as written
    format: str = "NRRD"      # the source format, for ``tracer info`` and the render's meta
    details: tuple = ()       # (label, text) pairs the format adds to ``tracer info`` (DICOM: modality, rescale, ...)


def check_budget(path, shape, dtype, budget: int, streamed: bool = False) -> None:
    """Refuse a volume of ``shape`` and file ``dtype`` whose footprint while loading and once bricked
    (:func:`bytes_per_voxel`) exceeds ``budget``, before reading it."""
    n_voxels = int(np.prod(shape))
    n_bytes = int(n_voxels * bytes_per_voxel(dtype, streamed))
    if n_bytes > budget:
        raise UserError(f"{path}: shape {tuple(int(n) for n in shape)} needs {n_bytes / 2**20:.0f} MiB, over the memory "
                        f"budget of {budget / 2**20:.0f} MiB (set TRACER_MEMORY_BUDGET_MB to raise it)")


class VolumeArrays(NamedTuple):
    """What kernels see of a volume.

    field : (nx, ny, nz), C-contiguous; the kernels read ``bricks`` only (a volume held as bricks passes a
        (2, 2, 2) placeholder of the same type here)
    world_to_index : (3, 4) float64; index = A @ [x, y, z, 1]
    index_to_world : (3, 4) float64; world = B @ [i, j, k, 1]
    gradient_to_world : (3, 3) float64; world gradient = G @ index gradient (G = inverse(M).T)
    bricks : (gx, gy, gz, 9, 9, 9) float32; the same field in 8^3-voxel bricks (what the renderer samples)
    shape : (3,) int64; the field's shape
    """

    field: np.ndarray
    world_to_index: np.ndarray
    index_to_world: np.ndarray
    gradient_to_world: np.ndarray
    bricks: np.ndarray
    shape: np.ndarray


class Volume:
    """A scalar volume in world millimetres.

    Parameters
    ----------
    data : ndarray, shape (nx, ny, nz), optional
        Scalar values; stored C-contiguous, as float32 except for 8- and 16-bit integers
        (:data:`KEPT_DTYPES`), which are kept as they are (exact in float32: renders do not change).
    origin : (3,) mm
        World position of voxel (0, 0, 0).
    directions : (3, 3) mm
        Row ``a`` is the world step between neighbouring voxels along index axis ``a``
        (NRRD ``space directions``; a diagonal of spacings for axis-aligned grids).
    source : str
        Where it came from, for messages and metadata.
    source_dtype : str
        The dtype in the file, before conversion to float32.
    space : str, optional
        The file's NRRD ``space`` (canonical name, e.g. ``"left-posterior-superior"``): what the world
        axes mean. Geometry comes from ``directions`` alone; see :mod:`.orientation`.
    bricks, shape : optional
        Instead of ``data``: the field already in the renderer's bricks (``bricks.fill_brick_layer``'s layout)
        and its shape. :func:`~tracer.volumes.loading.load_volume` builds volumes this way and keeps no
        plain copy (a volume then costs its bricks, about 1.42 x the field's bytes); :attr:`data`
        assembles the plain array from the bricks on each use.
    """

    def __init__(self, data=None, origin=None, directions=None, source: str = "<array>",
                 source_dtype: str = "float32", space: str | None = None, source_format: str = "array",
                 details: tuple = (), *, bricks: np.ndarray | None = None, shape=None):
        from .orientation import normalise_space

        self.source = source
        self.source_dtype = source_dtype
        self.source_format = source_format
        self.details = tuple(details)
        self.origin = np.zeros(3) if origin is None else np.asarray(origin, dtype=np.float64).reshape(3)
        self.directions = np.eye(3) if directions is None else np.asarray(directions, dtype=np.float64).reshape(3, 3)
        self.space = normalise_space(space)
        self._value_range = None
        if (data is None) == (bricks is None):
            raise TypeError("Volume needs either data or bricks (with shape)")
        if data is not None:
            data = np.asarray(data)
            data = np.ascontiguousarray(data, dtype=storage_dtype(data.dtype))
            self._data, self._bricks, self._shape = data, None, data.shape
        else:
            self._data, self._bricks, self._shape = None, bricks, tuple(int(n) for n in shape)
        if len(self._shape) != 3:
            raise UserError(f"{self.source}: a volume must be 3-D, got shape {self._shape}")
        if min(self._shape) < 2:
            raise UserError(f"{self.source}: every axis needs at least 2 samples, got shape {self._shape}")

    @property
    def data(self) -> np.ndarray:
        """The field as a plain (nx, ny, nz) array (for a volume held as bricks only, a new array each time)."""
        if self._data is not None:
            return self._data
        from .bricks import unbrick

        return unbrick(self._bricks, self._shape)

    @property
    def dtype(self) -> np.dtype:
        """The stored value type (the file's for :data:`KEPT_DTYPES`, else float32)."""
        return (self._data if self._data is not None else self._bricks).dtype

    @property
    def patient_space(self) -> bool:
        """Whether the file names a patient (or scanner) space, i.e. the volume is a medical scan."""
        from .orientation import PATIENT_SPACES

        return self.space in PATIENT_SPACES

    # geometry -------------------------------------------------------------------------
    @property
    def shape(self) -> tuple[int, int, int]:
        return tuple(int(n) for n in self._shape)

    @property
    def spacing(self) -> np.ndarray:
        """(3,) mm between neighbouring voxels along each index axis."""
        return np.linalg.norm(self.directions, axis=1)

    @property
    def index_to_world_matrix(self) -> np.ndarray:
        """(4, 4) affine taking homogeneous [i, j, k, 1] to world mm."""
        matrix = np.eye(4)
        matrix[:3, :3] = self.directions.T
        matrix[:3, 3] = self.origin
        return matrix

    def index_to_world(self, index) -> np.ndarray:
        index = np.asarray(index, dtype=np.float64)
        return index @ self.directions + self.origin

    def world_to_index(self, world) -> np.ndarray:
        world = np.asarray(world, dtype=np.float64)
        return np.linalg.solve(self.directions.T, (world - self.origin).T).T

    @property
    def corners(self) -> np.ndarray:
        """(8, 3) world positions of the corners of the field's box (the outer voxel centres)."""
        n = np.array(self.shape) - 1
        index = np.array([[a, b, c] for a in (0, n[0]) for b in (0, n[1]) for c in (0, n[2])], dtype=np.float64)
        return self.index_to_world(index)

    @property
    def center(self) -> np.ndarray:
        return self.index_to_world((np.array(self.shape) - 1) / 2.0)

    @property
    def extent_mm(self) -> np.ndarray:
        """(3,) physical length of the field's box along each index axis."""
        return (np.array(self.shape) - 1) * self.spacing

    @property
    def diagonal_mm(self) -> float:
        """Length of the box's longest diagonal."""
        corners = self.corners
        return float(max(np.linalg.norm(corners[a] - corners[7 - a]) for a in range(4)))

    @property
    def bounding_radius(self) -> float:
        return float(np.max(np.linalg.norm(self.corners - self.center, axis=1)))

    @property
    def value_range(self) -> tuple[float, float]:
        """(min, max) of the voxels (the bricks hold every voxel and only repeats besides)."""
        if self._value_range is None:
            values = self._data if self._data is not None else self._bricks
            self._value_range = float(values.min()), float(values.max())
        return self._value_range

    @property
    def bricks(self) -> np.ndarray:
        """The field in 8^3-voxel bricks with a shared face (built once per volume, then kept)."""
        if self._bricks is None:
            from .._kernels.sampling import BRICK
            from .bricks import fill_brick_layer

            bricks = np.empty(brick_grid(self.shape), self._data.dtype)
            n = self.shape[0]
            for layer in range(bricks.shape[0]):          # the loader's layers, cut from the array in place
                fill_brick_layer(self._data[layer * BRICK:min(layer * BRICK + BRICK, n - 1) + 1], 0, layer,
                                 np.array(self.shape, np.int64), bricks)
            self._bricks = bricks
        return self._bricks

    def to_arrays(self) -> VolumeArrays:
        matrix = self.index_to_world_matrix
        inverse = np.linalg.inv(matrix)
        return VolumeArrays(
            field=self._data if self._data is not None else np.zeros((2, 2, 2), self.dtype),
            world_to_index=np.ascontiguousarray(inverse[:3, :]),
            index_to_world=np.ascontiguousarray(matrix[:3, :]),
            gradient_to_world=np.ascontiguousarray(np.linalg.inv(self.directions.T).T),
            bricks=self.bricks,
            shape=np.array(self.shape, dtype=np.int64),
        )


def storage_dtype(dtype) -> np.dtype:
    """The type a volume of file ``dtype`` is held in: its own (native order) for :data:`KEPT_DTYPES`, else float32."""
    dtype = np.dtype(dtype).newbyteorder("=")
    return dtype if dtype.name in KEPT_DTYPES else np.dtype(np.float32)


def brick_grid(shape) -> tuple:
    """The shape of the bricks array of a field of ``shape``: (gx, gy, gz, 9, 9, 9)."""
    from .._kernels.sampling import BRICK

    return tuple(max(1, -(-(int(n) - 1) // BRICK)) for n in shape) + (BRICK + 1,) * 3


def count_nonfinite(data: np.ndarray) -> int:
    if data.dtype.kind != "f":
        return 0
    return int(data.size - np.count_nonzero(np.isfinite(data)))
