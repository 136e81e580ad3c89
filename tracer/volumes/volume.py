"""Volumes: a float32 scalar field on a grid, with its index -> world affine.

Conventions (README, "Conventions"): arrays are indexed ``[i, j, k] = [x, y, z]``; the voxel at
index (i, j, k) sits at ``origin + i*d0 + j*d1 + k*d2`` in world millimetres; the field is
trilinear between voxel centres and defined on the box they span (index 0 to n-1 per axis).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import NamedTuple

import numpy as np

from ..errors import UserError

#: Memory per voxel besides the file's own for a float32 field: the field and its bricked copy (about 1.42 x).
BYTES_PER_VOXEL = 10
#: Integer types kept as they are (every value exact in float32, so renders do not change): the field and its
#: bricks stay in the file's type, 2.4 x the file's bytes instead of 9.7 bytes per voxel.
KEPT_DTYPES = ("uint8", "int8", "uint16", "int16")


def bytes_per_voxel(dtype) -> float:
    """What a voxel of a file of ``dtype`` costs once loaded and bricked (the memory check counts this)."""
    dtype = np.dtype(dtype)
    if dtype.newbyteorder("=").name in KEPT_DTYPES:
        return 2.5 * dtype.itemsize           # the array and its bricks (729 / 512 of it), rounded up
    return dtype.itemsize + BYTES_PER_VOXEL
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


def check_budget(path, shape, dtype, budget: int) -> None:
    """Refuse a volume of ``shape`` and file ``dtype`` whose footprint once loaded and bricked
    (:func:`bytes_per_voxel`) exceeds ``budget``, before reading it."""
    n_voxels = int(np.prod(shape))
    n_bytes = int(n_voxels * bytes_per_voxel(dtype))
    if n_bytes > budget:
        raise UserError(f"{path}: shape {tuple(int(n) for n in shape)} needs {n_bytes / 2**20:.0f} MiB, over the memory "
                        f"budget of {budget / 2**20:.0f} MiB (set TRACER_MEMORY_BUDGET_MB to raise it)")


class VolumeArrays(NamedTuple):
    """What kernels see of a volume.

    field : (nx, ny, nz) float32, C-contiguous
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


@dataclass(frozen=True, eq=False)
class Volume:
    """A scalar volume in world millimetres.

    Parameters
    ----------
    data : ndarray, shape (nx, ny, nz)
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
    """

    data: np.ndarray
    origin: np.ndarray = field(default_factory=lambda: np.zeros(3))
    directions: np.ndarray = field(default_factory=lambda: np.eye(3))
    source: str = "<array>"
    source_dtype: str = "float32"
    space: str | None = None
    source_format: str = "array"
    details: tuple = ()

    def __post_init__(self):
        data = np.asarray(self.data)
        kept = data.dtype.newbyteorder("=").name in KEPT_DTYPES
        data = np.ascontiguousarray(data, dtype=data.dtype.newbyteorder("=") if kept else np.float32)
        if data.ndim != 3:
            raise UserError(f"{self.source}: a volume must be 3-D, got shape {data.shape}")
        if min(data.shape) < 2:
            raise UserError(f"{self.source}: every axis needs at least 2 samples, got shape {data.shape}")
        object.__setattr__(self, "data", data)
        object.__setattr__(self, "origin", np.asarray(self.origin, dtype=np.float64).reshape(3))
        object.__setattr__(self, "directions", np.asarray(self.directions, dtype=np.float64).reshape(3, 3))
        from .orientation import normalise_space

        object.__setattr__(self, "space", normalise_space(self.space))

    @property
    def patient_space(self) -> bool:
        """Whether the file names a patient (or scanner) space, i.e. the volume is a medical scan."""
        from .orientation import PATIENT_SPACES

        return self.space in PATIENT_SPACES

    # geometry -------------------------------------------------------------------------
    @property
    def shape(self) -> tuple[int, int, int]:
        return tuple(int(n) for n in self.data.shape)

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
        return float(self.data.min()), float(self.data.max())

    @property
    def bricks(self) -> np.ndarray:
        """The field in 8^3-voxel bricks with a shared face (built once per volume, then kept)."""
        cached = self.__dict__.get("_bricks")
        if cached is None:
            from .._kernels.sampling import BRICK, make_bricks

            grid = tuple(max(1, -(-(n - 1) // BRICK)) for n in self.shape)
            cached = np.empty(grid + (BRICK + 1,) * 3, self.data.dtype)
            make_bricks(self.data, cached)
            object.__setattr__(self, "_bricks", cached)
        return cached

    def to_arrays(self) -> VolumeArrays:
        matrix = self.index_to_world_matrix
        inverse = np.linalg.inv(matrix)
        return VolumeArrays(
            field=self.data,
            world_to_index=np.ascontiguousarray(inverse[:3, :]),
            index_to_world=np.ascontiguousarray(matrix[:3, :]),
            gradient_to_world=np.ascontiguousarray(np.linalg.inv(self.directions.T).T),
            bricks=self.bricks,
            shape=np.array(self.shape, dtype=np.int64),
        )


def count_nonfinite(data: np.ndarray) -> int:
    if data.dtype.kind != "f":
        return 0
    return int(data.size - np.count_nonzero(np.isfinite(data)))
