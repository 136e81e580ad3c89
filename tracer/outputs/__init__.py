"""Outputs: the files a render writes and the readers of those same formats.

``npz.py`` (every buffer and ``meta``; read back with ``allow_pickle=False``), ``exr.py`` (multi-layer
OpenEXR, and lat-long environment images), ``png.py`` (exposure, clamp and the sRGB curve, IEC
61966-2-1), ``sheet.py`` (all buffers on one labelled page), ``save.py`` (what ``tracer render``
writes, and the checks on an output folder). Every file goes through :func:`tracer.io.atomic.atomic_path`.
"""

from .npz import read_npz, write_npz
from .save import check_output_folder, parse_formats, save_frame

__all__ = ["read_npz", "write_npz", "save_frame", "parse_formats", "check_output_folder"]
