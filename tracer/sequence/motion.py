"""The frames' camera matrices, motion vectors and disocclusion (README, "Sequences").

Conventions. Camera coordinates: x right, y down, z forward (the viewing direction), right-handed, in mm.
``world_to_camera`` (4 x 4) takes homogeneous world points to them. ``projection`` (4 x 4) takes camera
points to homogeneous pixel coordinates: ``[u z, v z, z, 1] = projection @ [x, y, z, 1]``, u to the right and v
down in pixels from the image's top-left corner (pixel (row, col) spans [col, col + 1) x [row, row + 1)),
``fx = fy = (height / 2) / tan(fov / 2)``, ``cx = width / 2``, ``cy = height / 2``.

``motion`` (H, W, 2), float32, [x, y] in pixels: for a pixel whose samples have an event 1, where its mean
event-1 point lies on the previous frame's image minus where it lies on this frame's: the motion of that
point between the two images (camera motion only; for a volume that changes, the point is this frame's).
0 on the first frame and where no sample has the event. ``motion_event2`` the same for event 2.
``disocclusion`` (H, W) in [0, 1]: the fraction of the pixel's samples whose event-1 point was not the visible
event 1 on the previous frame: it projects off that image, onto a pixel where that frame saw no event 1, or
at a distance from that frame's camera that differs from that pixel's event-1 depth by more than
``DEPTH_TOLERANCE`` of it plus ``SPACING_TOLERANCE`` voxel spacings. Samples without event 1 count as visible.
"""

from __future__ import annotations

import math

import numpy as np

#: Disocclusion tolerance: this fraction of the previous frame's event-1 depth ...
DEPTH_TOLERANCE = 0.05
#: ... plus this many mean voxel spacings.
SPACING_TOLERANCE = 2.0


def world_to_camera(camera) -> np.ndarray:
    forward, right, up = camera.frame()
    rotation = np.stack([right, -up, forward])
    out = np.eye(4)
    out[:3, :3] = rotation
    out[:3, 3] = -rotation @ np.asarray(camera.position, dtype=np.float64)
    return out


def projection(camera) -> np.ndarray:
    focal = (camera.height / 2.0) / math.tan(math.radians(camera.fov_deg) / 2.0)
    return np.array([[focal, 0.0, camera.width / 2.0, 0.0], [0.0, focal, camera.height / 2.0, 0.0],
                     [0.0, 0.0, 1.0, 0.0], [0.0, 0.0, 0.0, 1.0]])


def project(camera, points) -> tuple[np.ndarray, np.ndarray]:
    """(..., 2) pixel coordinates [u, v] of world points, and their camera z (> 0 in front)."""
    points = np.asarray(points, dtype=np.float64)
    homogeneous = np.concatenate([points, np.ones(points.shape[:-1] + (1,))], axis=-1)
    camera_points = homogeneous @ world_to_camera(camera).T
    pixels = camera_points @ projection(camera).T
    z = camera_points[..., 2]
    with np.errstate(divide="ignore", invalid="ignore"):
        uv = pixels[..., :2] / z[..., None]
    return uv, z


def motion_vectors(position, hit, camera, previous) -> np.ndarray:
    """(H, W, 2) float32: see the module docstring."""
    out = np.zeros(position.shape[:2] + (2,), np.float32)
    if previous is None:
        return out
    have = np.asarray(hit) > 0
    now, _ = project(camera, position[have])
    before, z = project(previous, position[have])
    motion = np.where((z > 0)[:, None], before - now, 0.0)
    out[have] = motion
    return out


class DisocclusionCounter:
    """A per-sample sink (``render(per_sample=...)``): counts, per pixel, samples whose event-1 point was not
    visible on the previous frame (see the module docstring)."""

    def __init__(self, count: int, previous, previous_depth, previous_hit, spacing_mm: float):
        self.count = int(count)
        self.previous = previous
        self.depth = np.asarray(previous_depth, dtype=np.float64)
        self.hit = np.asarray(previous_hit) > 0
        self.tolerance_mm = SPACING_TOLERANCE * float(spacing_mm)
        self.hidden = None

    def add(self, one) -> None:
        buffers = one.to_buffers()
        position, hit = buffers["event1_position"].astype(np.float64), buffers["event1_hit"] > 0
        if self.hidden is None:
            self.hidden = np.zeros(hit.shape, np.int64)
        if self.previous is None or not hit.any():
            return
        height, width = self.depth.shape
        uv, z = project(self.previous, position[hit])
        distance = np.linalg.norm(position[hit] - np.asarray(self.previous.position), axis=-1)
        with np.errstate(invalid="ignore"):
            col, row = np.floor(uv[:, 0]), np.floor(uv[:, 1])
        inside = (z > 0) & (col >= 0) & (col < width) & (row >= 0) & (row < height)
        hidden = ~inside
        r, c = row[inside].astype(int), col[inside].astype(int)
        seen = self.hit[r, c]
        off = np.abs(distance[inside] - self.depth[r, c]) > DEPTH_TOLERANCE * self.depth[r, c] + self.tolerance_mm
        hidden[inside] = ~seen | off
        self.hidden[hit] += hidden

    def fraction(self, n_samples: int) -> np.ndarray:
        return (self.hidden / max(n_samples, 1)).astype(np.float32)
