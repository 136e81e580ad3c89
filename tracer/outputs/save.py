"""Writing a render's files: NPZ always, EXR and PNG as asked, a contact sheet on request."""

from __future__ import annotations

from pathlib import Path

from ..rendering.buffers import Frame
from ..errors import UserError

FORMATS = ("npz", "exr", "png")


def nearest_existing(path) -> Path:
    """``path`` itself or its nearest ancestor that exists (where a new output folder would be created)."""
    probe = Path(path)
    while not probe.exists() and probe.parent != probe:
        probe = probe.parent
    return probe


def check_output_folder(folder) -> None:
    """Refuse, before any work, an output folder that cannot be created or written."""
    import os

    folder = Path(folder)
    probe = nearest_existing(folder)
    if not probe.is_dir():
        raise UserError(f"{folder}: cannot create the output folder: {probe} is not a folder")
    if not os.access(probe, os.W_OK | os.X_OK):
        raise UserError(f"{folder}: output folder is not writable ({probe})")


def parse_formats(text: str) -> tuple[str, ...]:
    formats = tuple(dict.fromkeys(part.strip().lower() for part in text.split(",") if part.strip()))
    unknown = [f for f in formats if f not in FORMATS]
    if unknown:
        raise UserError(f"--format: unknown format {unknown[0]!r}; choose from {', '.join(FORMATS)}")
    return tuple(dict.fromkeys(("npz",) + formats))


def save_frame(frame: Frame, out_dir, name: str, formats=("npz", "png"), exposure: float = 0.0,
               sheet: bool = False) -> list[Path]:
    """Write ``name.npz`` (always) and the other asked formats into ``out_dir``; returns the paths."""
    from .npz import write_npz

    out_dir = Path(out_dir)
    if not name or "/" in name or name.startswith("."):
        raise UserError(f"--name: {name!r} is not a plain file name")
    paths = [write_npz(out_dir / f"{name}.npz", frame)]
    if "exr" in formats:
        from .exr import write_exr

        paths.append(write_exr(out_dir / f"{name}.exr", frame))
    if "png" in formats:
        from .png import write_preview

        paths.append(write_preview(out_dir / f"{name}.png", frame["radiance"], exposure))
    if sheet:
        from .sheet import write_contact_sheet

        path = out_dir / f"{name}.sheet.png"
        write_contact_sheet(frame, path, exposure)
        paths.append(path)
    return paths
