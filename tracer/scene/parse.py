"""Reading a scene from TOML (format in the README), field by field, with one-line errors."""

from __future__ import annotations

import warnings
from pathlib import Path

import numpy as np

from ..errors import UserError
from ..volumes.volume import Volume
from .camera import DEFAULT_OFFSET, Camera
from .model import (ENVIRONMENTS, ESTIMATORS, MAX_BOUNCES, LIGHT_KINDS, MAX_RESOLUTION, FORMER_SCATTERING_NAMES, SCATTERINGS, Environment, Light, RenderSettings, Scene,
                    ViewWarning)


def load_scene(path) -> Scene:
    """Read a scene TOML file, load its volume and transfer function, and validate everything."""
    from ..io.tomlfile import read_toml

    path = Path(path)
    return parse_scene(read_toml(path), path)


def parse_scene(data: dict, path: Path | str, base_dir: Path | None = None) -> Scene:
    """Build a :class:`Scene` from a parsed TOML table; relative paths resolve against the file's folder."""
    from ..io.tomlfile import Table
    from ..optics.transfer import load_transfer_function, parse_transfer_function
    from ..volumes.loading import load_volume

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
    top.used.add("sequence")            # a camera path, read by tracer.sequence.path (README, "Sequences")
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
    from ..io.tomlfile import Table

    if not isinstance(table, Table):
        table = Table(table, "<defaults>", "camera")
    centre = tuple(float(c) for c in volume.center)
    target = table.vector("target", centre)
    default_position = tuple(np.asarray(centre) + volume.bounding_radius * np.array(DEFAULT_OFFSET))
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
    from ..io.tomlfile import Table

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
    from ..io.tomlfile import Table

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
        from ..outputs.exr import read_environment

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
        from ..io.tomlfile import check_vector

        background = check_vector(background_value, table.where("background"), low=0.0)
    table.finish()
    return Environment(kind=kind, colors=colors, image_path=image_path, background=background), image


def _parse_settings(table, volume: Volume) -> RenderSettings:
    from ..io.tomlfile import Table, check_vector

    if not isinstance(table, Table):
        table = Table(table, "<defaults>", "render")
    default_step = float(min(volume.spacing)) / 2.0
    spp = table.integer("spp", 64, low=1, high=2**31 - 1)
    seed = table.integer("seed", 0, low=0, high=2**63 - 1)
    step = table.number("step_mm", default_step, low=0.0, low_open=True)
    if step < 1e-4 * float(min(volume.spacing)):
        raise table.error("step_mm", f"{step} mm is far below the voxel spacing; the march would take forever")
    events = table.integer("events", 2, low=1, high=4)
    scattering, interface_gradient = parse_scattering(table)
    phase_g = table.number("phase_g", 0.0, low=-0.99, high=0.99)
    levels = table.raw("feature_levels", [])
    if not isinstance(levels, list) or len(levels) > 2:
        raise table.error("feature_levels", f"expected a list of at most 2 opacity levels, got {levels!r}")
    levels = check_vector(levels, table.where("feature_levels"), length=len(levels), low=0.0, high=1.0)
    if any(level <= 0 or level >= 1 for level in levels):
        raise table.error("feature_levels", f"levels must lie strictly between 0 and 1, got {list(levels)}")
    if len(levels) == 2 and levels[1] <= levels[0]:
        raise table.error("feature_levels", f"levels must increase, got {list(levels)}")
    bounces, estimator = parse_transport(table)
    features = parse_features(table)
    table.finish()
    return RenderSettings(spp=spp, seed=seed, step_mm=step, events=events, scattering=scattering, phase_g=phase_g,
                          feature_levels=tuple(levels), interface_gradient=interface_gradient, bounces=bounces,
                          estimator=estimator, features=features)


def parse_features(table) -> tuple[str, ...]:
    """``features``: candidate feature buffers to add (README, "Candidate features"), or ``["all"]``."""
    from ..rendering.buffers import check_feature_names

    return check_feature_names(table.raw("features", []), table.where("features"))


def parse_transport(table) -> tuple[int, str]:
    """``bounces`` (1 = single scattering) and ``estimator`` (``"march"`` or ``"track"``) of a ``[render]`` table."""
    bounces = table.integer("bounces", 1, low=1, high=MAX_BOUNCES)
    estimator = table.string("estimator", "march", choices=ESTIMATORS)
    return bounces, estimator


def parse_scattering(table) -> tuple[str, float]:
    """``scattering`` and ``interface_gradient`` of a ``[render]`` table; the names of an earlier
    release (``shading``, ``surface_gradient``) get a one-line error naming their replacement."""
    if table.has("shading"):
        old = table.raw("shading")
        new = FORMER_SCATTERING_NAMES.get(old) if isinstance(old, str) else None
        hint = f'scattering = "{new}"' if new else f'scattering = one of {", ".join(SCATTERINGS)}'
        raise table.error("shading", f"is now called scattering; write {hint} "
                          '(former names: "phase" -> "medium", "surface" -> "interface", "hybrid" -> "graded")')
    if table.has("surface_gradient"):
        raise table.error("surface_gradient", "is now called interface_gradient (same meaning and value)")
    scattering = table.raw("scattering", "graded")
    if isinstance(scattering, str) and scattering in FORMER_SCATTERING_NAMES:
        raise table.error("scattering", f'"{scattering}" is now called "{FORMER_SCATTERING_NAMES[scattering]}"')
    scattering = table.string("scattering", "graded", choices=SCATTERINGS)
    interface_gradient = table.number("interface_gradient", 0.15, low=0.0, low_open=True)
    return scattering, interface_gradient
