"""Checkpoints: the float64 sums of a render in progress, tied to its scene, seed and volume.

A checkpoint holds the running sums, the number of samples in them and the first sample index,
so :func:`tracer.rendering.render` continues from it bit-exactly (README, "Conventions": every
random number is a function of the sample index).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..errors import UserError
from ..scene import Scene
from .accumulate import Accumulator, _scene_key


def fingerprint(scene: Scene) -> str:
    import hashlib

    bricks = scene.volume.bricks                      # every voxel, without assembling the plain array
    digest = hashlib.sha256(np.ascontiguousarray(bricks).data).hexdigest()
    return (_scene_key({"scene": scene.to_dict()}) + f"|seed={scene.settings.seed}|volume={digest}"
            f"|shape={scene.volume.shape}|dtype={bricks.dtype.name}")


def save_checkpoint(path, accumulator: Accumulator, fingerprint: str, seconds: float) -> None:
    from ..io.atomic import atomic_path

    with atomic_path(Path(path)) as temporary:
        with open(temporary, "wb") as handle:
            np.savez(handle, sums=accumulator.sums, n_samples=np.int64(accumulator.n_samples),
                     first_sample=np.int64(accumulator.first_sample), n_levels=np.int64(accumulator.n_levels),
                     features=np.array(",".join(accumulator.features)),
                     fingerprint=np.array(fingerprint), seconds=np.float64(seconds))


def load_checkpoint(path, fingerprint: str, first_sample: int):
    path = Path(path)
    try:
        with np.load(path, allow_pickle=False) as data:
            stored = str(data["fingerprint"])
            sums = np.array(data["sums"])
            n_samples = int(data["n_samples"])
            offset = int(data["first_sample"])
            n_levels = int(data["n_levels"])
            features = tuple(name for name in str(data["features"]).split(",") if name) if "features" in data else ()
            seconds = float(data["seconds"])
    except (OSError, ValueError, KeyError, EOFError) as error:
        raise UserError(f"{path}: not a readable checkpoint: {error}")
    if stored != fingerprint:
        raise UserError(f"{path}: checkpoint belongs to a different scene, seed or volume; remove it or render afresh")
    if offset != first_sample:
        raise UserError(f"{path}: checkpoint starts at sample {offset}, not {first_sample}")
    return Accumulator(sums.shape[0], sums.shape[1], n_levels, first_sample=offset, sums=sums,
                       n_samples=n_samples, features=features), seconds
