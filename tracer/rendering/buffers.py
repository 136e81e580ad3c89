"""The buffer table: every per-pixel output, its shape, units and EXR channels, in one place.

Conventions for all buffers (also in the README): images are H x W with row 0 at the top
and columns growing toward the camera's right; positions are world millimetres; normals
are unit world vectors (the negated normalised gradient, flipped to face the incoming ray),
averaged over samples and not renormalised; depth is the Euclidean distance in mm from the
camera position to the event. Per-event buffers average over the samples that have that
event and are 0 where none has; ``*_hit`` is the fraction of samples that have it.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field

import numpy as np


@dataclass(frozen=True)
class BufferSpec:
    key: str
    channels: int            # 1 or 3
    exr_channels: tuple[str, ...]
    units: str
    description: str


def _event_specs(prefix: str, label: str) -> list[BufferSpec]:
    return [
        BufferSpec(f"{prefix}_position", 3, tuple(f"{prefix}.position.{a}" for a in "XYZ"), "mm",
                   f"mean world position of {label}"),
        BufferSpec(f"{prefix}_normal", 3, tuple(f"{prefix}.normal.{a}" for a in "XYZ"), "unit",
                   f"mean normal at {label} (not renormalised)"),
        BufferSpec(f"{prefix}_depth", 1, (f"{prefix}.depth.Z",), "mm", f"mean camera distance of {label}"),
        BufferSpec(f"{prefix}_hit", 1, (f"{prefix}.hit.Y",), "fraction", f"fraction of samples with {label}"),
    ]


BASE_BUFFERS = [
    BufferSpec("radiance", 3, ("R", "G", "B"), "linear RGB", "mean radiance over samples"),
    BufferSpec("radiance_variance", 3, ("variance.R", "variance.G", "variance.B"), "linear RGB^2",
               "estimated variance of the mean radiance (sample variance / n)"),
    BufferSpec("alpha", 1, ("A",), "fraction", "estimated opacity of the pixel, 1 - transmittance"),
    BufferSpec("albedo", 3, ("albedo.R", "albedo.G", "albedo.B"), "linear RGB", "mean albedo at event 1"),
    *_event_specs("event1", "the first scatter event"),
    *_event_specs("event2", "the second scatter event"),
]


def level_buffers(n_levels: int) -> list[BufferSpec]:
    specs = []
    for level in range(1, n_levels + 1):
        specs += _event_specs(f"level{level}", f"fixed feature level {level}")
    return specs


def buffer_specs(n_levels: int = 0) -> list[BufferSpec]:
    return BASE_BUFFERS + level_buffers(n_levels)


@dataclass
class Frame:
    """A finished render: named float32 buffers (H, W) or (H, W, 3), and its metadata.

    Index it by buffer key (``frame["radiance"]``). ``meta`` holds the tool version, the scene
    as parsed, spp, seed, first_sample, width, height, render_seconds, events and step_mm.
    """

    buffers: dict[str, np.ndarray]
    meta: dict = field(default_factory=dict)
    accumulator: object = field(default=None, repr=False)   # the float64 sums, when rendered in this process

    def __getitem__(self, key: str) -> np.ndarray:
        return self.buffers[key]

    def __contains__(self, key: str) -> bool:
        return key in self.buffers

    @property
    def spp(self) -> int:
        return int(self.meta["spp"])

    @property
    def n_levels(self) -> int:
        return sum(1 for key in self.buffers if key.startswith("level") and key.endswith("_hit"))

    def meta_json(self) -> str:
        return json.dumps(self.meta, sort_keys=True)
