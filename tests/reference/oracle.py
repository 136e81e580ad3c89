"""A slow, plain NumPy implementation of the renderer's estimator, written from the README alone.

It reads the scene file, the transfer function, the NRRD volume (pynrrd) and an environment image (OpenEXR)
itself, builds camera rays with :class:`tests.reference.camera.Pinhole`, evaluates the transfer function exactly
(not through a baked table), takes the README's constants from the README's text (:mod:`tests.reference.readme`),
and draws its random numbers from ``numpy.random.Generator``. It imports nothing from ``tracer``. Use it on tiny
scenes only: a few thousand paths take seconds.

The estimator (README, "The optical model"): K stratified opacity thresholds per path; the ray marched through the
volume's box with a random first step, extinction constant over each step at its midpoint; event k where 1 - T
passes threshold k; at an event, albedo x (direct light through a shadow ray x lobe + the environment along one
lobe-sampled direction through its own shadow ray); a stratum without an event sees the background; the sample is
the mean of its K strata. Every scene key it needs must be written out in the file (it knows no defaults).
"""

from __future__ import annotations

import math
import tomllib
from pathlib import Path

import numpy as np

from . import readme
from .camera import Pinhole
from .files import read_latlong


def _resolve(base: Path, path: str) -> Path:
    path = Path(path)
    return path if path.is_absolute() else base / path


def read_volume(path: Path):
    """(field float64 (nx, ny, nz), M (3, 3) with the index axes' world steps as columns, origin (3,))."""
    import nrrd

    data, header = nrrd.read(str(path), index_order="F")
    directions = np.asarray(header["space directions"], float)      # rows: world step of index axes i, j, k
    origin = np.asarray(header.get("space origin", np.zeros(3)), float)
    return data.astype(np.float64), directions.T, origin


class TransferFunction:
    """Piecewise linear in the value, clamped outside the points (README, "Transfer functions")."""

    def __init__(self, table: dict):
        self.reference_length = float(table.get("reference_length_mm", 1.0))
        self.opacity_points = np.array([p[0] for p in table["opacity"]], float)
        self.opacity_values = np.array([p[1] for p in table["opacity"]], float)
        self.colour_points = np.array([p[0] for p in table["color"]], float)
        self.colour_values = np.array([p[1] for p in table["color"]], float)
        self.cap = readme.opacity_cap()

    def sigma(self, value: float) -> float:
        opacity = min(float(np.interp(value, self.opacity_points, self.opacity_values)), self.cap)
        return -math.log1p(-opacity) / self.reference_length

    def albedo(self, value: float) -> np.ndarray:
        return np.array([np.interp(value, self.colour_points, self.colour_values[:, c]) for c in range(3)])


