"""Safe reading of NRRD volumes (attached ``.nrrd`` and detached ``.nhdr``).

Checks happen on the header before any data is read: dimension, sizes, type, encoding,
the memory budget, and that a detached data file stays inside the header's folder
(pynrrd itself follows any relative or absolute path). Field names follow the NRRD
file format specification (teem): ``sizes``, ``type``, ``encoding``, ``space directions``,
``space origin``, ``spacings``, ``data file``.
"""

from __future__ import annotations

import os
import zlib
from pathlib import Path

import numpy as np

from ..errors import UserError
from .bricking import Slabs
from .volume import ACCEPTED_DTYPES, RawVolume, bytes_per_voxel

ENCODINGS = ("raw", "gzip", "gz", "bzip2", "bz2", "ascii", "text", "txt")


def read_nrrd(path: Path, budget_bytes: int) -> RawVolume:
    """Read a 3-D scalar NRRD file, refusing what cannot be a volume before reading data."""
    import nrrd

    path = Path(path)
    try:
        header = nrrd.read_header(str(path))
    except FileNotFoundError:
        raise UserError(f"{path}: file not found")
    except (nrrd.NRRDError, ValueError, KeyError, UnicodeDecodeError) as error:
        raise UserError(f"{path}: not a readable NRRD header: {_reason(error)}")
    except OSError as error:
        raise UserError(f"{path}: cannot read: {error.strerror or error}")

    for required in ("type", "dimension", "sizes", "encoding"):
        if required not in header:
            raise UserError(f"{path}: {required}: missing (a field the NRRD format requires)")
    dimension = int(header["dimension"])
    sizes = [int(s) for s in np.atleast_1d(header["sizes"])]
    if dimension != len(sizes):
        raise UserError(f"{path}: sizes: dimension is {dimension} but sizes lists {len(sizes)} values {sizes}")
    if dimension != 3:
        raise UserError(f"{path}: dimension: a volume must be 3-D, this file is {dimension}-D (sizes {sizes})")
    if min(sizes) < 2:
        raise UserError(f"{path}: sizes: every axis needs at least 2 samples, got {sizes}")

    type_name = str(header.get("type", ""))
    if type_name not in nrrd.reader._TYPEMAP_NRRD2NUMPY:
        raise UserError(f"{path}: type: unknown or unsupported NRRD type {type_name!r}")
    encoding = str(header.get("encoding", "")).lower()
    if encoding not in ENCODINGS:
        raise UserError(f"{path}: encoding: unknown or unsupported encoding {encoding!r}")
    try:
        dtype = np.dtype(nrrd.reader._determine_datatype(header))
    except (nrrd.NRRDError, KeyError, TypeError, ValueError) as error:
        raise UserError(f"{path}: endian: {_reason(error)}")
    if dtype.name.replace(">", "").replace("<", "") not in ACCEPTED_DTYPES:
        raise UserError(f"{path}: type: {type_name!r} is not supported; use one of {', '.join(ACCEPTED_DTYPES)}")

    streamed = encoding in ("raw", "gzip", "gz") and not any(
        int(header.get(key, 0) or 0) for key in ("byte skip", "byteskip", "line skip", "lineskip"))
    n_bytes = int(np.prod(sizes) * bytes_per_voxel(dtype, streamed))
    if n_bytes > budget_bytes:
        raise UserError(
            f"{path}: sizes: {sizes} needs {n_bytes / 2**20:.0f} MiB, over the memory budget of "
            f"{budget_bytes / 2**20:.0f} MiB (set TRACER_MEMORY_BUDGET_MB to raise it)"
        )

    data_file = header.get("data file", header.get("datafile"))
    if data_file is not None:
        _check_detached(path, str(data_file))

    origin, directions = _geometry(path, header)
    space = header.get("space")
    space = None if space is None else str(space)
    if streamed:
        data_path = path if data_file is None else path.parent / str(data_file)
        slabs = _planes(path, data_path, data_file is None, tuple(sizes), dtype, encoding != "raw")
        return RawVolume(data=slabs, origin=origin, directions=directions, dtype=dtype.newbyteorder("=").name,
                         space=space)

    try:
        data, _ = nrrd.read(str(path), index_order="F")
    except FileNotFoundError as error:
        raise UserError(f"{path}: data file: {error.filename or data_file} not found")
    except (nrrd.NRRDError, ValueError, KeyError, EOFError, zlib.error) as error:
        raise UserError(f"{path}: data: cannot read the voxels: {_reason(error)}")
    except OSError as error:
        raise UserError(f"{path}: data: cannot read the voxels: {_reason(error)}")
    if tuple(data.shape) != tuple(sizes):
        raise UserError(f"{path}: data: read shape {data.shape} does not match sizes {sizes}")
    data = data.astype(data.dtype.newbyteorder("="), copy=False)
    return RawVolume(data=data, origin=origin, directions=directions, dtype=data.dtype.name, space=space)


