"""Dataset plans: which volumes, transfer functions, views, lights and sample counts make a dataset.

A plan is a TOML file (schema in the README, example in ``examples/dataset_plan.toml``). It
expands into items, one per view: (volume, transfer function variant, view). Every random
choice of an item (view jitter, distance, field of view, light, environment, transfer-function
jitter, crop) is a pure function of (plan seed, item index), drawn from the counter-based
generator, so a plan always expands to the same items, in any order, on any worker.
"""

from __future__ import annotations

import dataclasses
import hashlib
import json
import math
from dataclasses import dataclass
from functools import cached_property
from pathlib import Path

import numpy as np

from .._kernels.rng import mix64_numpy, uniform_numpy
from ..scene.camera import Camera
from ..errors import UserError
from ..scene import ENVIRONMENTS, Environment, Light, RenderSettings
from ..scene.parse import parse_features, parse_scattering, parse_transport
from ..optics.transfer import TransferFunction

#: Input renders use sample indices from here on, references from 0: never the same indices.
INPUT_SAMPLE_BASE = 2**40
GOLDEN_ANGLE = math.pi * (3.0 - math.sqrt(5.0))
SPLIT_BY = ("view", "volume")

# random dimensions per item (stream 11 of the generator)
_STREAM = 11
_D_VIEW_Z, _D_VIEW_PHI, _D_DISTANCE, _D_FOV = 0, 1, 2, 3
_D_LIGHT_Z, _D_LIGHT_PHI, _D_IRRADIANCE, _D_ENVIRONMENT = 4, 5, 6, 7
_D_CROP_ROW, _D_CROP_COL, _D_SPLIT = 8, 9, 10
_D_JITTER = 32          # transfer-function jitter: 2 per control point from here


@dataclass(frozen=True)
class VolumeEntry:
    path: Path
    transfer_functions: tuple[Path, ...]
    spacing_mm: tuple[float, float, float] | None = None
    origin_mm: tuple[float, float, float] | None = None


@dataclass(frozen=True)
class ItemSpec:
    """One dataset item: a view of one volume under one transfer-function variant."""

    index: int
    item_id: str
    volume_index: int
    tf_index: int
    variant: int                 # 0: the function as written; k > 0: the k-th jittered copy
    view: int
    seed: int
    split: str