class Oracle:
    def __init__(self, scene_path):
        scene_path = Path(scene_path)
        base = scene_path.parent
        scene = tomllib.loads(scene_path.read_text())
        self.field, self.matrix, self.origin = read_volume(_resolve(base, scene["volume"]["path"]))
        self.inverse = np.linalg.inv(self.matrix)
        self.shape = np.array(self.field.shape, float)
        table = scene["transfer_function"]
        if "path" in table:
            path = _resolve(base, table["path"])
            table = tomllib.loads(path.read_text())
        self.tf = TransferFunction(table)
        c = scene["camera"]
        self.camera = Pinhole(c["position"], c["target"], c["up"], c["fov_deg"], c["width"], c["height"])
        self.lights = scene.get("lights", [])
        self.environment = scene.get("environment")
        self.env_image = None
        if self.environment is not None and self.environment["kind"] == "image":
            self.env_image = read_latlong(_resolve(base, self.environment["path"]))
        r = scene["render"]
        if int(r.get("bounces", 1)) != 1 or r.get("estimator", "march") != "march":
            raise ValueError("the oracle implements the README's default estimator only (bounces = 1, estimator = march)")
        if "emission" in table or "temperature" in table:
            raise ValueError("the oracle does not model emission")
        self.events, self.step, self.g = int(r["events"]), float(r["step_mm"]), float(r["phase_g"])
        self.scattering = r["scattering"]
        mean_spacing = float(np.mean(np.linalg.norm(self.matrix, axis=0)))
        value_range = max(float(self.field.max() - self.field.min()), 1e-12)
        # "g the gradient magnitude as a fraction of the data range per mean voxel spacing"
        self.gradient_scale = mean_spacing / (value_range * float(r["interface_gradient"]))
        self.roulette_below = readme.roulette_below()
        self.roulette_survival = readme.roulette_survival()
        self.ground_z = readme.sky_ground_z()

    # --- field -------------------------------------------------------------------
    def value(self, index) -> float:
        """Trilinear between the 8 voxels around ``index`` (clamped to the box), written out per axis."""
        n = self.field.shape
        x, y, z = (min(max(float(index[a]), 0.0), n[a] - 1.0) for a in range(3))
        i, j, k = min(int(x), n[0] - 2), min(int(y), n[1] - 2), min(int(z), n[2] - 2)
        fx, fy, fz = x - i, y - j, z - k
        c = self.field[i:i + 2, j:j + 2, k:k + 2]
        along_x = c[0] * (1 - fx) + c[1] * fx
        along_y = along_x[0] * (1 - fy) + along_x[1] * fy
        return float(along_y[0] * (1 - fz) + along_y[1] * fz)

    def gradient_world(self, index) -> np.ndarray:
        g = np.zeros(3)
        for axis in range(3):
            step = np.zeros(3)
            step[axis] = 1.0
            plus = np.minimum(index + step, self.shape - 1.0)
            minus = np.maximum(index - step, 0.0)
            g[axis] = (self.value(plus) - self.value(minus)) / (plus[axis] - minus[axis])
        return self.inverse.T @ g

    # --- geometry ----------------------------------------------------------------
    def to_index(self, p):
        return self.inverse @ (p - self.origin)

    def interval(self, p, d):
        o = self.to_index(p)
        v = self.inverse @ d
        t0, t1 = 0.0, math.inf
        for axis in range(3):
            if abs(v[axis]) < 1e-300:
                if o[axis] < 0 or o[axis] > self.shape[axis] - 1:
                    return 1.0, 0.0
                continue
            a = (0.0 - o[axis]) / v[axis]
            b = (self.shape[axis] - 1 - o[axis]) / v[axis]
            t0, t1 = max(t0, min(a, b)), min(t1, max(a, b))
        return t0, t1

    def segments(self, p, d, t_max, u):
        """(t_start, t_end, sigma) of the march from p along d: a first step u x step, then whole steps."""
        t0, t1 = self.interval(p, d)
        t1 = min(t1, t_max)
        a, b = t0, t0 + u * self.step
        while a < t1:
            b = min(b, t1)
            yield a, b, self.tf.sigma(self.value(self.to_index(p + 0.5 * (a + b) * d)))
            a, b = b, b + self.step

    def transmittance(self, p, d, t_max, rng) -> float:
        tau, weight, played = 0.0, 1.0, False
        u_offset, u_roulette = rng.random(2)
        for a, b, s in self.segments(p, d, t_max, u_offset):
            tau += s * (b - a)
            if not played and math.exp(-tau) < self.roulette_below:
                played = True
                if u_roulette >= self.roulette_survival:
                    return 0.0
                weight = 1.0 / self.roulette_survival
        return weight * math.exp(-tau)

    # --- light ---------------------------------------------------------------------
    def environment_radiance(self, d) -> np.ndarray:
        env = self.environment
        if env is None:
            return np.zeros(3)
        if env["kind"] == "constant":
            return np.asarray(env["radiance"], float)
        if env["kind"] == "sky":
            zenith, horizon, ground = (np.asarray(env[k], float) for k in ("zenith", "horizon", "ground"))
            z = float(np.clip(d[2], -1, 1))
            if z >= 0:
                s = math.sqrt(z)
                return horizon * (1 - s) + zenith * s
            s = min(1.0, z / self.ground_z)
            return horizon * (1 - s) + ground * s
        image = self.env_image
        h, w = image.shape[:2]
        polar = math.acos(float(np.clip(d[2], -1, 1)))
        azimuth = math.atan2(d[1], d[0]) % (2 * math.pi)
        row = polar / math.pi * h - 0.5                   # texel centres at (r + 0.5) / h x 180 degrees
        col = azimuth / (2 * math.pi) * w - 0.5
        r0, c0 = math.floor(row), math.floor(col)
        fr, fc = row - r0, col - c0
        total = np.zeros(3)
        for rr, wr in ((r0, 1 - fr), (r0 + 1, fr)):
            for cc, wc in ((c0, 1 - fc), (c0 + 1, fc)):
                total += wr * wc * image[min(max(rr, 0), h - 1), cc % w]
        return total

    def background(self, d) -> np.ndarray:
        if self.environment is None:
            return np.zeros(3)
        background = self.environment.get("background", "environment")
        return self.environment_radiance(d) if background == "environment" else np.asarray(background, float)

    @staticmethod
    def hg(cos_theta, g):
        return (1 - g * g) / (4 * math.pi * (1 + g * g - 2 * g * cos_theta) ** 1.5)

    @staticmethod
    def around(axis, cos_theta, phi):
        helper = np.array([1.0, 0.0, 0.0]) if abs(axis[0]) < 0.9 else np.array([0.0, 1.0, 0.0])
        t = np.cross(axis, helper)
        t /= np.linalg.norm(t)
        b = np.cross(axis, t)
        sin_theta = math.sqrt(max(0.0, 1 - cos_theta ** 2))
        return t * math.cos(phi) * sin_theta + b * math.sin(phi) * sin_theta + axis * cos_theta

    def sample_hg(self, d, rng):
        """A direction around d distributed as Henyey-Greenstein, by inverting its CDF in the cosine."""
        u1, u2 = rng.random(2)
        g = self.g
        if abs(g) < 1e-3:
            c = 1 - 2 * u1
        else:
            c = (1 + g * g - ((1 - g * g) / (1 - g + 2 * g * u1)) ** 2) / (2 * g)
        return self.around(d, float(np.clip(c, -1, 1)), 2 * math.pi * u2)

    def shade(self, x, d, rng) -> np.ndarray:
        index = self.to_index(x)
        value = self.value(index)
        gradient = self.gradient_world(index)
        magnitude = float(np.linalg.norm(gradient))
        n = -gradient / magnitude if magnitude > 0 else -d
        if n @ d > 0:
            n = -n
        weight = {"medium": 0.0, "interface": 1.0}.get(self.scattering)
        if weight is None:
            weight = 1 - math.exp(-magnitude * self.gradient_scale)

        def lobe(w):
            return weight * max(0.0, n @ w) / math.pi + (1 - weight) * self.hg(float(d @ w), self.g)

        total = np.zeros(3)
        for light in self.lights:
            if light["kind"] == "directional":
                w = np.asarray(light["toward"], float)
                w, distance, power = w / np.linalg.norm(w), math.inf, np.asarray(light["irradiance"], float)
            else:
                w = np.asarray(light["position"], float) - x
                distance = float(np.linalg.norm(w))
                w, power = w / distance, np.asarray(light["intensity"], float) / distance ** 2
            f = lobe(w)
            if f > 0:
                total += power * f * self.transmittance(x, w, distance, rng)
        if rng.random() < weight:
            u1, u2 = rng.random(2)
            w = self.around(n, math.sqrt(1 - u1), 2 * math.pi * u2)          # cosine-weighted about n
        else:
            w = self.sample_hg(d, rng)
        total += self.environment_radiance(w) * self.transmittance(x, w, math.inf, rng)
        return self.tf.albedo(value) * total

    # --- the estimator -------------------------------------------------------------
    def pixel_samples(self, row, col, n_samples, rng):
        """(n_samples, 3) radiance samples and (n_samples,) alpha samples of one pixel."""
        K = self.events
        radiance = np.zeros((n_samples, 3))
        alpha = np.zeros(n_samples)
        p = self.camera.position
        for s in range(n_samples):
            jr, jc = rng.random(2)
            d = self.camera.rays(np.array(row), np.array(col), jr, jc)
            targets = [-math.log1p(-(k + rng.random()) / K) for k in range(K)]
            events, tau = [], 0.0
            for a, b, sigma in self.segments(p, d, math.inf, rng.random()):
                while len(events) < K and tau + sigma * (b - a) >= targets[len(events)]:
                    events.append(a + (targets[len(events)] - tau) / sigma)
                tau += sigma * (b - a)
            alpha[s] = -math.expm1(-tau)
            total = np.zeros(3)
            for k in range(K):
                total += self.shade(p + events[k] * d, d, rng) if k < len(events) else self.background(d)
            radiance[s] = total / K
        return radiance, alpha

    def render(self, n_samples, seed=0):
        """Per-pixel mean radiance (H, W, 3), variance of that mean, and mean alpha (H, W)."""
        h, w = self.camera.height, self.camera.width
        rng = np.random.default_rng(seed)
        mean, variance, alpha = np.zeros((h, w, 3)), np.zeros((h, w, 3)), np.zeros((h, w))
        for row in range(h):
            for col in range(w):
                samples, alphas = self.pixel_samples(row, col, n_samples, rng)
                mean[row, col] = samples.mean(axis=0)
                variance[row, col] = samples.var(axis=0, ddof=1) / n_samples
                alpha[row, col] = alphas.mean()
        return mean, variance, alpha
