"""Scenes: the volume, its transfer function, camera, lights, environment and render settings.

A scene is read from TOML (format in the README), validated field by field, and frozen.
CLI options override fields through :meth:`Scene.with_overrides`.
"""

from __future__ import annotations

import dataclasses
import math
import warnings
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .camera import Camera
from .config import memory_budget
from .errors import UserError
from .transfer import TransferFunction
from .volume import Volume

SHADINGS = ("phase", "surface", "hybrid")
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


@dataclass(frozen=True)
class RenderSettings:
    spp: int = 64
    seed: int = 0
    step_mm: float = 0.5
    events: int = 2
    shading: str = "hybrid"
    phase_g: float = 0.0
    feature_levels: tuple[float, ...] = ()
    surface_gradient: float = 0.15

    def to_dict(self) -> dict:
        out = dataclasses.asdict(self)
        out["feature_levels"] = list(self.feature_levels)
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

    def with_overrides(self, *, spp=None, seed=None, width=None, height=None, step_mm=None, events=None) -> "Scene":
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
        if width is not None:
            camera = dataclasses.replace(camera, width=_check_int(width, f"{where}: --width", 1, MAX_RESOLUTION))
        if height is not None:
            camera = dataclasses.replace(camera, height=_check_int(height, f"{where}: --height", 1, MAX_RESOLUTION))
        scene = dataclasses.replace(self, settings=settings, camera=camera)
        scene.check_budget()
        return scene

    def check_budget(self) -> None:
        from .accumulate import n_channels

        n_bytes = self.camera.image_size[0] * self.camera.image_size[1] * n_channels(len(self.settings.feature_levels)) * 8 * 2
        if n_bytes > memory_budget():
            raise UserError(
                f"{self.source}: camera.width x camera.height = {self.camera.width} x {self.camera.height} needs "
                f"{n_bytes / 2**20:.0f} MiB of buffers, over the memory budget of {memory_budget() / 2**20:.0f} MiB"
            )

    def to_dict(self) -> dict:
        """The scene as parsed, for metadata (the volume by its source, the transfer function in full)."""
        return {
            "volume": {"path": self.volume.source, "shape": list(self.volume.shape),
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
        from ._kernels.integrate import box_interval, to_index, to_index_direction

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


def load_scene(path) -> Scene:
    """Read a scene TOML file, load its volume and transfer function, and validate everything."""
    from .io.tomlfile import read_toml

    path = Path(path)
    return parse_scene(read_toml(path), path)


def parse_scene(data: dict, path: Path | str, base_dir: Path | None = None) -> Scene:
    """Build a :class:`Scene` from a parsed TOML table; relative paths resolve against the file's folder."""
    from .io.tomlfile import Table
    from .transfer import load_transfer_function, parse_transfer_function
    from .volume import load_volume

    path = Path(path)
    base = Path(base_dir) if base_dir is not None else path.parent
    top = Table(data, path)

    volume_table = top.table("volume")
    volume_path = volume_table.string("path")
    spacing = volume_table.vector("spacing_mm", None, low=1e-9)
    origin = volume_table.vector("origin_mm", None)
    volume_table.finish()
    resolved = (base / volume_path) if not Path(volume_path).is_absolute() else Path(volume_path)
    try:
        volume = load_volume(resolved, spacing_mm=spacing, origin_mm=origin)
    except UserError as error:
        raise UserError(f"{volume_table.where('path')}: {error}") from None

    tf_table = top.table("transfer_function")
    if tf_table.has("path"):
        tf_path = tf_table.string("path")
        tf_table.finish()
        tf_resolved = (base / tf_path) if not Path(tf_path).is_absolute() else Path(tf_path)
        try:
            transfer_function = load_transfer_function(tf_resolved)
        except UserError as error:
            raise UserError(f"{tf_table.where('path')}: {error}") from None
    else:
        transfer_function = parse_transfer_function(dict(tf_table.data), f"{path} [transfer_function]")
        tf_table.used.update(tf_table.data)

    camera = _parse_camera(top.table("camera", {}), volume)
    lights = tuple(_parse_light(item, path, index) for index, item in enumerate(_list_of_tables(top, "lights")))
    environment, image = _parse_environment(top.table("environment", {}), base)
    settings = _parse_settings(top.table("render", {}), volume)
    top.finish()

    scene = Scene(volume=volume, transfer_function=transfer_function, camera=camera, lights=lights,
                  environment=environment, settings=settings, source=str(path), environment_image=image)
    scene.check_budget()
    if not scene.sees_volume():
        warnings.warn(f"{path}: camera: the view misses the volume; the render will show only background",
                      ViewWarning, stacklevel=2)
    return scene


def _list_of_tables(top, key):
    value = top.raw(key, [])
    if isinstance(value, dict):
        value = [value]
    if not isinstance(value, list):
        raise top.error(key, "expected [[lights]] tables")
    return value


def _parse_camera(table, volume: Volume) -> Camera:
    from .io.tomlfile import Table

    if not isinstance(table, Table):
        table = Table(table, "<defaults>", "camera")
    centre = tuple(float(c) for c in volume.center)
    target = table.vector("target", centre)
    default_position = tuple(np.asarray(centre) + volume.bounding_radius * np.array([0.0, -3.2, 1.2]))
    position = table.vector("position", default_position)
    up = table.vector("up", (0.0, 0.0, 1.0))
    fov = table.number("fov_deg", 30.0, low=0.0, low_open=True, high=170.0)
    width = table.integer("width", 512, low=1, high=MAX_RESOLUTION)
    height = table.integer("height", 512, low=1, high=MAX_RESOLUTION)
    table.finish()
    if np.allclose(position, target):
        raise table.error("position", f"equals the target {list(target)}; the camera has no viewing direction")
    if np.linalg.norm(up) == 0:
        raise table.error("up", "must not be the zero vector")
    if np.linalg.norm(np.cross(np.subtract(target, position), up)) < 1e-9 * np.linalg.norm(np.subtract(target, position)):
        raise table.error("up", "is parallel to the viewing direction; choose another up vector")
    return Camera(position=position, target=target, up=up, fov_deg=fov, width=width, height=height)


def _parse_light(item, path, index) -> Light:
    from .io.tomlfile import Table

    table = Table(item, path, f"lights[{index}]")
    kind = table.string("kind", "directional", choices=LIGHT_KINDS)
    if kind == "directional":
        toward = np.array(table.vector("toward"))
        norm = np.linalg.norm(toward)
        if norm == 0:
            raise table.error("toward", "must not be the zero vector")
        power = table.vector("irradiance", (1.0, 1.0, 1.0), low=0.0)
        vector = tuple(float(v) for v in toward / norm)
    else:
        vector = table.vector("position")
        power = table.vector("intensity", low=0.0)
    table.finish()
    return Light(kind=kind, vector=vector, power=power)


def _parse_environment(table, base: Path):
    from .io.tomlfile import Table

    if not isinstance(table, Table):
        table = Table(table, "<defaults>", "environment")
    kind = table.string("kind", "constant", choices=ENVIRONMENTS)
    image = None
    image_path = None
    black = (0.0, 0.0, 0.0)
    if kind == "constant":
        colors = (table.vector("radiance", black, low=0.0), black, black)
    elif kind == "sky":
        colors = (table.vector("zenith", (0.25, 0.35, 0.6), low=0.0), table.vector("horizon", (0.7, 0.75, 0.8), low=0.0),
                  table.vector("ground", (0.2, 0.18, 0.15), low=0.0))
    else:
        image_path = table.string("path")
        resolved = base / image_path if not Path(image_path).is_absolute() else Path(image_path)
        from .io.exr import read_environment

        try:
            image = read_environment(resolved)
        except UserError as error:
            raise UserError(f"{table.where('path')}: {error}") from None
        colors = (black, black, black)
    background_value = table.raw("background", "environment")
    if background_value == "environment":
        background = None
    elif isinstance(background_value, str):
        raise table.error("background", f"must be \"environment\" or an RGB triple, got {background_value!r}")
    else:
        from .io.tomlfile import check_vector

        background = check_vector(background_value, table.where("background"), low=0.0)
    table.finish()
    return Environment(kind=kind, colors=colors, image_path=image_path, background=background), image


def _parse_settings(table, volume: Volume) -> RenderSettings:
    from .io.tomlfile import Table, check_vector

    if not isinstance(table, Table):
        table = Table(table, "<defaults>", "render")
    default_step = float(min(volume.spacing)) / 2.0
    spp = table.integer("spp", 64, low=1, high=2**31 - 1)
    seed = table.integer("seed", 0, low=0, high=2**63 - 1)
    step = table.number("step_mm", default_step, low=0.0, low_open=True)
    if step < 1e-4 * float(min(volume.spacing)):
        raise table.error("step_mm", f"{step} mm is far below the voxel spacing; the march would take forever")
    events = table.integer("events", 2, low=1, high=4)
    shading = table.string("shading", "hybrid", choices=SHADINGS)
    phase_g = table.number("phase_g", 0.0, low=-0.99, high=0.99)
    levels = table.raw("feature_levels", [])
    if not isinstance(levels, list) or len(levels) > 2:
        raise table.error("feature_levels", f"expected a list of at most 2 opacity levels, got {levels!r}")
    levels = check_vector(levels, table.where("feature_levels"), length=len(levels), low=0.0, high=1.0)
    if any(level <= 0 or level >= 1 for level in levels):
        raise table.error("feature_levels", f"levels must lie strictly between 0 and 1, got {list(levels)}")
    if len(levels) == 2 and levels[1] <= levels[0]:
        raise table.error("feature_levels", f"levels must increase, got {list(levels)}")
    surface_gradient = table.number("surface_gradient", 0.15, low=0.0, low_open=True)
    table.finish()
    return RenderSettings(spp=spp, seed=seed, step_mm=step, events=events, shading=shading, phase_g=phase_g,
                          feature_levels=tuple(levels), surface_gradient=surface_gradient)