@dataclass(frozen=True, eq=False)
class DatasetPlan:
    """A parsed, validated plan. ``items()`` lists what it makes; ``scene_for(item)`` builds a scene."""

    source: Path
    name: str
    seed: int
    formats: tuple[str, ...]
    volumes: tuple[VolumeEntry, ...]
    tf_variants: int
    tf_value_jitter: float
    tf_opacity_jitter: float
    views_per_volume: int
    view_jitter: float
    distance_range: tuple[float, float]
    elevation_range_deg: tuple[float, float]
    fov_range_deg: tuple[float, float]
    light_toward: tuple[float, float, float]
    light_cone_deg: float
    irradiance_range: tuple[float, float]
    environments: tuple[Environment, ...]
    width: int
    height: int
    crop: tuple[int, int] | None
    input_spp: tuple[int, ...]
    reference_spp: int
    reference_target_error: float | None
    reference_min_psnr: float | None
    reference_chunks: int
    settings: RenderSettings
    splits: tuple[tuple[str, float], ...]
    split_by: str
    raw: dict = dataclasses.field(default_factory=dict, repr=False)
    noisy_pairs: bool = False          # a second render of every input spp over its own samples
    reference_halves: bool = False     # the reference also written as two halves of its samples
    sequence: object = None            # a CameraPath template: every item a sequence of frames (README, "Datasets")

    @cached_property
    def medical(self) -> bool:
        """Whether the plan renders a medical scan: a transfer function marked ``medical = true``, or a
        volume whose NRRD header names a patient space (README, "Orientation"). Reads headers only."""
        from ..optics.transfer import load_transfer_function
        from ..volumes.orientation import PATIENT_SPACES, normalise_space

        for entry in self.volumes:
            if any(load_transfer_function(path).medical for path in entry.transfer_functions):
                return True
            if entry.path.suffix.lower() in (".nrrd", ".nhdr"):
                import nrrd

                try:
                    space = nrrd.read_header(str(entry.path)).get("space")
                except (OSError, nrrd.NRRDError, ValueError):
                    continue
                if normalise_space(space) in PATIENT_SPACES:
                    return True
        return False

    @cached_property
    def fingerprint(self) -> str:
        """sha256 of the plan as parsed; a resume must see the same plan."""
        return hashlib.sha256(json.dumps(self.raw, sort_keys=True, default=str).encode()).hexdigest()

    # --- items -----------------------------------------------------------------------
    def items(self) -> tuple[ItemSpec, ...]:
        """Every item of the plan, in index order (worked out once per plan, then kept)."""
        return self._items

    @cached_property
    def _items(self) -> tuple[ItemSpec, ...]:
        items = []
        index = 0
        n_variants = 1 + self.tf_variants
        for v, entry in enumerate(self.volumes):
            for t in range(len(entry.transfer_functions)):
                for variant in range(n_variants):
                    for view in range(self.views_per_volume):
                        seed = int(mix64_numpy(np.uint64(self.seed) ^ mix64_numpy(np.uint64(index + 1))) >> np.uint64(1))
                        volume_name = entry.path.stem
                        item_id = f"{index:05d}-{volume_name}-tf{t}-var{variant}-view{view:03d}"
                        items.append(ItemSpec(index, item_id, v, t, variant, view, seed, ""))
                        index += 1
        return tuple(self._assign_splits(items))

    def _assign_splits(self, items: list[ItemSpec]) -> list[ItemSpec]:
        """Deterministic splits by hashed order: whole volumes, or single views, never one view in two splits."""
        if self.split_by == "volume":
            groups = sorted({item.volume_index for item in items})
            key = {g: uniform_numpy(self.seed, g, _STREAM + 1, _D_SPLIT) for g in groups}
            order = sorted(groups, key=lambda g: key[g])
            names = _cut(order, self.splits)
            return [dataclasses.replace(item, split=names[item.volume_index]) for item in items]
        key = {item.index: uniform_numpy(self.seed, item.index, _STREAM, _D_SPLIT) for item in items}
        order = sorted((item.index for item in items), key=lambda i: key[i])
        names = _cut(order, self.splits)
        return [dataclasses.replace(item, split=names[item.index]) for item in items]

    def _u(self, item: ItemSpec, dimension: int) -> float:
        return float(uniform_numpy(self.seed, item.index, _STREAM, dimension))

    # --- what an item looks like ---------------------------------------------------------
    def transfer_function(self, item: ItemSpec, base: TransferFunction, data_range) -> tuple[TransferFunction, dict]:
        """The item's transfer function and a record of its jitter (bounded, order-preserving)."""
        if item.variant == 0 or (self.tf_value_jitter == 0 and self.tf_opacity_jitter == 0):
            return base, {"variant": item.variant, "value_shift": 0.0, "opacity_scale": []}
        low, high = data_range
        span = max(high - low, 1e-12)
        shift = (self._u(item, _D_JITTER) * 2 - 1) * self.tf_value_jitter * span
        scales = np.array([1 + (self._u(item, _D_JITTER + 1 + k) * 2 - 1) * self.tf_opacity_jitter
                           for k in range(len(base.opacity))])
        jittered = dataclasses.replace(
            base,
            opacity_values=base.opacity_values + shift,
            color_values=base.color_values + shift,
            emission_values=None if base.emission_values is None else base.emission_values + shift,
            temperature_values=None if base.temperature_values is None else base.temperature_values + shift,
            opacity=np.clip(base.opacity * scales, 0.0, 1.0),
            name=f"{base.name} (jitter {item.variant})",
        )
        return jittered, {"variant": item.variant, "value_shift": shift, "opacity_scale": scales.round(6).tolist()}

    def camera(self, item: ItemSpec, center, radius) -> Camera:
        """Fibonacci-sphere direction ``view`` of ``views_per_volume``, within the elevation limits, jittered."""
        n = self.views_per_volume
        low, high = (math.sin(math.radians(a)) for a in self.elevation_range_deg)
        jitter = self.view_jitter
        t = (item.view + 0.5 + jitter * (self._u(item, _D_VIEW_Z) - 0.5)) / n
        z = low + (high - low) * min(max(t, 0.0), 1.0)
        phi = item.view * GOLDEN_ANGLE + jitter * GOLDEN_ANGLE * (self._u(item, _D_VIEW_PHI) - 0.5)
        ring = math.sqrt(max(0.0, 1 - z * z))
        direction = np.array([ring * math.cos(phi), ring * math.sin(phi), z])
        d0, d1 = self.distance_range
        distance = (d0 + (d1 - d0) * self._u(item, _D_DISTANCE)) * radius
        f0, f1 = self.fov_range_deg
        fov = f0 + (f1 - f0) * self._u(item, _D_FOV)
        up = (0.0, 0.0, 1.0) if abs(z) < 0.999 else (0.0, 1.0, 0.0)
        position = tuple(float(c) for c in np.asarray(center) + distance * direction)
        camera = Camera(position=position, target=tuple(float(c) for c in center), up=up, fov_deg=fov,
                        width=self.width, height=self.height)
        if self.crop is not None:
            ch, cw = self.crop
            row = int(self._u(item, _D_CROP_ROW) * (self.height - ch + 1))
            col = int(self._u(item, _D_CROP_COL) * (self.width - cw + 1))
            camera = dataclasses.replace(camera, crop=(row, col, ch, cw))
        return camera

    def light(self, item: ItemSpec) -> Light:
        """One directional light, uniformly inside the cone around ``light_toward``, grey irradiance in range."""
        axis = np.asarray(self.light_toward, dtype=np.float64)
        axis /= np.linalg.norm(axis)
        cos_max = math.cos(math.radians(self.light_cone_deg))
        cos_theta = 1 - self._u(item, _D_LIGHT_Z) * (1 - cos_max)
        phi = 2 * math.pi * self._u(item, _D_LIGHT_PHI)
        helper = np.array([1.0, 0, 0]) if abs(axis[0]) < 0.9 else np.array([0, 1.0, 0])
        tangent = np.cross(axis, helper)
        tangent /= np.linalg.norm(tangent)
        bitangent = np.cross(axis, tangent)
        sin_theta = math.sqrt(max(0.0, 1 - cos_theta**2))
        toward = axis * cos_theta + sin_theta * (tangent * math.cos(phi) + bitangent * math.sin(phi))
        e0, e1 = self.irradiance_range
        irradiance = e0 + (e1 - e0) * self._u(item, _D_IRRADIANCE)
        return Light("directional", tuple(float(c) for c in toward), (irradiance,) * 3)

    def environment(self, item: ItemSpec) -> Environment:
        choice = min(int(self._u(item, _D_ENVIRONMENT) * len(self.environments)), len(self.environments) - 1)
        return self.environments[choice]

    def reference_range(self) -> tuple[int, int]:
        return 0, self.reference_spp

    def input_ranges(self) -> list[tuple[int, int]]:
        """Disjoint sample ranges of the inputs, above every reference sample index."""
        ranges = []
        start = INPUT_SAMPLE_BASE
        for spp in self.input_spp:
            ranges.append((start, start + spp))
            start += spp
        return ranges

    def pair_ranges(self) -> list[tuple[int, int]]:
        """The second render of each input (``noisy_pairs``): ranges after the last input's, disjoint from all."""
        ranges = []
        start = INPUT_SAMPLE_BASE + sum(self.input_spp)
        for spp in self.input_spp:
            ranges.append((start, start + spp))
            start += spp
        return ranges


