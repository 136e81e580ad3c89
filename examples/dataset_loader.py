"""Load (noisy input, features, reference) triples from a dataset built by ``tracer dataset``.

Plain NumPy; a PyTorch ``Dataset`` is defined only when torch is installed (it is never a
dependency). Copy this file into your training code and adapt the feature list.

    from dataset_loader import iterate_pairs
    for noisy, features, reference in iterate_pairs("lab-demo", split="train", input_spp=4):
        ...   # noisy (H, W, 3), features (H, W, C), reference (H, W, 3), float32, linear radiance

    from dataset_loader import iterate_samples
    for sample in iterate_samples("renders/figurine.samples"):    # tracer render ... --per-sample 16
        ...   # (H, W, 3 + 3 + 3 + 1 + 1): one sample's radiance, albedo, normal, depth, alpha
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np

#: Feature buffers stacked along the last axis, in this order.
FEATURES = ("albedo", "event1_normal", "event1_depth", "alpha", "radiance_variance", "event2_normal")


def read_manifest(folder) -> list[dict]:
    lines = (Path(folder) / "manifest.jsonl").read_text().splitlines()
    return [json.loads(line) for line in lines if line.strip()]


def load_npz(path) -> dict[str, np.ndarray]:
    with np.load(path, allow_pickle=False) as archive:
        return {key: archive[key] for key in archive.files if key != "meta"}


def stack_features(buffers: dict[str, np.ndarray], names=FEATURES) -> np.ndarray:
    planes = []
    for name in names:
        array = buffers[name]
        planes.append(array[..., None] if array.ndim == 2 else array)
    return np.concatenate(planes, axis=-1).astype(np.float32)


def iterate_pairs(folder, split: str | None = "train", input_spp: int = 1, names=FEATURES):
    """Yield (noisy radiance, features of the noisy render, reference radiance) per item of ``split``."""
    folder = Path(folder)
    for record in read_manifest(folder):
        if split is not None and record["split"] != split:
            continue
        files = record["files"]
        noisy = load_npz(folder / files[f"spp{input_spp:04d}.npz"]["path"])
        reference = load_npz(folder / files["reference.npz"]["path"])
        yield noisy["radiance"], stack_features(noisy, names), reference["radiance"]


#: Per-sample buffers (``tracer render --per-sample S``) stacked per sample, in this order.
SAMPLE_BUFFERS = ("radiance", "albedo", "event1_normal", "event1_depth", "alpha")


def iterate_samples(samples_folder, names=SAMPLE_BUFFERS, pixels=(slice(None), slice(None))):
    """Yield, sample by sample, an (H, W, C) float32 stack of ``names`` from a ``NAME.samples`` folder.

    The files are memory-mapped: only the sample (and the ``pixels`` window, e.g. a training crop)
    being read is loaded, so S samples of a large image never sit in memory together.
    """
    folder = Path(samples_folder)
    index = json.loads((folder / "samples.json").read_text())
    arrays = [np.load(folder / f"{name}.npy", mmap_mode="r") for name in names]
    for k in range(index["spp"]):
        planes = [a[(k, *pixels)] for a in arrays]
        yield np.concatenate([p[..., None] if p.ndim == 2 else p for p in planes], axis=-1).astype(np.float32)


try:  # pragma: no cover - only where torch is installed
    import torch

    class DenoisingDataset(torch.utils.data.Dataset):
        """(input with features, reference) tensors, channels first."""

        def __init__(self, folder, split="train", input_spp=1, names=FEATURES):
            self.folder = Path(folder)
            self.records = [r for r in read_manifest(folder) if split is None or r["split"] == split]
            self.input_spp = input_spp
            self.names = names

        def __len__(self):
            return len(self.records)

        def __getitem__(self, index):
            files = self.records[index]["files"]
            noisy = load_npz(self.folder / files[f"spp{self.input_spp:04d}.npz"]["path"])
            reference = load_npz(self.folder / files["reference.npz"]["path"])
            x = np.concatenate([noisy["radiance"], stack_features(noisy, self.names)], axis=-1)
            return torch.from_numpy(x).permute(2, 0, 1), torch.from_numpy(reference["radiance"]).permute(2, 0, 1)
except ImportError:
    pass
