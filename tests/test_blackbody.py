"""Blackbody emission (transfer-function ``temperature`` points).

Sources: Planck's law written out here from ``scipy.constants`` (h, c, k); CIE 15 (2004), standard illuminant A:
a Planckian radiator at 2856 K with chromaticity (x, y) = (0.44757, 0.40745); the D65 white of IEC 61966-2-1 maps
to sRGB (1, 1, 1) up to the matrix's rounding.
"""

import math

import numpy as np
import pytest
from scipy import constants

from tracer import load_transfer_function
from tracer.errors import UserError
from tracer.optics.blackbody import XYZ_TO_SRGB, blackbody_rgb, blackbody_xyz, planck


def planck_from_scipy(wavelength_nm, kelvin):
    lam = wavelength_nm * 1e-9
    return 2 * constants.h * constants.c ** 2 / lam ** 5 / (math.exp(constants.h * constants.c / (lam * constants.k * kelvin)) - 1) * 1e-9


@pytest.mark.parametrize("kelvin", [800.0, 1500.0, 2856.0, 6500.0])
@pytest.mark.parametrize("wavelength", [380.0, 555.0, 780.0])
def test_planck_matches_scipy_constants(wavelength, kelvin):
    assert planck(wavelength, kelvin) == pytest.approx(planck_from_scipy(wavelength, kelvin), rel=1e-12)


def test_a_2856_kelvin_radiator_has_the_chromaticity_of_illuminant_a():
    x, y, z = blackbody_xyz(2856.0)
    chromaticity = np.array([x, y]) / (x + y + z)
    assert np.all(np.abs(chromaticity - [0.44757, 0.40745]) < 0.003), chromaticity


def test_hotter_is_brighter_and_bluer():
    rgb = blackbody_rgb([2000.0, 3000.0, 4500.0, 6000.0])
    assert np.all(np.diff(rgb[:, 1]) > 0)
    blue_over_red = rgb[:, 2] / rgb[:, 0]
    assert np.all(np.diff(blue_over_red) > 0)
    assert np.all(blackbody_rgb(0.0) == 0) and np.all(blackbody_rgb(1200.0)[1:] < 0.1 * blackbody_rgb(1200.0)[0])


def test_srgb_matrix_sends_the_d65_white_to_grey():
    white = np.array([0.95047, 1.0, 1.08883])        # D65, Y = 1 (IEC 61966-2-1)
    assert XYZ_TO_SRGB @ white == pytest.approx([1.0, 1.0, 1.0], abs=2e-3)


def test_temperature_points_bake_into_the_emission_table(tmp_path):
    path = tmp_path / "flame.toml"
    path.write_text('opacity = [[0.0, 0.1], [1.0, 0.1]]\ncolor = [[0.0, [0.2, 0.2, 0.2]]]\n'
                    'temperature = [[0.0, 0.0], [1.0, 2000.0]]\nemission_scale = 0.5\n')
    tf = load_transfer_function(path)
    arrays = tf.bake(0.0, 1.0, 5)
    assert arrays.emitting
    np.testing.assert_allclose(arrays.emission[2], 0.5 * blackbody_rgb(1000.0), rtol=1e-6)
    np.testing.assert_allclose(arrays.emission[4], 0.5 * blackbody_rgb(2000.0), rtol=1e-6)
    assert np.all(arrays.emission[0] == 0)
    assert tf.to_dict()["temperature"] == [[0.0, 0.0], [1.0, 2000.0]]


def test_emission_and_temperature_together_are_refused(tmp_path):
    path = tmp_path / "both.toml"
    path.write_text('opacity = [[0.0, 0.1]]\ncolor = [[0.0, [0.2, 0.2, 0.2]]]\ntemperature = [[0.0, 1000.0]]\n'
                    'emission = [[0.0, [1, 1, 1]]]\n')
    with pytest.raises(UserError, match="either emission or temperature"):
        load_transfer_function(path)
