"""Input files for the renderer, written with pynrrd, OpenEXR and plain text (no ``tracer`` import).

The keys are those of the README's "Scene files" and "Transfer functions" sections.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np


def toml_value(value) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return '"' + value.replace("\\", "\\\\").replace('"', '\\"') + '"'
    if isinstance(value, (list, tuple, np.ndarray)):
        return "[" + ", ".join(toml_value(v) for v in value) + "]"
    if isinstance(value, (int, np.integer)):
        return str(int(value))
    return repr(float(value))


def toml_table(name: str, table: dict) -> str:
    lines = [f"[{name}]"] + [f"{key} = {toml_value(value)}" for key, value in table.items()]
    return "\n".join(lines) + "\n"


def write_volume(path, data, directions, origin, space: str = "3D-right-handed") -> Path:
    """An NRRD file: ``directions`` rows are the world steps of index axes i, j, k (mm), ``origin`` the voxel (0, 0, 0)."""
    import nrrd

    header = {"space": space, "space directions": np.asarray(directions, float), "space origin": np.asarray(origin, float),
              "encoding": "raw"}
    nrrd.write(str(path), np.ascontiguousarray(data), header, index_order="F")
    return Path(path)


def write_transfer(path, opacity, color, reference_length_mm: float = 1.0) -> Path:
    """``opacity``: [[value, opacity], ...]; ``color``: [[value, [r, g, b]], ...]."""
    body = (f"name = \"outside check\"\nreference_length_mm = {float(reference_length_mm)!r}\n"
            f"opacity = {toml_value([[float(v), float(a)] for v, a in opacity])}\n"
            "color = [" + ", ".join(f"[{float(v)!r}, {toml_value([float(c) for c in rgb])}]" for v, rgb in color) + "]\n")
    Path(path).write_text(body)
    return Path(path)


def write_scene(path, volume, transfer, camera: dict, lights=(), environment: dict | None = None,
                render: dict | None = None) -> Path:
    """A scene file; ``lights`` a list of dicts (``kind`` and its keys), ``environment`` a dict or None (lights only)."""
    parts = [toml_table("volume", {"path": str(volume)}), toml_table("transfer_function", {"path": str(transfer)}),
             toml_table("camera", camera)]
    parts += [toml_table("[lights]", light) for light in lights]
    if environment is not None:
        parts.append(toml_table("environment", environment))
    parts.append(toml_table("render", render or {}))
    Path(path).write_text("\n".join(parts))
    return Path(path)


def write_latlong(path, image) -> Path:
    """A lat-long RGB environment image (h, w, 3) as a float32 EXR (channels R, G, B)."""
    import OpenEXR

    image = np.asarray(image, np.float32)
    channels = {name: np.ascontiguousarray(image[..., c]) for c, name in enumerate("RGB")}
    header = {"compression": OpenEXR.ZIP_COMPRESSION, "type": OpenEXR.scanlineimage}
    with OpenEXR.File(header, channels) as handle:
        handle.write(str(path))
    return Path(path)


def read_latlong(path) -> np.ndarray:
    """(h, w, 3) float64 from an EXR's R, G, B channels."""
    import OpenEXR

    with OpenEXR.File(str(path), separate_channels=True) as handle:
        channels = handle.channels()
        return np.stack([np.asarray(channels[name].pixels, np.float64) for name in "RGB"], axis=-1)