def _planes(path: Path, data_path: Path, attached: bool, sizes: tuple, dtype: np.dtype, compressed: bool) -> Slabs:
    """The voxels of a raw or gzip NRRD as z planes (x varies fastest in the file), read forward as asked."""
    import gzip

    import nrrd

    plane = sizes[0] * sizes[1]
    state = {}

    def read(start: int, stop: int) -> np.ndarray:
        try:
            return _read_planes(start, stop)
        except BaseException:
            if "raw" in state:
                state.pop("raw").close()
            raise

    def _read_planes(start: int, stop: int) -> np.ndarray:
        try:
            if start == 0:
                handle = open(data_path, "rb")
                state["raw"] = handle
                if attached:
                    nrrd.read_header(handle)          # leaves the handle at the first byte of data
                state["stream"] = gzip.GzipFile(fileobj=handle) if compressed else handle
            wanted = (stop - start) * plane * dtype.itemsize
            chunk = state["stream"].read(wanted)
            if len(chunk) != wanted:
                raise UserError(f"{path}: data: the file ends before its sizes {list(sizes)} are filled (truncated?)")
            if stop == sizes[2] and state["stream"].read(1):
                raise UserError(f"{path}: data: the file holds more voxels than its sizes {list(sizes)} say")
        except FileNotFoundError as error:
            raise UserError(f"{path}: data file: {error.filename} not found")
        except (OSError, EOFError, zlib.error) as error:
            raise UserError(f"{path}: data: cannot read the voxels: {_reason(error)}")
        if stop == sizes[2]:
            state.pop("raw").close()
        values = np.frombuffer(chunk, dtype=dtype).astype(dtype.newbyteorder("="), copy=False)
        return values.reshape((sizes[0], sizes[1], stop - start), order="F")

    return Slabs(sizes, dtype.newbyteorder("="), 2, read)


def _check_detached(path: Path, data_file: str) -> None:
    """Refuse a detached data file that resolves outside the header's folder."""
    if data_file.startswith("LIST") or "%" in data_file or " " in data_file.strip():
        raise UserError(f"{path}: data file: multi-file data ({data_file!r}) is not supported")
    folder = os.path.realpath(path.parent)
    target = os.path.realpath(os.path.join(folder, data_file))
    if os.path.commonpath([folder, target]) != folder:
        raise UserError(
            f"{path}: data file: {data_file!r} lies outside the header's folder; refused "
            "(move the data next to the header)"
        )


def _geometry(path: Path, header: dict) -> tuple[np.ndarray, np.ndarray]:
    """Origin (3,) and per-axis direction rows (3, 3), in mm, from the header."""
    if "space directions" in header:
        directions = np.asarray(header["space directions"], dtype=np.float64)
        if directions.shape != (3, 3) or not np.all(np.isfinite(directions)):
            raise UserError(f"{path}: space directions: expected three finite 3-vectors, got {directions.tolist()}")
    elif "spacings" in header:
        spacings = np.asarray(header["spacings"], dtype=np.float64)
        if spacings.shape != (3,) or not np.all(np.isfinite(spacings)):
            raise UserError(f"{path}: spacings: expected three finite numbers, got {spacings.tolist()}")
        directions = np.diag(spacings)
    else:
        directions = np.eye(3)
    lengths = np.linalg.norm(directions, axis=1)
    if np.any(lengths <= 0):
        raise UserError(f"{path}: space directions: axis {int(np.argmin(lengths))} has zero length")
    unit = directions / lengths[:, None]
    if abs(np.linalg.det(unit)) < 1e-6:
        raise UserError(f"{path}: space directions: the axis vectors are parallel (volume has no extent)")
    origin = np.zeros(3)
    if "space origin" in header:
        origin = np.asarray(header["space origin"], dtype=np.float64)
        if origin.shape != (3,) or not np.all(np.isfinite(origin)):
            raise UserError(f"{path}: space origin: expected three finite numbers, got {origin.tolist()}")
    return origin, directions


def _reason(error: BaseException) -> str:
    text = str(error).strip() or type(error).__name__
    return text.splitlines()[0]


def write_nrrd(path: Path, data: np.ndarray, origin, directions, *, space: str = "3D-right-handed",
               compression_level: int = 9) -> None:
    """Write a volume in [x, y, z] order as a gzip NRRD, atomically.

    ``space`` defaults to ``3D-right-handed``: world axes with no anatomical meaning (NRRD file
    format specification, teem), as for the demo volumes, which are not patient scans.
    """
    import nrrd

    header = {
        "space": space,
        "space directions": np.asarray(directions, dtype=np.float64),
        "space origin": np.asarray(origin, dtype=np.float64),
        "kinds": ["domain", "domain", "domain"],
        "encoding": "gzip",
    }
    from ..io.atomic import atomic_path

    with atomic_path(path) as temporary:
        nrrd.write(str(temporary), data, header, index_order="F", compression_level=compression_level)
