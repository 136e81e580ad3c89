"""The pinhole camera: pixel <-> ray.

Row 0 is the top of the image; columns grow toward the camera's right, ``forward x up``
(right-handed world). ``fov_deg`` is the full vertical angle; the horizontal extent follows
the aspect ratio width / height. Pixel (row r, column c) is sampled uniformly in its square.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import UserError


@dataclass(frozen=True)
class Camera:
    """A pinhole camera in world millimetres."""

    position: tuple[float, float, float]
    target: tuple[float, float, float]
    up: tuple[float, float, float] = (0.0, 0.0, 1.0)
    fov_deg: float = 30.0
    width: int = 512
    height: int = 512
    crop: tuple[int, int, int, int] | None = None   # (row, col, height, width) window of the full image

    @property
    def image_size(self) -> tuple[int, int]:
        """(height, width) of the rendered image: the crop window, or the full image."""
        if self.crop is None:
            return self.height, self.width
        return int(self.crop[2]), int(self.crop[3])

    def frame(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Unit forward, right and up vectors."""
        position = np.asarray(self.position, dtype=np.float64)
        forward = np.asarray(self.target, dtype=np.float64) - position
        length = np.linalg.norm(forward)
        if length <= 0:
            raise UserError("camera: position equals target; the camera has no viewing direction")
        forward /= length
        right = np.cross(forward, np.asarray(self.up, dtype=np.float64))
        if np.linalg.norm(right) < 1e-9:
            raise UserError("camera: up is parallel to the viewing direction; choose another up vector")
        right /= np.linalg.norm(right)
        up = np.cross(right, forward)
        return forward, right, up

    def to_array(self) -> np.ndarray:
        """(4, 3) float64 rows: position, the direction through the centre of the rendered image, and right
        and up scaled to the rendered image's half extent on the image plane at distance 1.

        A crop window is folded in here: the kernel maps the window's pixels to [-1, 1] and this
        array maps that onto the window's part of the full image plane.
        """
        forward, right, up = self.frame()
        half_height = math.tan(math.radians(self.fov_deg) / 2.0)
        half_width = half_height * self.width / self.height
        centre = forward
        if self.crop is not None:
            row, col, crop_height, crop_width = self.crop
            centre = forward + right * half_width * ((2.0 * col + crop_width) / self.width - 1.0) \
                + up * half_height * (1.0 - (2.0 * row + crop_height) / self.height)
            half_width *= crop_width / self.width
            half_height *= crop_height / self.height
        return np.array([self.position, centre, right * half_width, up * half_height], dtype=np.float64)

    def ray_directions(self, rows, cols, jitter_row=0.5, jitter_col=0.5) -> np.ndarray:
        """(..., 3) unit directions through points of pixels (rows, cols); jitter in [0, 1) inside the pixel."""
        array = self.to_array()
        height, width = self.image_size
        sx = (np.asarray(cols) + jitter_col) / width * 2.0 - 1.0
        sy = 1.0 - (np.asarray(rows) + jitter_row) / height * 2.0
        d = array[1] + sx[..., None] * array[2] + sy[..., None] * array[3]
        return d / np.linalg.norm(d, axis=-1, keepdims=True)

    def project(self, points) -> np.ndarray:
        """(..., 2) fractional (row, col) image positions of world points in front of the camera."""
        array = self.to_array()
        rel = np.asarray(points, dtype=np.float64) - array[0]
        z = rel @ array[1]
        sx = (rel @ (array[2] / np.dot(array[2], array[2]))) / z
        sy = (rel @ (array[3] / np.dot(array[3], array[3]))) / z
        return np.stack([(1.0 - sy) / 2.0 * self.height, (sx + 1.0) / 2.0 * self.width], axis=-1)


#: Where the default camera sits, in bounding radii from the volume's centre: in front (world -y)
#: and above (world +z), looking at the centre with +z up (README, "Conventions").
DEFAULT_OFFSET = (0.0, -3.2, 1.2)


@dataclass(frozen=True)
class DefaultView:
    """The camera a scene gets when it names no position: unit ``forward`` and ``up`` vectors."""

    position: tuple[float, float, float]
    target: tuple[float, float, float]
    forward: tuple[float, float, float]
    up: tuple[float, float, float]


def default_view(volume) -> DefaultView:
    """The default camera of ``volume``: at ``centre + bounding_radius * DEFAULT_OFFSET``, looking at the centre."""
    centre = np.asarray(volume.center, dtype=np.float64)
    position = centre + volume.bounding_radius * np.asarray(DEFAULT_OFFSET)
    camera = Camera(position=tuple(float(v) for v in position), target=tuple(float(v) for v in centre))
    forward, _, up = camera.frame()
    return DefaultView(position=camera.position, target=camera.target, forward=tuple(forward), up=tuple(up))
