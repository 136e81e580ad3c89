"""The pinhole camera of the README's "Conventions" (Images), written out with NumPy."""

from __future__ import annotations

import math

import numpy as np


class Pinhole:
    """``position``, ``target``, ``up``, ``fov_deg`` (full vertical angle), ``width`` x ``height`` square pixels."""

    def __init__(self, position, target, up=(0.0, 0.0, 1.0), fov_deg=30.0, width=64, height=64):
        self.position = np.asarray(position, float)
        forward = np.asarray(target, float) - self.position
        self.forward = forward / np.linalg.norm(forward)
        right = np.cross(self.forward, np.asarray(up, float))       # columns grow toward forward x up
        self.right = right / np.linalg.norm(right)
        self.up = np.cross(self.right, self.forward)                # `up` made orthogonal to the view
        self.half_height = math.tan(math.radians(fov_deg) / 2)
        self.half_width = self.half_height * width / height
        self.width, self.height = int(width), int(height)

    def rays(self, rows, cols, jitter_row=0.5, jitter_col=0.5) -> np.ndarray:
        """(..., 3) unit directions through the point (jitter_row, jitter_col) of pixels (rows, cols); row 0 at the top."""
        sx = (np.asarray(cols, float) + jitter_col) / self.width * 2 - 1
        sy = 1 - (np.asarray(rows, float) + jitter_row) / self.height * 2
        d = (self.forward + sx[..., None] * self.half_width * self.right + sy[..., None] * self.half_height * self.up)
        return d / np.linalg.norm(d, axis=-1, keepdims=True)

    def pixel_rays(self) -> np.ndarray:
        """(height, width, 3) directions through every pixel's centre."""
        rows, cols = np.mgrid[0:self.height, 0:self.width]
        return self.rays(rows, cols)

    def project(self, points) -> np.ndarray:
        """(..., 2) continuous (row, column) image coordinates of world points in front of the camera."""
        v = np.asarray(points, float) - self.position
        z = v @ self.forward
        sx = (v @ self.right) / z / self.half_width
        sy = (v @ self.up) / z / self.half_height
        return np.stack([(1 - sy) / 2 * self.height, (sx + 1) / 2 * self.width], axis=-1)
