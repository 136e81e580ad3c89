"""NPZ render files: float32 buffers by key, and ``meta`` as a 0-d JSON string. Never pickled."""

from __future__ import annotations

import json
import zipfile
from pathlib import Path

import numpy as np

from ..rendering.buffers import Frame, buffer_specs
from ..errors import UserError
from ..io.atomic import atomic_path


def write_npz(path, frame: Frame) -> Path:
    """Write a render as a compressed NPZ, atomically and reproducibly.

    ``numpy.savez_compressed`` stamps each member with the current time, so the same buffers
    would give different bytes; we write the zip ourselves with a fixed timestamp, so the same
    render always gives the same file (and the same sha256).
    """
    path = Path(path)
    arrays = {key: np.ascontiguousarray(value, dtype=np.float32) for key, value in frame.buffers.items()}
    arrays["meta"] = np.array(frame.meta_json())
    with atomic_path(path) as temporary:
        write_arrays(temporary, arrays)
    return path


def write_arrays(path, arrays: dict[str, np.ndarray]) -> None:
    """A deterministic compressed ``.npz`` of named arrays (members in the given order, fixed timestamps)."""
    with zipfile.ZipFile(path, "w", compression=zipfile.ZIP_DEFLATED, allowZip64=True) as archive:
        for key, array in arrays.items():
            info = zipfile.ZipInfo(f"{key}.npy", date_time=(1980, 1, 1, 0, 0, 0))
            info.compress_type = zipfile.ZIP_DEFLATED
            info.external_attr = 0o644 << 16
            with archive.open(info, "w", force_zip64=True) as member:
                np.lib.format.write_array(member, np.asanyarray(array), allow_pickle=False)


def load_arrays(path) -> dict[str, np.ndarray]:
    """Every array of an ``.npz`` file (never unpickling); unreadable files are a :class:`UserError`."""
    path = Path(path)
    try:
        with np.load(path, allow_pickle=False) as archive:
            return {key: archive[key] for key in archive.files}
    except FileNotFoundError:
        raise UserError(f"{path}: file not found")
    except (ValueError, OSError, zipfile.BadZipFile, EOFError) as error:
        raise UserError(f"{path}: not a readable NPZ: {str(error).splitlines()[0] if str(error) else type(error).__name__}")


def read_npz(path) -> Frame:
    """Read a render NPZ and check it holds the buffers of the file contract."""
    path = Path(path)
    contents = load_arrays(path)
    if "meta" not in contents:
        raise UserError(f"{path}: meta: missing; not a render file of this tool")
    try:
        meta = json.loads(str(contents.pop("meta")))
    except json.JSONDecodeError:
        raise UserError(f"{path}: meta: not valid JSON")
    n_levels = sum(1 for key in contents if key.startswith("level") and key.endswith("_hit"))
    shape = None
    for spec in buffer_specs(n_levels):
        if spec.key not in contents:
            raise UserError(f"{path}: {spec.key}: buffer missing")
        array = contents[spec.key]
        expected = array.shape[:2] + ((3,) if spec.channels == 3 else ())
        if array.ndim not in (2, 3) or array.shape != expected or (shape is not None and array.shape[:2] != shape):
            raise UserError(f"{path}: {spec.key}: unexpected shape {array.shape}")
        shape = array.shape[:2]
    if "sample_offset" in meta and "first_sample" not in meta:     # written before the key was renamed
        meta["first_sample"] = meta.pop("sample_offset")
    meta["source_file"] = str(path)
    return Frame(buffers={k: v.astype(np.float32, copy=False) for k, v in contents.items()}, meta=meta)
