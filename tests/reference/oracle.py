"""A slow, plain NumPy implementation of the renderer's estimator, written from the README.

It shares no code with the numba kernels: its own random numbers (``numpy.random.Generator``),
its own interpolation (``scipy.ndimage.map_coordinates``-free but written out per axis), the
transfer function evaluated exactly (not through the baked table), and vectors as NumPy arrays.
Use it on tiny scenes only: a few thousand paths take seconds.

Estimator (README, "The optical model"): K stratified opacity thresholds per path; ray
marched with a random offset, extinction piecewise constant at each step's midpoint; event k
where 1 - T first exceeds u_k; at an event, albedo x (direct light x shadow transmittance x
lobe + environment along one lobe-sampled direction x transmittance); a stratum without an
event sees the background; the sample is the mean of the K strata.
"""

from __future__ import annotations

import math

import numpy as np

SCATTERING = {"medium": 0, "interface": 1, "graded": 2}


class Oracle:
    def __init__(self, scene):
        self.scene = scene
        volume = scene.volume
        self.field = volume.data.astype(np.float64)
        self.shape = np.array(volume.shape, dtype=np.float64)
        self.matrix = volume.directions.T          # world = origin + matrix @ index
        self.inverse = np.linalg.inv(self.matrix)
        self.origin = volume.origin
        self.tf = scene.transfer_function
        self.settings = scene.settings
        low, high = volume.value_range
        self.gradient_scale = float(np.mean(volume.spacing)) / (max(high - low, 1e-12) * self.settings.interface_gradient)

    # --- field -------------------------------------------------------------------
    def value(self, index):
        """Trilinear interpolation between the 8 voxels around ``index``, written out."""
        n = self.field.shape
        x, y, z = (min(max(float(index[a]), 0.0), n[a] - 1.0) for a in range(3))
        i, j, k = min(int(x), n[0] - 2), min(int(y), n[1] - 2), min(int(z), n[2] - 2)
        fx, fy, fz = x - i, y - j, z - k
        c = self.field[i:i + 2, j:j + 2, k:k + 2].tolist()
        along_x = [[c[0][b][e] * (1 - fx) + c[1][b][e] * fx for e in (0, 1)] for b in (0, 1)]
        along_y = [along_x[0][e] * (1 - fy) + along_x[1][e] * fy for e in (0, 1)]
        return along_y[0] * (1 - fz) + along_y[1] * fz

    def gradient_world(self, index):
        g = np.zeros(3)
        for axis in range(3):
            step = np.zeros(3)
            step[axis] = 1.0
            plus = np.minimum(index + step, self.shape - 1.0)
            minus = np.maximum(index - step, 0.0)
            g[axis] = (self.value(plus) - self.value(minus)) / (plus[axis] - minus[axis])
        return self.inverse.T @ g

    def sigma(self, value):
        return float(self.tf.extinction_at(value))

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

    def segments(self, p, d, t_max, offset):
        """Yield (t_start, t_end, sigma) of the march from p along d."""
        t0, t1 = self.interval(p, d)
        t1 = min(t1, t_max)
        step = self.settings.step_mm
        a, b = t0, t0 + offset * step
        while a < t1:
            b = min(b, t1)
            middle = p + 0.5 * (a + b) * d
            yield a, b, self.sigma(self.value(self.to_index(middle)))
            a, b = b, b + step

    def transmittance(self, p, d, t_max, rng):
        tau = 0.0
        weight = 1.0
        rouletted = False
        u_roulette = rng.random()
        for a, b, s in self.segments(p, d, t_max, rng.random()):
            tau += s * (b - a)
            if not rouletted and math.exp(-tau) < 0.02:
                rouletted = True
                if u_roulette >= 0.25:
                    return 0.0
                weight = 4.0
        return weight * math.exp(-tau)

    # --- lighting ----------------------------------------------------------------
    def environment(self, d):
        env = self.scene.environment
        colors = np.asarray(env.colors, dtype=np.float64)
        if env.kind == "constant":
            return colors[0]
        if env.kind == "sky":
            z = d[2]
            if z >= 0:
                s = math.sqrt(z)
                return colors[1] * (1 - s) + colors[0] * s
            s = min(1.0, -z * 8.0)
            return colors[1] * (1 - s) + colors[2] * s
        raise NotImplementedError("the oracle covers constant and sky environments")

    @staticmethod
    def hg(cos_theta, g):
        return (1 - g * g) / (4 * math.pi * (1 + g * g - 2 * g * cos_theta) ** 1.5)

    @staticmethod
    def around(axis, cos_theta, phi):
        helper = np.array([1.0, 0.0, 0.0]) if abs(axis[0]) < 0.9 else np.array([0.0, 1.0, 0.0])
        t = np.cross(axis, helper)
        t /= np.linalg.norm(t)
        b = np.cross(axis, t)
        sin_theta = math.sqrt(max(0.0, 1 - cos_theta**2))
        return t * math.cos(phi) * sin_theta + b * math.sin(phi) * sin_theta + axis * cos_theta

    def shade(self, x, d, rng):
        index = self.to_index(x)
        value = self.value(index)
        albedo = self.tf.albedo_at(value)
        gradient = self.gradient_world(index)
        magnitude = np.linalg.norm(gradient)
        n = -gradient / magnitude if magnitude > 0 else -d
        if n @ d > 0:
            n = -n
        scattering = self.settings.scattering
        weight = (0.0 if scattering == "medium" else 1.0 if scattering == "interface"
                  else 1 - math.exp(-magnitude * self.gradient_scale))
        g = self.settings.phase_g

        def lobe(w):
            return weight * max(0.0, n @ w) / math.pi + (1 - weight) * self.hg(d @ w, g)

        total = np.zeros(3)
        for light in self.scene.lights:
            if light.kind == "directional":
                w, distance, falloff = np.array(light.vector), math.inf, 1.0
            else:
                w = np.array(light.vector) - x
                distance = np.linalg.norm(w)
                w, falloff = w / distance, 1.0 / distance**2
            f = lobe(w)
            if f > 0:
                total += np.array(light.power) * falloff * f * self.transmittance(x, w, distance, rng)
        u_lobe, u1, u2 = rng.random(3)
        if u_lobe < weight:
            w = self.around(n, math.sqrt(1 - u1), 2 * math.pi * u2)
        else:
            if abs(g) < 1e-3:
                c = 1 - 2 * u1
            else:
                c = (1 + g * g - ((1 - g * g) / (1 - g + 2 * g * u1)) ** 2) / (2 * g)
            w = self.around(d, c, 2 * math.pi * u2)
        total += self.environment(w) * self.transmittance(x, w, math.inf, rng)
        return albedo * total

    # --- the estimator -----------------------------------------------------------
    def pixel_samples(self, row, col, n_samples, rng):
        """(n_samples, 3) radiance samples and (n_samples,) alpha samples of one pixel."""
        camera = self.scene.camera
        position = np.asarray(camera.position, dtype=np.float64)
        forward, right, up = camera.frame()
        half_h = math.tan(math.radians(camera.fov_deg) / 2)
        half_w = half_h * camera.width / camera.height
        background = self.scene.environment.background
        K = self.settings.events
        radiance = np.zeros((n_samples, 3))
        alpha = np.zeros(n_samples)
        for s in range(n_samples):
            jx, jy = rng.random(2)
            sx = (col + jx) / camera.width * 2 - 1
            sy = 1 - (row + jy) / camera.height * 2
            d = forward + sx * half_w * right + sy * half_h * up
            d /= np.linalg.norm(d)
            bg = self.environment(d) if background is None else np.asarray(background)
            targets = [-math.log1p(-(k + rng.random()) / K) for k in range(K)]
            events = []
            tau = 0.0
            for a, b, sigma in self.segments(position, d, math.inf, rng.random()):
                while len(events) < K and tau + sigma * (b - a) >= targets[len(events)]:
                    events.append(a + (targets[len(events)] - tau) / sigma)
                tau += sigma * (b - a)
            alpha[s] = 1 - math.exp(-tau)
            total = np.zeros(3)
            for k in range(K):
                total += self.shade(position + events[k] * d, d, rng) if k < len(events) else bg
            radiance[s] = total / K
        return radiance, alpha

    def render(self, n_samples, seed=0):
        """Per-pixel mean radiance (H, W, 3), variance of that mean, and mean alpha (H, W)."""
        camera = self.scene.camera
        rng = np.random.default_rng(seed)
        mean = np.zeros((camera.height, camera.width, 3))
        variance = np.zeros_like(mean)
        alpha = np.zeros((camera.height, camera.width))
        for row in range(camera.height):
            for col in range(camera.width):
                samples, alphas = self.pixel_samples(row, col, n_samples, rng)
                mean[row, col] = samples.mean(axis=0)
                variance[row, col] = samples.var(axis=0, ddof=1) / n_samples
                alpha[row, col] = alphas.mean()
        return mean, variance, alpha
