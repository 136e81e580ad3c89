"""The scene's parts as frozen dataclasses: lights, environment, render settings and the :class:`Scene`.

CLI options override fields through :meth:`Scene.with_overrides`; :mod:`.parse` builds a scene from TOML.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass, field

import numpy as np

from ..config import memory_budget
from ..errors import UserError
from ..optics.transfer import TransferFunction
from ..volumes.volume import Volume
from .camera import Camera

#: How light scatters at an event (README, "The optical model"): "medium" uses the phase function
#: everywhere, "interface" the Lambert lobe about the gradient normal everywhere, "graded" blends the two
#: by the local gradient magnitude.
SCATTERINGS = ("medium", "interface", "graded")
#: Names of an earlier release, refused with a message that gives the new name.
FORMER_SCATTERING_NAMES = {"phase": "medium", "surface": "interface", "hybrid": "graded"}
ENVIRONMENTS = ("constant", "sky", "image")
LIGHT_KINDS = ("directional", "point")
MAX_RESOLUTION = 16384


class ViewWarning(UserWarning):
    """The camera does not see the volume."""


@dataclass(frozen=True)
class Light:
    """``directional``: ``vector`` is the unit direction toward the light, ``power`` its irradiance.
    ``point``: ``vector`` is its position (mm), ``power`` its intensity (inverse-square falloff)."""

    kind: str
    vector: tuple[float, float, float]
    power: tuple[float, float, float]

    def to_dict(self) -> dict:
        if self.kind == "directional":
            return {"kind": "directional", "toward": list(self.vector), "irradiance": list(self.power)}
        return {"kind": "point", "position": list(self.vector), "intensity": list(self.power)}


@dataclass(frozen=True)
class Environment:
    """Light from all directions. ``colors`` rows: constant radiance, or sky zenith, horizon, ground."""

    kind: str = "constant"
    colors: tuple = ((0.0, 0.0, 0.0), (0.0, 0.0, 0.0), (0.0, 0.0, 0.0))
    image_path: str | None = None
    background: tuple[float, float, float] | None = None   # None: the environment is the background

    def to_dict(self) -> dict:
        out: dict = {"kind": self.kind}
        if self.kind == "constant":
            out["radiance"] = list(self.colors[0])
        elif self.kind == "sky":
            out.update(zenith=list(self.colors[0]), horizon=list(self.colors[1]), ground=list(self.colors[2]))
        else:
            out["path"] = self.image_path
        out["background"] = "environment" if self.background is None else list(self.background)
        return out


#: The most scattering events a path may have (``[render] bounces``), and the estimators (``[render] estimator``).
MAX_BOUNCES = 4096
ESTIMATORS = ("march", "track")


@dataclass(frozen=True)
class RenderSettings:
    spp: int = 64
    seed: int = 0
    step_mm: float = 0.5
    events: int = 2
    scattering: str = "graded"
    phase_g: float = 0.0
    feature_levels: tuple[float, ...] = ()
    interface_gradient: float = 0.15
    bounces: int = 1
    estimator: str = "march"
    features: tuple[str, ...] = ()          # candidate features (rendering.buffers.FEATURE_NAMES), opt-in

    def to_dict(self) -> dict:
        out = dataclasses.asdict(self)
        out["feature_levels"] = list(self.feature_levels)
        if self.features:
            out["features"] = list(self.features)
        else:
            out.pop("features")                # renders without them keep their earlier meta, byte for byte
        return out


@dataclass(frozen=True, eq=False)
class Scene:
    """Everything a render needs. Build with :func:`load_scene` or directly from objects."""

    volume: Volume
    transfer_function: TransferFunction
    camera: Camera
    lights: tuple[Light, ...] = ()
    environment: Environment = field(default_factory=Environment)
    settings: RenderSettings = field(default_factory=RenderSettings)
    source: str = "<api>"
    environment_image: np.ndarray | None = None

    def with_overrides(self, *, spp=None, seed=None, width=None, height=None, step_mm=None, events=None, bounces=None,
                       estimator=None) -> "Scene":
        """A copy with CLI-style overrides applied and checked."""
        settings = self.settings
        camera = self.camera
        where = "command line"
        if spp is not None:
            settings = dataclasses.replace(settings, spp=_check_int(spp, f"{where}: --spp", 1, 2**31 - 1))
        if seed is not None:
            settings = dataclasses.replace(settings, seed=_check_int(seed, f"{where}: --seed", 0, 2**63 - 1))
        if step_mm is not None:
            if not step_mm > 0 or not math.isfinite(step_mm):
                raise UserError(f"{where}: --step-mm must be > 0, got {step_mm}")
            settings = dataclasses.replace(settings, step_mm=float(step_mm))
        if events is not None:
            settings = dataclasses.replace(settings, events=_check_int(events, f"{where}: --events", 1, 4))
        if bounces is not None:
            settings = dataclasses.replace(settings, bounces=_check_int(bounces, f"{where}: --bounces", 1, MAX_BOUNCES))
        if estimator is not None:
            if estimator not in ESTIMATORS:
                raise UserError(f"{where}: --estimator must be one of {', '.join(ESTIMATORS)}, got {estimator!r}")
            settings = dataclasses.replace(settings, estimator=estimator)
        if width is not None:
            camera = dataclasses.replace(camera, width=_check_int(width, f"{where}: --width", 1, MAX_RESOLUTION))
        if height is not None:
            camera = dataclasses.replace(camera, height=_check_int(height, f"{where}: --height", 1, MAX_RESOLUTION))
        scene = dataclasses.replace(self, settings=settings, camera=camera)
        scene.check_budget()
        return scene

    def check_budget(self) -> None:
        from ..rendering.accumulate import n_channels

        n_bytes = (self.camera.image_size[0] * self.camera.image_size[1]
                   * n_channels(len(self.settings.feature_levels), bool(self.settings.features)) * 8 * 2)
        if n_bytes > memory_budget():
            raise UserError(
                f"{self.source}: camera.width x camera.height = {self.camera.width} x {self.camera.height} needs "
                f"{n_bytes / 2**20:.0f} MiB of buffers, over the memory budget of {memory_budget() / 2**20:.0f} MiB"
            )

    def to_dict(self) -> dict:
        """The scene as parsed, for metadata (the volume by its source, the transfer function in full)."""
        return {
            "volume": {"path": self.volume.source, "shape": list(self.volume.shape), "space": self.volume.space,
                       "origin_mm": self.volume.origin.tolist(), "directions_mm": self.volume.directions.tolist()},
            "transfer_function": self.transfer_function.to_dict(),
            "camera": {"position": list(self.camera.position), "target": list(self.camera.target),
                       "up": list(self.camera.up), "fov_deg": self.camera.fov_deg,
                       "width": self.camera.width, "height": self.camera.height,
                       **({"crop": list(self.camera.crop)} if self.camera.crop is not None else {})},
            "lights": [light.to_dict() for light in self.lights],
            "environment": self.environment.to_dict(),
            "render": self.settings.to_dict(),
        }

    def sees_volume(self) -> bool:
        """Whether any corner or the centre of the volume's box projects into the image, in front of the camera."""
        forward, _, _ = self.camera.frame()
        points = np.vstack([self.volume.corners, self.volume.center[None]])
        in_front = (points - np.asarray(self.camera.position)) @ forward > 0
        if not in_front.any():
            return False
        projected = self.camera.project(points[in_front])
        rows, cols = projected[:, 0], projected[:, 1]
        inside = (rows >= 0) & (rows <= self.camera.height) & (cols >= 0) & (cols <= self.camera.width)
        if inside.any():
            return True
        # a box larger than the view can still fill it: test the centre ray against the box
        from .._kernels.geometry import box_interval, to_index, to_index_direction

        arrays = self.volume.to_arrays()
        origin = to_index(arrays.world_to_index, *self.camera.position)
        direction = to_index_direction(arrays.world_to_index, *forward)
        t0, t1 = box_interval(np.array(self.volume.shape, dtype=np.float64), *origin, *direction)
        return t1 > t0


def _check_int(value, where, low, high):
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)):
        raise UserError(f"{where}: expected a whole number, got {value!r}")
    if not low <= value <= high:
        raise UserError(f"{where}: must lie in [{low}, {high}], got {value}")
    return int(value)
