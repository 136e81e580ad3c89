"""How the page gets its data: JavaScript files loaded with ``<script src>`` (a page opened from
``file://`` may not ``fetch``), holding float buffers as little-endian IEEE 754 half floats in base64.

Half floats keep 11 significant bits (a relative step of 2**-11, about 0.05 %) over 6e-8 to 65504;
larger magnitudes become infinity, which the page shows as such. That is what the page's exposure
control, tone curve and read-out work on (README, "Report pages").
"""

from __future__ import annotations

import base64
import json
from pathlib import Path

import numpy as np

from ..io.atomic import atomic_path


def half_floats(array) -> str:
    """An array as base64 of its little-endian float16 values, in C order."""
    with np.errstate(over="ignore"):                     # beyond 65504: infinity, by design
        values = np.ascontiguousarray(np.asarray(array, dtype=np.float32).astype("<f2"))
    return base64.b64encode(values.tobytes()).decode("ascii")


def buffer_payload(array) -> dict:
    array = np.asarray(array)
    return {"channels": 1 if array.ndim == 2 else int(array.shape[2]), "data": half_floats(array)}


def write_script(path: Path, call: str, name: str, payload) -> None:
    """``call("name", payload);`` as a script file; the page defines ``call`` before loading it."""
    text = f"{call}({json.dumps(name)}, {json.dumps(payload, separators=(',', ':'), allow_nan=False)});\n"
    with atomic_path(path) as temporary:
        temporary.write_text(text, encoding="utf-8")
