"""Multi-layer OpenEXR files through the official OpenEXR bindings.

Channel names follow the README's contract, "What a render writes" (``R G B A``, ``variance.R``,
``event1.position.X``, ...), from :mod:`tracer.rendering.buffers`. Each channel is passed as its own contiguous 2-D float32 array
(the bindings ignore strides), dicts are copied (the constructor mutates them), and the
metadata is one JSON string attribute (integer and float attributes are 32-bit).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..rendering.buffers import FEATURE_BUFFERS, Frame, buffer_specs
from ..errors import UserError
from ..io.atomic import atomic_path

META_ATTRIBUTE = "tracer_meta"


def write_exr(path, frame: Frame) -> Path:
    import OpenEXR

    path = Path(path)
    channels = {}
    for spec in buffer_specs(frame.n_levels, frame.features):
        array = frame.buffers[spec.key]
        if spec.channels == 1:
            channels[spec.exr_channels[0]] = np.ascontiguousarray(array, dtype=np.float32)
        else:
            for c, name in enumerate(spec.exr_channels):
                channels[name] = np.ascontiguousarray(array[..., c], dtype=np.float32)
    header = {"compression": OpenEXR.ZIP_COMPRESSION, "type": OpenEXR.scanlineimage, META_ATTRIBUTE: frame.meta_json()}
    with atomic_path(path) as temporary:
        with OpenEXR.File(dict(header), dict(channels)) as handle:
            handle.write(str(temporary))
    return path


def read_exr_channels(path) -> tuple[dict[str, np.ndarray], dict]:
    """All channels of an EXR file as 2-D arrays by name, and its header."""
    import OpenEXR

    path = Path(path)
    if not path.is_file():
        raise UserError(f"{path}: file not found")
    if not OpenEXR.isOpenExrFile(str(path)):
        raise UserError(f"{path}: not an OpenEXR file")
    try:
        with OpenEXR.File(str(path), separate_channels=True) as handle:
            channels = {name: np.array(channel.pixels) for name, channel in handle.channels().items()}
            header = dict(handle.header())
    except RuntimeError as error:
        raise UserError(f"{path}: cannot read EXR: {error}")
    return channels, header


def read_exr(path) -> Frame:
    """Read a render EXR written by :func:`write_exr` back into a :class:`Frame`."""
    import json

    channels, header = read_exr_channels(path)
    n_levels = sum(1 for name in channels if name.startswith("level") and name.endswith(".hit.Y"))
    features = [spec.key for spec in FEATURE_BUFFERS if spec.exr_channels[0] in channels]
    buffers = {}
    for spec in buffer_specs(n_levels, features):
        missing = [name for name in spec.exr_channels if name not in channels]
        if missing:
            raise UserError(f"{path}: channel {missing[0]} missing")
        arrays = [channels[name].astype(np.float32) for name in spec.exr_channels]
        buffers[spec.key] = arrays[0] if spec.channels == 1 else np.stack(arrays, axis=-1)
    meta = {}
    if META_ATTRIBUTE in header:
        meta = json.loads(header[META_ATTRIBUTE])
    meta["source_file"] = str(path)
    return Frame(buffers=buffers, meta=meta)


def read_environment(path) -> np.ndarray:
    """A lat-long environment image (h, w, 3) float32 from the R, G, B channels of an EXR."""
    path = Path(path)
    channels, _ = read_exr_channels(path)
    if not all(c in channels for c in "RGB"):
        raise UserError(f"{path}: environment image needs R, G and B channels, found {sorted(channels)[:6]}")
    image = np.stack([channels[c] for c in "RGB"], axis=-1).astype(np.float32)
    if image.ndim != 3 or image.shape[0] < 2 or image.shape[1] < 2:
        raise UserError(f"{path}: environment image must be at least 2 x 2 pixels, got {image.shape[:2]}")
    if not np.all(np.isfinite(image)) or image.min() < 0:
        raise UserError(f"{path}: environment image has negative, NaN or Inf pixels")
    return np.ascontiguousarray(image)


def write_image_exr(path, image: np.ndarray) -> Path:
    """Write an (h, w, 3) float32 image as R, G, B (used for environment maps in examples and tests)."""
    import OpenEXR

    path = Path(path)
    channels = {c: np.ascontiguousarray(image[..., i], dtype=np.float32) for i, c in enumerate("RGB")}
    with atomic_path(path) as temporary:
        with OpenEXR.File(dict(compression=OpenEXR.ZIP_COMPRESSION, type=OpenEXR.scanlineimage), dict(channels)) as handle:
            handle.write(str(temporary))
    return path
