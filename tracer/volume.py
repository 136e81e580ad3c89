"""Volumes: a float32 scalar field on a grid, with its index -> world affine.

Conventions (README, "Conventions"): arrays are indexed ``[i, j, k] = [x, y, z]``; the voxel at
index (i, j, k) sits at ``origin + i*d0 + j*d1 + k*d2`` in world millimetres; the field is
trilinear between voxel centres and defined on the box they span (index 0 to n-1 per axis).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import NamedTuple

import numpy as np

from .config import memory_budget

#: Memory per voxel besides the file's own: the float32 field and its bricked copy (about 1.42 x).
BYTES_PER_VOXEL = 10
from .errors import UserError


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
        Scalar values; stored as C-contiguous float32.
    origin : (3,) mm
        World position of voxel (0, 0, 0).
    directions : (3, 3) mm
        Row ``a`` is the world step between neighbouring voxels along index axis ``a``
        (NRRD ``space directions``; a diagonal of spacings for axis-aligned grids).
    source : str
        Where it came from, for messages and metadata.
    source_dtype : str
        The dtype in the file, before conversion to float32.
    """

    data: np.ndarray
    origin: np.ndarray = field(default_factory=lambda: np.zeros(3))
    directions: np.ndarray = field(default_factory=lambda: np.eye(3))
    source: str = "<array>"
    source_dtype: str = "float32"

    def __post_init__(self):
        data = np.ascontiguousarray(self.data, dtype=np.float32)
        if data.ndim != 3:
            raise UserError(f"{self.source}: a volume must be 3-D, got shape {data.shape}")
        if min(data.shape) < 2:
            raise UserError(f"{self.source}: every axis needs at least 2 samples, got shape {data.shape}")
        object.__setattr__(self, "data", data)
        object.__setattr__(self, "origin", np.asarray(self.origin, dtype=np.float64).reshape(3))
        object.__setattr__(self, "directions", np.asarray(self.directions, dtype=np.float64).reshape(3, 3))

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
            from ._kernels.sampling import BRICK, make_bricks

            grid = tuple(max(1, -(-(n - 1) // BRICK)) for n in self.shape)
            cached = np.empty(grid + (BRICK + 1,) * 3, np.float32)
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


def load_volume(path, *, spacing_mm=None, origin_mm=None, budget_bytes: int | None = None,
                allow_nonfinite: bool = False) -> Volume:
    """Load a ``.nrrd``, ``.nhdr`` or ``.npy`` volume as float32 in [x, y, z] order.

    Parameters
    ----------
    path : str or Path
    spacing_mm, origin_mm : 3 numbers, optional
        Geometry for ``.npy`` files (defaults 1 mm and 0); NRRD files carry their own.
    budget_bytes : int, optional
        Refuse volumes that need more memory than this (default: :func:`tracer.config.memory_budget`).
    allow_nonfinite : bool
        Accept NaN or Inf voxels (``tracer info`` reports them); rendering refuses them.

    Raises
    ------
    UserError
        One line naming the file and the problem.
    """
    path = Path(path)
    budget = memory_budget() if budget_bytes is None else int(budget_bytes)
    suffix = path.suffix.lower()
    if suffix in (".nrrd", ".nhdr"):
        from .io.nrrd import read_nrrd

        if spacing_mm is not None or origin_mm is not None:
            raise UserError(f"{path}: spacing_mm and origin_mm apply to .npy volumes only; NRRD carries its own geometry")
        raw = read_nrrd(path, budget)
        data, origin, directions, dtype = raw.data, raw.origin, raw.directions, raw.dtype
    elif suffix == ".npy":
        data, dtype = _read_npy(path, budget)
        spacing = np.ones(3) if spacing_mm is None else np.asarray(spacing_mm, dtype=np.float64)
        if spacing.shape != (3,) or np.any(~np.isfinite(spacing)) or np.any(spacing <= 0):
            raise UserError(f"{path}: spacing_mm must be three positive numbers, got {np.asarray(spacing_mm).tolist()}")
        directions = np.diag(spacing)
        origin = np.zeros(3) if origin_mm is None else np.asarray(origin_mm, dtype=np.float64)
    else:
        raise UserError(f"{path}: unknown volume format {path.suffix!r}; use .nrrd, .nhdr or .npy")

    if not allow_nonfinite:
        bad = count_nonfinite(data)
        if bad:
            raise UserError(f"{path}: data: {bad} voxels are NaN or Inf; fix or mask them before rendering")
    return Volume(data=data, origin=origin, directions=directions, source=str(path), source_dtype=dtype)


def count_nonfinite(data: np.ndarray) -> int:
    if data.dtype.kind != "f":
        return 0
    return int(data.size - np.count_nonzero(np.isfinite(data)))


def _read_npy(path: Path, budget: int) -> tuple[np.ndarray, str]:
    from .io.nrrd import ACCEPTED_DTYPES

    try:
        mapped = np.load(path, mmap_mode="r", allow_pickle=False)
    except FileNotFoundError:
        raise UserError(f"{path}: file not found")
    except (ValueError, OSError, EOFError) as error:
        raise UserError(f"{path}: not a readable .npy array: {str(error).splitlines()[0] if str(error) else type(error).__name__}")
    if mapped.ndim != 3:
        raise UserError(f"{path}: a volume must be 3-D, this array has shape {mapped.shape}")
    if min(mapped.shape) < 2:
        raise UserError(f"{path}: every axis needs at least 2 samples, got shape {mapped.shape}")
    name = mapped.dtype.newbyteorder("=").name
    if name not in ACCEPTED_DTYPES:
        raise UserError(f"{path}: dtype {mapped.dtype} is not supported; use one of {', '.join(ACCEPTED_DTYPES)}")
    n_bytes = mapped.size * (mapped.dtype.itemsize + BYTES_PER_VOXEL)
    if n_bytes > budget:
        raise UserError(
            f"{path}: shape {mapped.shape} needs {n_bytes / 2**20:.0f} MiB, over the memory budget of "
            f"{budget / 2**20:.0f} MiB (set TRACER_MEMORY_BUDGET_MB to raise it)"
        )
    data = np.array(mapped, dtype=mapped.dtype.newbyteorder("="))
    del mapped
    return data, name


@dataclass(frozen=True)
class VolumeSummary:
    """What ``tracer info`` prints."""

    shape: tuple[int, int, int]
    dtype: str
    spacing_mm: tuple[float, float, float]
    extent_mm: tuple[float, float, float]
    origin_mm: tuple[float, float, float]
    value_min: float
    value_max: float
    percentiles: dict[str, float]
    histogram_counts: np.ndarray
    histogram_edges: np.ndarray
    memory_bytes: int
    n_nonfinite: int


def summarize(volume: Volume, n_bins: int = 24) -> VolumeSummary:
    """Shape, geometry, value range, percentiles and a histogram of the finite voxels."""
    data = volume.data
    finite = data[np.isfinite(data)] if count_nonfinite(data) else data.ravel()
    if finite.size == 0:
        raise UserError(f"{volume.source}: data: no finite voxels")
    levels = (1, 5, 25, 50, 75, 95, 99)
    values = np.percentile(finite, levels)
    lo, hi = float(finite.min()), float(finite.max())
    counts, edges = np.histogram(finite, bins=n_bins, range=(lo, hi if hi > lo else lo + 1))
    return VolumeSummary(
        shape=volume.shape,
        dtype=volume.source_dtype,
        spacing_mm=tuple(float(s) for s in volume.spacing),
        extent_mm=tuple(float(e) for e in volume.extent_mm),
        origin_mm=tuple(float(o) for o in volume.origin),
        value_min=lo,
        value_max=hi,
        percentiles={f"p{p}": float(v) for p, v in zip(levels, values)},
        histogram_counts=counts,
        histogram_edges=edges,
        memory_bytes=int(data.nbytes),
        n_nonfinite=count_nonfinite(data),
    )
