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


#: The demodulation's epsilon: ``illumination = (radiance - background_part) / (albedo + ILLUMINATION_EPSILON)``
#: (an albedo floor as surface denoisers use; Bako et al. 2017).
ILLUMINATION_EPSILON = 1e-3


def demodulate(radiance, background, albedo):
    """The ``illumination`` buffer: radiance less the background seen through, over the event-1 albedo (floored)."""
    return (radiance - background) / (albedo + ILLUMINATION_EPSILON)


def _event_feature_specs(prefix: str, label: str) -> list[BufferSpec]:
    return [
        BufferSpec(f"{prefix}_value", 1, (f"{prefix}.value.Y",), "volume units", f"scalar value of the field at {label}"),
        BufferSpec(f"{prefix}_gradient", 1, (f"{prefix}.gradient.Y",), "volume units / mm",
                   f"gradient magnitude of the field at {label}, in world units"),
        BufferSpec(f"{prefix}_extinction", 1, (f"{prefix}.extinction.Y",), "1/mm",
                   f"extinction sigma of the transfer function at {label}"),
        BufferSpec(f"{prefix}_interface_weight", 1, (f"{prefix}.interface_weight.Y",), "fraction",
                   f"weight of the interface (Lambert) lobe at {label}"),
        BufferSpec(f"{prefix}_light_transmittance", 1, (f"{prefix}.light_transmittance.Y",), "fraction",
                   f"transmittance from {label} toward the first light"),
    ]


#: Candidate features (README, "Candidate features"): opt-in with ``[render] features``.
FEATURE_BUFFERS = [
    *_event_feature_specs("event1", "the first scatter event"),
    *_event_feature_specs("event2", "the second scatter event"),
    BufferSpec("opacity_before_event1", 1, ("opacity_before_event1.Y",), "fraction",
               "opacity of the camera ray in front of event 1 (the whole ray's where there is none)"),
    BufferSpec("expected_depth", 1, ("expected_depth.Z",), "mm",
               "transmittance-weighted depth int t T sigma dt / int T sigma dt along the camera ray"),
    BufferSpec("optical_depth", 1, ("optical_depth.Y",), "1", "optical depth of the camera ray to the volume's exit"),
    BufferSpec("background_part", 3, tuple(f"background_part.{c}" for c in "RGB"), "linear RGB",
               "the background seen through the volume, T(exit) x background"),
    BufferSpec("illumination", 3, tuple(f"illumination.{c}" for c in "RGB"), "linear RGB",
               f"demodulated radiance: (radiance - background_part) / (albedo + {ILLUMINATION_EPSILON:g})"),
]
FEATURE_NAMES = tuple(spec.key for spec in FEATURE_BUFFERS)


def buffer_specs(n_levels: int = 0, features=()) -> list[BufferSpec]:
    return BASE_BUFFERS + level_buffers(n_levels) + [spec for spec in FEATURE_BUFFERS if spec.key in features]


def check_feature_names(names, where: str) -> tuple[str, ...]:
    """The candidate features named (``"all"`` for every one), in the table's order; unknown names are a UserError."""
    from ..errors import UserError

    if not isinstance(names, (list, tuple)) or not all(isinstance(name, str) for name in names):
        raise UserError(f"{where}: expected a list of feature names, got {names!r}")
    if "all" in names:
        return FEATURE_NAMES
    for name in names:
        if name not in FEATURE_NAMES:
            raise UserError(f"{where}: unknown feature {name!r}; choose from all, {', '.join(FEATURE_NAMES)}")
    return tuple(name for name in FEATURE_NAMES if name in names)


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

    @property
    def features(self) -> tuple[str, ...]:
        """The candidate features this frame holds, in the table's order."""
        return tuple(name for name in FEATURE_NAMES if name in self.buffers)

    def meta_json(self) -> str:
        return json.dumps(self.meta, sort_keys=True)
