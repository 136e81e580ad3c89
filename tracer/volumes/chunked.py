"""Chunked arrays: zarr (and the first scale of OME-Zarr) through zarr, HDF5 datasets through h5py.

Named ``STORE::ARRAY`` (``run.zarr::density``, ``scan.h5::/volumes/ct``); a zarr store that is one array, or an
OME-Zarr image, needs no array name. Arrays are read in the project's [x, y, z] order, like ``.npy``, and
spaced by the scene's ``spacing_mm`` (default 1 mm), except OME-Zarr, whose ``axes`` (z, y, x order or any
other) and first ``scale`` transformation give the order and spacing (units mm, micrometer or nanometer).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..errors import UserError
from .optional import require
from .bricking import Slabs
from .volume import ACCEPTED_DTYPES, RawVolume, check_budget

HDF5_SUFFIXES = (".h5", ".hdf5", ".hdf")
MM_PER = {"millimeter": 1.0, "micrometer": 1e-3, "nanometer": 1e-6, "meter": 1e3, "centimeter": 10.0}


def split_member(text: str) -> tuple[Path, str | None]:
    """``"a.h5::/b/c"`` -> (Path("a.h5"), "/b/c"); no ``::`` -> (Path(text), None)."""
    if "::" in text:
        store, member = text.split("::", 1)
        return Path(store), member
    return Path(text), None


def is_chunked(path: Path) -> bool:
    return path.suffix.lower() in HDF5_SUFFIXES or path.suffix.lower() == ".zarr"


def _slabs(path, array, label, budget, read_planes, axes_order=None) -> tuple[Slabs, str]:
    """The array as :class:`~tracer.volumes.bricking.Slabs` cut across its first stored axis (chunked stores read
    ranges of it cheaply); ``read_planes(start, stop)`` reads stored planes [start, stop)."""
    if array.ndim != 3:
        raise UserError(f"{path}: {label} must be 3-D, it has shape {tuple(array.shape)}")
    dtype = np.dtype(array.dtype)
    name = dtype.newbyteorder("=").name
    if name not in ACCEPTED_DTYPES:
        raise UserError(f"{path}: {label} has dtype {array.dtype}, not one of {', '.join(ACCEPTED_DTYPES)}")
    order = (0, 1, 2) if axes_order is None else tuple(axes_order)
    shape = tuple(int(array.shape[a]) for a in order)
    check_budget(path, shape, dtype, budget, streamed=True)

    def read(start: int, stop: int) -> np.ndarray:
        planes = np.asarray(read_planes(start, stop)).transpose(order)
        return planes.astype(planes.dtype.newbyteorder("="), copy=False)

    return Slabs(shape, dtype.newbyteorder("="), order.index(0), read), name


def read_chunked(path: Path, member: str | None, budget: int) -> RawVolume:
    if not path.exists():
        raise UserError(f"{path}: not found")
    if path.suffix.lower() in HDF5_SUFFIXES:
        h5py = require("h5py", path)
        if member is None:
            raise UserError(f"{path}: name the dataset: {path}::/path/to/dataset")
        try:
            handle = h5py.File(str(path), "r")
        except OSError as error:
            raise UserError(f"{path}: not a readable HDF5 file: {str(error).splitlines()[0]}")
        with handle:
            if member not in handle or not isinstance(handle[member], h5py.Dataset):
                found = []
                handle.visititems(lambda name, item: found.append(name) if isinstance(item, h5py.Dataset) else None)
                raise UserError(f"{path}: no dataset {member!r}; datasets here: {', '.join(found[:8]) or 'none'}")

            def read_planes(start, stop):
                with h5py.File(str(path), "r") as again:
                    return again[member][start:stop]

            slabs, name = _slabs(path, handle[member], f"dataset {member}", budget, read_planes)
        return RawVolume(data=slabs, origin=np.zeros(3), directions=np.eye(3), dtype=name, format="HDF5",
                         details=(("dataset", member),))
    zarr = require("zarr", path)
    try:
        node = zarr.open(str(path), mode="r")
    except Exception as error:
        raise UserError(f"{path}: not a readable zarr store: {str(error).splitlines()[0] if str(error) else type(error).__name__}")
    if member is not None:
        try:
            node = node[member]
        except (KeyError, TypeError):
            raise UserError(f"{path}: no array {member!r} in this store") from None
    if hasattr(node, "shape"):
        slabs, name = _slabs(path, node, f"array {member or '/'}", budget, lambda start, stop: node[start:stop])
        return RawVolume(data=slabs, origin=np.zeros(3), directions=np.eye(3), dtype=name, format="zarr",
                         details=(("array", member or "/"),))
    multiscales = dict(node.attrs).get("multiscales") or dict(node.attrs).get("ome", {}).get("multiscales")
    if not multiscales:
        names = ", ".join(sorted(node.array_keys())) if hasattr(node, "array_keys") else "?"
        raise UserError(f"{path}: a zarr group; name the array: {path}::NAME (arrays here: {names or 'none'})")
    image = multiscales[0]
    first = image["datasets"][0]
    axes = [axis["name"] if isinstance(axis, dict) else str(axis) for axis in image.get("axes", ["z", "y", "x"])]
    if sorted(axes) != ["x", "y", "z"]:
        raise UserError(f"{path}: OME-Zarr axes {axes}: only 3-D images with axes x, y, z are supported")
    units = {axis["name"]: axis.get("unit") for axis in image.get("axes", []) if isinstance(axis, dict)}
    scale = [1.0, 1.0, 1.0]
    for transform in first.get("coordinateTransformations", []):
        if transform.get("type") == "scale":
            scale = [float(s) for s in transform["scale"]]
    order = [axes.index(a) for a in ("x", "y", "z")]
    spacing = tuple(scale[axes.index(a)] * MM_PER.get(units.get(a) or "millimeter", 1.0) for a in ("x", "y", "z"))
    array = node[first["path"]]
    slabs, name = _slabs(path, array, f"scale {first['path']}", budget, lambda start, stop: array[start:stop],
                         axes_order=order)
    return RawVolume(data=slabs, origin=np.zeros(3), directions=np.diag(spacing), dtype=name, format="OME-Zarr",
                     details=(("scale", f"first ({first['path']}), spacing {spacing} mm"),))