def _cut(order, splits) -> dict:
    """Assign names to the ordered keys by cumulative fractions (largest-remainder rounding)."""
    n = len(order)
    fractions = np.array([f for _, f in splits], dtype=np.float64)
    counts = np.floor(fractions * n).astype(int)
    remainder = fractions * n - counts
    for k in np.argsort(-remainder, kind="stable")[: n - counts.sum()]:
        counts[k] += 1
    names = {}
    position = 0
    for (name, _), count in zip(splits, counts):
        for key in order[position:position + count]:
            names[key] = name
        position += count
    return names


def load_plan(path) -> DatasetPlan:
    from ..io.tomlfile import read_toml

    path = Path(path)
    return parse_plan(read_toml(path), path)


def parse_plan(data: dict, path: Path) -> DatasetPlan:
    from ..io.tomlfile import Table, check_vector
    from ..scene.parse import _parse_environment

    base = path.parent
    top = Table(data, path)
    name = top.string("name", path.stem)
    seed = top.integer("seed", 0, low=0, high=2**63 - 1)
    formats = top.raw("formats", ["npz"])
    if not isinstance(formats, list) or any(f not in ("npz", "exr") for f in formats):
        raise top.error("formats", f"expected a list of \"npz\" and \"exr\", got {formats!r}")

    volume_list = top.raw("volumes")
    if not isinstance(volume_list, list) or not volume_list:
        raise top.error("volumes", "expected one or more [[volumes]] tables")
    volumes = []
    for index, item in enumerate(volume_list):
        table = Table(item, path, f"volumes[{index}]")
        volume_path = _resolve(base, table.string("path"))
        tfs = table.raw("transfer_functions")
        if not isinstance(tfs, list) or not tfs or not all(isinstance(t, str) for t in tfs):
            raise table.error("transfer_functions", "expected a list of transfer-function file paths")
        spacing = table.vector("spacing_mm", None, low=1e-9)
        origin = table.vector("origin_mm", None)
        table.finish()
        for tf_path in tfs:
            if not _resolve(base, tf_path).is_file():
                raise table.error("transfer_functions", f"{_resolve(base, tf_path)}: file not found")
        if not volume_path.is_file():
            raise table.error("path", f"{volume_path}: file not found")
        volumes.append(VolumeEntry(volume_path, tuple(_resolve(base, t) for t in tfs), spacing, origin))

    jitter = top.table("transfer_jitter", {})
    jitter = jitter if isinstance(jitter, Table) else Table(jitter, path, "transfer_jitter")
    tf_variants = jitter.integer("variants", 0, low=0, high=1000)
    value_jitter = jitter.number("value", 0.0, low=0.0, high=0.5)
    opacity_jitter = jitter.number("opacity", 0.0, low=0.0, high=1.0)
    jitter.finish()

    views = top.table("views", {})
    views = views if isinstance(views, Table) else Table(views, path, "views")
    per_volume = views.integer("per_volume", 8, low=1, high=1_000_000)
    view_jitter = views.number("jitter", 0.5, low=0.0, high=1.0)
    distance = _range(views, "distance", (2.2, 3.0), low=1.0)
    elevation = _range(views, "elevation_deg", (-20.0, 60.0), low=-90.0, high=90.0)
    fov = _range(views, "fov_deg", (24.0, 34.0), low=1.0, high=170.0)
    views.finish()

    lights = top.table("lights", {})
    lights = lights if isinstance(lights, Table) else Table(lights, path, "lights")
    toward = lights.vector("toward", (0.3, -0.6, 1.0))
    if np.linalg.norm(toward) == 0:
        raise lights.error("toward", "must not be the zero vector")
    cone = lights.number("cone_deg", 35.0, low=0.0, high=180.0)
    irradiance = _range(lights, "irradiance", (1.5, 3.0), low=0.0)
    lights.finish()

    environment_list = top.raw("environments", [{"kind": "constant", "radiance": [0.15, 0.15, 0.15]}])
    if not isinstance(environment_list, list) or not environment_list:
        raise top.error("environments", "expected one or more [[environments]] tables")
    environments = []
    for index, item in enumerate(environment_list):
        table = Table(item, path, f"environments[{index}]")
        if table.has("kind") and table.data.get("kind") not in ENVIRONMENTS:
            raise table.error("kind", f"must be one of {', '.join(map(repr, ENVIRONMENTS))}")
        environment, image = _parse_environment(table, base)
        if image is not None:
            raise table.error("kind", "image environments are not supported in plans yet; use constant or sky")
        environments.append(environment)

    image = top.table("image", {})
    image = image if isinstance(image, Table) else Table(image, path, "image")
    width = image.integer("width", 256, low=1, high=16384)
    height = image.integer("height", 256, low=1, high=16384)
    crop = image.raw("crop", None)
    if crop is not None:
        crop_size = check_vector(crop, image.where("crop"), length=2, low=1)
        crop = (int(crop_size[0]), int(crop_size[1]))
        if crop[0] > height or crop[1] > width:
            raise image.error("crop", f"{list(crop)} (height, width) is larger than the image {height} x {width}")
    image.finish()

    render = top.table("render", {})
    render = render if isinstance(render, Table) else Table(render, path, "render")
    input_spp = render.raw("input_spp", [1, 2, 4, 8])
    if not isinstance(input_spp, list) or not input_spp or not all(
            isinstance(n, int) and not isinstance(n, bool) and 1 <= n <= 2**30 for n in input_spp):
        raise render.error("input_spp", f"expected a list of positive whole numbers, got {input_spp!r}")
    reference_spp = render.integer("reference_spp", 256, low=1, high=2**31 - 1)
    target_error = render.number("reference_target_error", None, low=0.0, low_open=True)
    min_psnr = render.number("reference_min_psnr", None, low=0.0, low_open=True)
    chunks = render.integer("reference_chunks", 1, low=1, high=4096)
    if chunks > 1 and (target_error is not None or min_psnr is not None):
        raise render.error("reference_chunks", "splitting the reference needs a fixed reference_spp, "
                           "not reference_target_error or reference_min_psnr")
    if chunks > reference_spp:
        raise render.error("reference_chunks", f"{chunks} chunks for {reference_spp} spp")
    noisy_pairs = render.boolean("noisy_pairs", False)
    halves = render.boolean("reference_halves", False)
    if halves:
        if target_error is not None or min_psnr is not None:
            raise render.error("reference_halves", "halves need a fixed reference_spp, "
                               "not reference_target_error or reference_min_psnr")
        if reference_spp % 2:
            raise render.error("reference_halves", f"halves need an even reference_spp, got {reference_spp}")
        if chunks % 2 and chunks > 1:
            raise render.error("reference_halves", f"halves need an even reference_chunks (each half its own chunks), got {chunks}")
        chunks = max(chunks, 2)
    step = render.number("step_mm", None, low=0.0, low_open=True)
    events = render.integer("events", 2, low=1, high=4)
    scattering, interface_gradient = parse_scattering(render)
    phase_g = render.number("phase_g", 0.0, low=-0.99, high=0.99)
    levels = render.raw("feature_levels", [])
    levels = check_vector(levels, render.where("feature_levels"), length=len(levels) if isinstance(levels, list) else -1,
                          low=1e-6, high=1 - 1e-6) if levels else ()
    if len(levels) > 2 or (len(levels) == 2 and levels[1] <= levels[0]):
        raise render.error("feature_levels", f"expected at most 2 increasing levels, got {list(levels)}")
    bounces, estimator = parse_transport(render)
    features = parse_features(render)
    render.finish()
    settings = RenderSettings(spp=reference_spp, seed=0, step_mm=step if step is not None else -1.0, events=events,
                              scattering=scattering, phase_g=phase_g, feature_levels=tuple(levels),
                              interface_gradient=interface_gradient, bounces=bounces, estimator=estimator,
                              features=features)

    splits_table = top.table("splits", {})
    splits_table = splits_table if isinstance(splits_table, Table) else Table(splits_table, path, "splits")
    split_by = splits_table.string("by", "view", choices=SPLIT_BY)
    splits = []
    for key in list(splits_table.data):
        if key == "by":
            continue
        splits.append((key, splits_table.number(key, low=0.0, high=1.0)))
    splits_table.finish()
    if not splits:
        splits = [("train", 0.8), ("validation", 0.1), ("test", 0.1)]
    total = sum(f for _, f in splits)
    if abs(total - 1.0) > 1e-6:
        raise UserError(f"{path}: splits: fractions must add up to 1, got {total:g}")
    sequence = _parse_sequence(top, path, chunks, noisy_pairs, halves, target_error, min_psnr)
    top.finish()

    return DatasetPlan(
        source=path, name=name, seed=seed, formats=tuple(dict.fromkeys(["npz", *formats])), volumes=tuple(volumes),
        tf_variants=tf_variants, tf_value_jitter=value_jitter, tf_opacity_jitter=opacity_jitter,
        views_per_volume=per_volume, view_jitter=view_jitter, distance_range=distance, elevation_range_deg=elevation,
        fov_range_deg=fov, light_toward=toward, light_cone_deg=cone, irradiance_range=irradiance,
        environments=tuple(environments), width=width, height=height, crop=crop, input_spp=tuple(input_spp),
        reference_spp=reference_spp, reference_target_error=target_error, reference_min_psnr=min_psnr,
        reference_chunks=chunks, settings=settings, splits=tuple(splits), split_by=split_by,
        raw=json.loads(json.dumps(data, default=str)) | {"__base__": str(base.resolve())},
        noisy_pairs=noisy_pairs, reference_halves=halves, sequence=sequence,
    )


