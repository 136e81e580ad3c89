"""Camera paths of a ``[sequence]`` table (README, "Sequences").

``kind = "orbit"``: the scene's camera turned about ``axis`` (default world +z) through ``center`` (default
the camera's target) by ``degrees`` over the sequence; frame k of N is at ``degrees x k / (N - 1)``.
``kind = "keys"``: ``[[sequence.keys]]`` with ``position``, ``target`` and optionally ``fov_deg`` (default the
scene camera's), at least two, interpolated by the uniform Catmull-Rom spline (Catmull and Rom 1974) through
the keys, ends repeated; ``even_speed = true`` spaces the frames evenly by the positions' arc length. The
camera's ``up``, size and the rest are the scene's.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np

from ..errors import UserError
from ..scene.camera import Camera

KINDS = ("orbit", "keys", "still")


@dataclasses.dataclass(frozen=True)
class CameraPath:
    kind: str
    frames: int
    axis: tuple[float, float, float] = (0.0, 0.0, 1.0)
    center: tuple[float, float, float] | None = None
    degrees: float = 0.0
    keys: tuple = ()                      # ((position, target, fov_deg), ...)
    even_speed: bool = False
    volumes: tuple = ()                   # time steps: one volume file per frame (or per `stride` frames)
    stride: int = 1
    mm_per_frame: float = 0.0             # "pan" (dataset sequences)

    def cameras(self, base: Camera) -> list[Camera]:
        """The camera of every frame, from the scene's camera ``base``."""
        if self.kind == "orbit":
            return [_orbit(base, self, k) for k in range(self.frames)]
        if self.kind == "still":
            return [base] * self.frames
        if self.kind == "pan":                      # dataset sequences: along the camera's right, mm_per_frame a frame
            _, right, _ = base.frame()
            shifts = [right * self.mm_per_frame * k for k in range(self.frames)]
            return [dataclasses.replace(base, position=tuple(float(v) for v in np.asarray(base.position) + shift),
                                        target=tuple(float(v) for v in np.asarray(base.target) + shift)) for shift in shifts]
        return _keyed(base, self)

    def volume_of(self, k: int):
        """The volume file of frame k (None: the scene's own volume)."""
        if not self.volumes:
            return None
        return self.volumes[min(k // self.stride, len(self.volumes) - 1)]


def parse_path(data: dict, path, base: Camera, frames: int | None) -> CameraPath:
    """The ``[sequence]`` table of scene file ``path``; ``frames`` from the command line wins over its own."""
    from ..io.tomlfile import Table

    if "sequence" not in data:
        raise UserError(f"{path}: [sequence]: missing; a sequence needs a camera path (README, \"Sequences\")")
    table = Table(data["sequence"], path, "sequence")
    kind = table.string("kind", choices=KINDS)
    count = table.integer("frames", 8, low=2, high=100000)
    if frames is not None:
        if frames < 2:
            raise UserError(f"--frames: a sequence needs at least 2 frames, got {frames}")
        count = frames
    if base.crop is not None:
        raise table.error("kind", "a sequence renders whole frames; remove the camera's crop")
    volumes, stride = _parse_volumes(table, path)
    if kind == "still":
        table.finish()
        return CameraPath("still", count, volumes=volumes, stride=stride)
    if kind == "orbit":
        axis = table.vector("axis", (0.0, 0.0, 1.0))
        if np.linalg.norm(axis) == 0:
            raise table.error("axis", "must not be the zero vector")
        center = table.vector("center", None)
        degrees = table.number("degrees")
        if degrees == 0 or not math.isfinite(degrees):
            raise table.error("degrees", f"a zero-length orbit does not move; give a non-zero angle, got {degrees}")
        table.finish()
        return CameraPath("orbit", count, tuple(float(a) for a in axis), None if center is None else tuple(center),
                          float(degrees), volumes=volumes, stride=stride)
    keys = table.raw("keys", [])
    if not isinstance(keys, list) or len(keys) < 2:
        raise table.error("keys", f"a keyed path needs at least 2 [[sequence.keys]], got "
                          f"{len(keys) if isinstance(keys, list) else keys!r}")
    parsed = []
    for number, key in enumerate(keys):
        key_table = Table(key, path, f"sequence.keys[{number}]")
        position = key_table.vector("position")
        target = key_table.vector("target")
        fov = key_table.number("fov_deg", base.fov_deg, low=0.0, high=179.0, low_open=True)
        key_table.finish()
        if np.allclose(position, target):
            raise key_table.error("target", "equals the position; the camera has no viewing direction")
        parsed.append((tuple(position), tuple(target), float(fov)))
    even = table.boolean("even_speed", False)
    table.finish()
    return CameraPath("keys", count, keys=tuple(parsed), even_speed=even, volumes=volumes, stride=stride)


def _parse_volumes(table, path) -> tuple[tuple, int]:
    """``volumes``: files (relative to the scene file) of the volume's time steps, and ``stride``, frames per step."""
    from pathlib import Path

    names = table.raw("volumes", [])
    if not isinstance(names, list) or not all(isinstance(n, str) for n in names):
        raise table.error("volumes", f"expected a list of volume files, got {names!r}")
    stride = table.integer("stride", 1, low=1, high=100000)
    base = Path(path).parent
    return tuple(str(p if Path(p).is_absolute() else base / p) for p in names), stride


def _rotation(axis, angle: float) -> np.ndarray:
    """Rodrigues' rotation matrix about unit ``axis`` by ``angle`` radians (right-handed)."""
    a = np.asarray(axis, dtype=np.float64)
    a = a / np.linalg.norm(a)
    k = np.array([[0.0, -a[2], a[1]], [a[2], 0.0, -a[0]], [-a[1], a[0], 0.0]])
    return np.eye(3) + math.sin(angle) * k + (1.0 - math.cos(angle)) * (k @ k)


def _orbit(base: Camera, path: CameraPath, k: int) -> Camera:
    center = np.asarray(path.center if path.center is not None else base.target, dtype=np.float64)
    rotation = _rotation(path.axis, math.radians(path.degrees * k / (path.frames - 1)))
    position = center + rotation @ (np.asarray(base.position) - center)
    target = center + rotation @ (np.asarray(base.target) - center)
    return dataclasses.replace(base, position=tuple(float(v) for v in position), target=tuple(float(v) for v in target))


def _catmull_rom(points: np.ndarray, u: float) -> np.ndarray:
    """The uniform Catmull-Rom spline through ``points`` (K, D) at parameter u in [0, K - 1], ends repeated."""
    n = len(points)
    i = min(int(math.floor(u)), n - 2)
    t = u - i
    p0, p1, p2, p3 = points[max(i - 1, 0)], points[i], points[i + 1], points[min(i + 2, n - 1)]
    return 0.5 * ((2 * p1) + (-p0 + p2) * t + (2 * p0 - 5 * p1 + 4 * p2 - p3) * t * t + (-p0 + 3 * p1 - 3 * p2 + p3) * t ** 3)


def _keyed(base: Camera, path: CameraPath) -> list[Camera]:
    points = np.array([list(p) + list(t) + [f] for p, t, f in path.keys], dtype=np.float64)
    last = len(points) - 1
    params = np.linspace(0.0, last, path.frames)
    if path.even_speed:
        fine = np.linspace(0.0, last, 64 * last + 1)
        positions = np.array([_catmull_rom(points, u)[:3] for u in fine])
        arc = np.concatenate([[0.0], np.cumsum(np.linalg.norm(np.diff(positions, axis=0), axis=1))])
        if arc[-1] > 0:
            params = np.interp(np.linspace(0.0, arc[-1], path.frames), arc, fine)
    cameras = []
    for u in params:
        value = _catmull_rom(points, float(u))
        cameras.append(dataclasses.replace(base, position=tuple(float(v) for v in value[:3]),
                                           target=tuple(float(v) for v in value[3:6]), fov_deg=float(value[6])))
    return cameras
