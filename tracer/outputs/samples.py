"""Per-sample output (``render --per-sample S``): the first S samples of every pixel, one by one.

The folder ``NAME.samples/`` holds one ``.npy`` file per buffer, shaped (S, H, W) or (S, H, W, C), sample
index first: ``radiance.npy`` in float64 (each sample exactly as the kernel added it, so the samples'
sum in order is the render's own sum), every other buffer of the render (but ``radiance_variance``,
which one sample does not have) in float32, and ``samples.json`` (spp, first sample, keys, shapes).
Each sample is appended to the files as it is rendered, so memory holds one sample's buffers, not S;
``numpy.load(path, mmap_mode="r")`` reads them lazily. Plain ``.npy`` rather than zarr or compressed
NPZ blocks: NumPy alone reads it, any sample or pixel range is one memory-mapped slice, and nothing is
decompressed; the price is the uncompressed size, S x H x W x (8 x 3 + 4 x channels) bytes.
The folder is written under a temporary name and renamed when the render completes.
"""

from __future__ import annotations

import json
import os
import shutil
from pathlib import Path

import numpy as np

from ..errors import UserError

SKIPPED = ("radiance_variance",)


class SampleWriter:
    """Streams single samples into ``FOLDER/NAME.samples/`` (see the module docstring)."""

    def __init__(self, folder, name: str, count: int):
        if count < 1:
            raise UserError(f"--per-sample: must be at least 1, got {count}")
        self.final = Path(folder) / f"{name}.samples"
        self.count = int(count)
        self.staging = Path(folder) / f".{name}.samples.partial-{os.getpid()}"
        self.handles: dict[str, object] = {}
        self.shapes: dict[str, list[int]] = {}
        self.written = 0
        self.first_sample = None

    def add(self, one) -> None:
        """Append one sample: ``one`` is an Accumulator holding exactly one sample."""
        assert one.n_samples == 1
        if self.first_sample is None:
            self.first_sample = one.first_sample
            shutil.rmtree(self.staging, ignore_errors=True)
            self.staging.mkdir(parents=True)
        buffers = {"radiance": one.sums[..., 0:3].copy()}        # float64: the kernel's own value
        for key, value in one.to_buffers().items():
            if key not in SKIPPED and key != "radiance":
                buffers[key] = value
        for key, value in buffers.items():
            handle = self.handles.get(key)
            if handle is None:
                handle = open(self.staging / f"{key}.npy", "wb")
                shape = (self.count, *value.shape)
                np.lib.format.write_array_header_1_0(handle, {"descr": np.lib.format.dtype_to_descr(value.dtype),
                                                             "fortran_order": False, "shape": shape})
                self.handles[key] = handle
                self.shapes[key] = list(shape)
            handle.write(np.ascontiguousarray(value).tobytes())
        self.written += 1

    def finish(self) -> Path:
        for handle in self.handles.values():
            handle.close()
        if self.written != self.count:
            self.abort()
            raise UserError(f"--per-sample: {self.written} of {self.count} samples were rendered; nothing written")
        index = {"spp": self.count, "first_sample": self.first_sample, "keys": list(self.shapes),
                 "shapes": self.shapes, "dtypes": {k: ("float64" if k == "radiance" else "float32") for k in self.shapes}}
        (self.staging / "samples.json").write_text(json.dumps(index, indent=1) + "\n")
        try:
            if self.final.exists():
                shutil.rmtree(self.final)
            os.replace(self.staging, self.final)
        except OSError as error:
            self.abort()
            raise UserError(f"{self.final}: cannot write: {error.strerror or error}") from None
        return self.final

    def abort(self) -> None:
        for handle in self.handles.values():
            handle.close()
        shutil.rmtree(self.staging, ignore_errors=True)


def load_samples(folder, key: str = "radiance") -> np.ndarray:
    """One buffer's samples, memory-mapped (read lazily): (S, H, W[, C])."""
    path = Path(folder) / f"{key}.npy"
    if not path.is_file():
        raise UserError(f"{path}: not found")
    return np.load(path, mmap_mode="r", allow_pickle=False)