def _parse_sequence(top, path, chunks, noisy_pairs, halves, target_error, min_psnr):
    """``[sequence]``: every item a camera path of ``frames`` frames, ``kind = "orbit"`` (``degrees_per_frame``
    about the view's target, ``axis``) or ``"pan"`` (``mm_per_frame`` along the camera's right)."""
    from ..io.tomlfile import Table
    from ..sequence.path import CameraPath

    if "sequence" not in top.data:
        return None
    table = top.table("sequence")
    if not isinstance(table, Table):
        raise top.error("sequence", "expected a [sequence] table")
    kind = table.string("kind", choices=("orbit", "pan"))
    frames = table.integer("frames", 8, low=2, high=1000)
    for given, key in ((chunks > 1, "reference_chunks"), (noisy_pairs, "noisy_pairs"), (halves, "reference_halves"),
                       (target_error is not None, "reference_target_error"), (min_psnr is not None, "reference_min_psnr")):
        if given:
            raise table.error("kind", f"sequence items take a fixed reference_spp and no {key}")
    if kind == "orbit":
        step = table.number("degrees_per_frame", 2.0)
        axis = table.vector("axis", (0.0, 0.0, 1.0))
        if step == 0 or np.linalg.norm(axis) == 0:
            raise table.error("degrees_per_frame", "a zero-length orbit does not move; give a non-zero angle and axis")
        table.finish()
        return CameraPath("orbit", frames, tuple(axis), None, step * (frames - 1))
    step = table.number("mm_per_frame")
    if step == 0:
        raise table.error("mm_per_frame", "a zero-length pan does not move; give a non-zero distance")
    table.finish()
    return CameraPath("pan", frames, mm_per_frame=step)


def _resolve(base: Path, value: str) -> Path:
    candidate = Path(value)
    return candidate if candidate.is_absolute() else base / candidate


def _range(table, key, default, low=None, high=None) -> tuple[float, float]:
    from ..io.tomlfile import check_vector

    value = table.raw(key, list(default))
    pair = check_vector(value, table.where(key), length=2, low=low, high=high)
    if pair[1] < pair[0]:
        raise table.error(key, f"expected [low, high], got {list(pair)}")
    return pair
