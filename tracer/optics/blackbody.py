"""Blackbody emission: Planck's law, the CIE 1931 observer, and linear sRGB.

``blackbody_rgb(kelvin)`` is what a transfer function's ``temperature`` points glow with (times
``emission_scale``): the linear sRGB tristimulus of a blackbody's spectral radiance (Planck 1901),
integrated against the CIE 1931 2-degree colour-matching functions in the multi-lobe Gaussian fit of
Wyman, Sloan and Shirley (2013, "Simple analytic approximations to the CIE XYZ color matching
functions", JCGT 2(2)), with X, Y, Z in W m^-2 sr^-1 (Y is the luminance divided by 683 lm/W), then
the XYZ -> linear sRGB matrix of IEC 61966-2-1. Colours outside the sRGB gamut (the reds below about
1900 K have negative blue) are clipped at 0 per channel.
"""

from __future__ import annotations

import numpy as np

# SI defining constants (exact since 2019)
PLANCK = 6.62607015e-34          # J s
LIGHT_SPEED = 299792458.0        # m / s
BOLTZMANN = 1.380649e-23         # J / K

#: Wavelengths (nm) of the integration, 1 nm apart over the range of the CIE tables.
WAVELENGTHS_NM = np.arange(360.0, 831.0, 1.0)

#: XYZ -> linear sRGB (IEC 61966-2-1, D65 white).
XYZ_TO_SRGB = np.array([[3.2406, -1.5372, -0.4986],
                        [-0.9689, 1.8758, 0.0415],
                        [0.0557, -0.2040, 1.0570]])


def planck(wavelength_nm, kelvin) -> np.ndarray:
    """Spectral radiance of a blackbody, W m^-2 sr^-1 nm^-1: 2 h c^2 / lambda^5 / (exp(h c / (lambda k T)) - 1)."""
    wavelength = np.asarray(wavelength_nm, np.float64) * 1e-9
    kelvin = np.asarray(kelvin, np.float64)
    with np.errstate(over="ignore", divide="ignore", invalid="ignore"):
        exponent = PLANCK * LIGHT_SPEED / (wavelength * BOLTZMANN * kelvin)
        radiance = 2.0 * PLANCK * LIGHT_SPEED ** 2 / wavelength ** 5 / np.expm1(exponent) * 1e-9
    return np.where(kelvin > 0, np.nan_to_num(radiance, nan=0.0, posinf=0.0), 0.0)


def _lobe(wavelength, mean, below, above):
    spread = np.where(wavelength < mean, below, above)
    return np.exp(-0.5 * ((wavelength - mean) / spread) ** 2)


def colour_matching(wavelength_nm) -> np.ndarray:
    """(..., 3) CIE 1931 x-bar, y-bar, z-bar by the multi-lobe fit of Wyman, Sloan and Shirley (2013)."""
    w = np.asarray(wavelength_nm, np.float64)
    x = 1.056 * _lobe(w, 599.8, 37.9, 31.0) + 0.362 * _lobe(w, 442.0, 16.0, 26.7) - 0.065 * _lobe(w, 501.1, 20.4, 26.2)
    y = 0.821 * _lobe(w, 568.8, 46.9, 40.5) + 0.286 * _lobe(w, 530.9, 16.3, 31.1)
    z = 1.217 * _lobe(w, 437.0, 11.8, 36.0) + 0.681 * _lobe(w, 459.0, 26.0, 13.8)
    return np.stack([x, y, z], axis=-1)


def blackbody_xyz(kelvin) -> np.ndarray:
    """(..., 3) CIE XYZ of a blackbody at ``kelvin`` (W m^-2 sr^-1; 0 K gives 0)."""
    kelvin = np.asarray(kelvin, np.float64)
    spectrum = planck(WAVELENGTHS_NM, kelvin[..., None])                   # (..., n_wavelengths)
    return spectrum @ colour_matching(WAVELENGTHS_NM) * 1.0                 # 1 nm spacing


def blackbody_rgb(kelvin) -> np.ndarray:
    """(..., 3) linear sRGB radiance of a blackbody at ``kelvin``, negative channels clipped to 0."""
    return np.maximum(blackbody_xyz(kelvin) @ XYZ_TO_SRGB.T, 0.0)
