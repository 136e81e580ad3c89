"""Homogeneous media with exact geometry, and the single-scattering integral by ``scipy.integrate.quad``.

The integral is the README's optical model ("The optical model") for one homogeneous medium lit by one light:

    L(p, d) = albedo * int_{t0}^{t1} sigma f(d, l) E(x) exp(-sigma (t - t0)) exp(-sigma s(x)) dt   (x = p + t d)

with [t0, t1] the ray's chord through the medium, l the unit direction toward the light, E the light's
irradiance (a point light's intensity over the squared distance: inverse-square law), s the distance the shadow
ray travels inside the medium, f the scattering lobe per steradian (Henyey-Greenstein, Henyey and Greenstein 1941,
of the cosine d . l) and Beer-Lambert attenuation on both legs. Nothing here is sampled: it is deterministic
quadrature, so it shares no estimator, random number or step with the renderer.
"""

from __future__ import annotations

import math

import numpy as np
from scipy import integrate


def henyey_greenstein(cos_theta, g):
    """Phase function per steradian, normalised to 1 over the sphere (Henyey and Greenstein 1941)."""
    return (1 - g * g) / (4 * math.pi * (1 + g * g - 2 * g * cos_theta) ** 1.5)


class Box:
    """The axis-aligned box [low, high] (mm)."""

    def __init__(self, low, high):
        self.low = np.asarray(low, float)
        self.high = np.asarray(high, float)

    def chord(self, p, d):
        """(t0, t1) of the ray p + t d inside the box (t >= 0), t1 <= t0 when it misses (slab test)."""
        with np.errstate(divide="ignore", invalid="ignore"):
            a = (self.low - p) / d
            b = (self.high - p) / d
        near = np.where(d == 0, np.where((p >= self.low) & (p <= self.high), -np.inf, np.inf), np.minimum(a, b))
        far = np.where(d == 0, np.where((p >= self.low) & (p <= self.high), np.inf, -np.inf), np.maximum(a, b))
        return max(0.0, float(near.max())), float(far.min())

    def exit(self, x, w):
        """Distance from x (inside) along unit w to the boundary."""
        return self.chord(x, w)[1]


class Sphere:
    def __init__(self, centre, radius):
        self.centre = np.asarray(centre, float)
        self.radius = float(radius)

    def chord(self, p, d):
        v = p - self.centre
        b = float(v @ d)
        c = float(v @ v) - self.radius ** 2
        disc = b * b - c
        if disc <= 0:
            return 1.0, 0.0
        root = math.sqrt(disc)
        return max(0.0, -b - root), -b + root

    def exit(self, x, w):
        return self.chord(x, w)[1]


class Directional:
    def __init__(self, toward, irradiance=1.0):
        toward = np.asarray(toward, float)
        self.toward = toward / np.linalg.norm(toward)
        self.irradiance = irradiance

    def at(self, x):
        """(unit direction toward the light, irradiance, distance to the light)."""
        return self.toward, self.irradiance, math.inf


class Point:
    def __init__(self, position, intensity=1.0):
        self.position = np.asarray(position, float)
        self.intensity = intensity

    def at(self, x):
        v = self.position - x
        r = float(np.linalg.norm(v))
        return v / r, self.intensity / (r * r), r


def single_scattering(shape, sigma, p, d, light, lobe) -> float:
    """The integral above without the albedo: radiance per unit light colour along p + t d.

    ``lobe(d, l)``: the scattering lobe per steradian for light from direction l seen along d.
    """
    t0, t1 = shape.chord(p, d)
    if t1 <= t0:
        return 0.0

    def integrand(t):
        x = p + t * d
        l, irradiance, distance = light.at(x)
        s = min(shape.exit(x, l), distance)
        return sigma * lobe(d, l) * irradiance * math.exp(-sigma * (t - t0) - sigma * s)

    value, error = integrate.quad(integrand, t0, t1, epsabs=1e-12, epsrel=1e-9, limit=200)
    return value


def constant_environment_on_sphere(sphere: Sphere, sigma, p, d) -> float:
    """Single scattering of a constant environment of radiance 1 by a homogeneous sphere, isotropic phase.

    At radius r the in-scattered radiance is (1 / 4 pi) int exp(-sigma s(r, mu)) d omega
    = 1/2 int_{-1}^{1} exp(-sigma s) d mu, with s(r, mu) = -r mu + sqrt(R^2 - r^2 (1 - mu^2)) the distance to the
    surface at angle acos(mu) from the outward radial; then integrated along the camera ray as above.
    """
    t0, t1 = sphere.chord(p, d)
    if t1 <= t0:
        return 0.0
    big_r = sphere.radius

    def in_scattered(r):
        def along(mu):
            return math.exp(-sigma * (-r * mu + math.sqrt(max(big_r * big_r - r * r * (1 - mu * mu), 0.0))))
        return 0.5 * integrate.quad(along, -1.0, 1.0, epsabs=1e-12, epsrel=1e-9)[0]

    def integrand(t):
        r = float(np.linalg.norm(p + t * d - sphere.centre))
        return sigma * in_scattered(r) * math.exp(-sigma * (t - t0))

    return integrate.quad(integrand, t0, t1, epsabs=1e-12, epsrel=1e-8, limit=200)[0]


def chandrasekhar_h(omega: float, mu, nodes: int = 256, tolerance: float = 1e-12):
    """Chandrasekhar's H-function of isotropic scattering with single-scattering albedo ``omega`` at cosines ``mu``.

    Iterates the integral equation in the form 1 / H(mu) = sqrt(1 - omega) + (omega / 2) int_0^1 mu' H(mu') /
    (mu + mu') dmu' (Chandrasekhar, *Radiative Transfer*, 1960, ch. V) on Gauss-Legendre nodes of [0, 1]; that
    form converges for every omega <= 1. The bidirectional reflection of the half-space is then
    (omega / 4 pi) H(mu) H(mu0) / (mu + mu0) per unit irradiance times mu0.
    """
    x, w = np.polynomial.legendre.leggauss(nodes)
    x, w = 0.5 * (x + 1.0), 0.5 * w
    h = np.ones(nodes)
    for _ in range(100000):
        new = 1.0 / (math.sqrt(1.0 - omega) + 0.5 * omega * (w * x * h / (x[:, None] + x[None, :])).sum(axis=1))
        if np.max(np.abs(new - h)) < tolerance:
            h = new
            break
        h = new
    mu = np.asarray(mu, float)
    return 1.0 / (math.sqrt(1.0 - omega) + 0.5 * omega * (w * x * h / (mu[..., None] + x)).sum(axis=-1))
