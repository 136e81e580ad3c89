"""Transfer functions: opacity correction (Engel et al. 2006), baking, validation, presets."""

import math
import tomllib

import numpy as np
import pytest

from tracer._kernels.sampling import albedo_at, extinction_at
from tracer.errors import UserError
from tracer.optics.transfer import TransferFunction, load_transfer_function, opacity_to_extinction


@pytest.mark.parametrize("opacity", [0.01, 0.2, 0.5, 0.9, 0.999])
@pytest.mark.parametrize("distance", [0.25, 1.0, 3.7])
@pytest.mark.parametrize("reference", [0.5, 1.0, 2.0])
def test_opacity_correction_gives_transmittance_power_law(opacity, distance, reference):
    """Engel et al., Real-Time Volume Graphics (2006): with opacity a per reference length l, the
    transmittance over d mm is (1 - a)^(d / l); for l = 1 mm, (1 - a)^d."""
    sigma = opacity_to_extinction(opacity, reference)
    assert math.exp(-sigma * distance) == pytest.approx((1 - opacity) ** (distance / reference), rel=1e-12)


def small_function():
    return TransferFunction(np.array([0.0, 10.0, 20.0]), np.array([0.0, 0.5, 0.75]),
                            np.array([0.0, 20.0]), np.array([[1.0, 0.0, 0.2], [0.0, 1.0, 0.6]]))


def test_baked_tables_equal_hand_computed_values():
    """Piecewise-linear by hand: over [-10, 30] with 9 entries the values are -10, -5, 0, ..., 30.
    Opacity there is 0, 0, 0, 0.25, 0.5, 0.625, 0.75, 0.75, 0.75 (clamped outside [0, 20]), and
    extinction is -ln(1 - opacity)."""
    baked = small_function().bake(-10.0, 30.0, n_entries=9)
    opacity = np.array([0, 0, 0, 0.25, 0.5, 0.625, 0.75, 0.75, 0.75])
    np.testing.assert_allclose(baked.extinction, -np.log(1 - opacity), rtol=1e-6)
    red = np.array([1, 1, 1, 0.75, 0.5, 0.25, 0, 0, 0])
    np.testing.assert_allclose(baked.albedo[:, 0], red, rtol=1e-6)
    np.testing.assert_allclose(baked.albedo[:, 2], 0.2 + 0.4 * (1 - red), rtol=1e-6)
    np.testing.assert_allclose(baked.lookup, [-10.0, 8 / 40])


def test_kernel_lookup_interpolates_linearly_between_entries():
    tf = small_function()
    baked = tf.bake(-10.0, 30.0, n_entries=4096)
    for value in [-20.0, -10.0, 3.3, 10.0, 14.2, 19.99, 45.0]:
        u = min(max((value + 10) / 40 * 4095, 0), 4095)
        e = min(int(u), 4094)
        f = u - e
        expected = baked.extinction[e] * (1 - f) + baked.extinction[e + 1] * f
        assert extinction_at(baked.extinction, baked.lookup, value) == pytest.approx(expected, rel=1e-6)
        # with 4096 entries the table is within 1e-4 of the exact function
        assert extinction_at(baked.extinction, baked.lookup, value) == pytest.approx(float(tf.extinction_at(value)), abs=2e-4)
        np.testing.assert_allclose(albedo_at(baked.albedo, baked.lookup, value), tf.albedo_at(value), atol=1e-4)


def test_full_opacity_is_capped_to_finite_extinction():
    assert np.isfinite(opacity_to_extinction(1.0))
    assert opacity_to_extinction(1.0) == pytest.approx(-math.log(1e-6))


BAD_FUNCTIONS = {
    "unknown key": ('name = "x"\nopacity = [[0, 0]]\ncolor = [[0, [0, 0, 0]]]\nshininess = 3\n', "unknown key 'shininess'"),
    "decreasing values": ('opacity = [[0, 0], [5, 0.5], [4, 1]]\ncolor = [[0, [0, 0, 0]]]\n', "opacity[2]: values must increase"),
    "opacity above 1": ('opacity = [[0, 0], [5, 1.5]]\ncolor = [[0, [0, 0, 0]]]\n', "opacity[1] opacity: entries must lie in [0.0, 1.0]"),
    "negative opacity": ('opacity = [[0, -0.1]]\ncolor = [[0, [0, 0, 0]]]\n', "opacity[0] opacity"),
    "colour above 1": ('opacity = [[0, 0]]\ncolor = [[0, [0, 0, 0]], [1, [0.5, 1.2, 0]]]\n', "color[1] colour: entries must lie in [0.0, 1.0]"),
    "colour with two channels": ('opacity = [[0, 0]]\ncolor = [[0, [0, 0]]]\n', "color[0] colour: expected a list of 3 numbers"),
    "missing opacity": ('color = [[0, [0, 0, 0]]]\n', "opacity: missing"),
    "opacity not a list": ('opacity = 3\ncolor = [[0, [0, 0, 0]]]\n', "opacity: expected a list"),
    "entry not a pair": ('opacity = [[0, 0, 1]]\ncolor = [[0, [0, 0, 0]]]\n', "opacity[0]: expected [value, opacity]"),
    "reference length zero": ('reference_length_mm = 0\nopacity = [[0, 0]]\ncolor = [[0, [0, 0, 0]]]\n', "reference_length_mm: must be > 0.0"),
    "wrong scale": ('scale = "kelvin"\nopacity = [[0, 0]]\ncolor = [[0, [0, 0, 0]]]\n', "scale: must be one of"),
    "name not a string": ('name = 3\nopacity = [[0, 0]]\ncolor = [[0, [0, 0, 0]]]\n', "name: expected a string"),
    "broken TOML": ('opacity = [[0, 0]\n', "not valid TOML"),
    "string value": ('opacity = [["zero", 0]]\ncolor = [[0, [0, 0, 0]]]\n', "opacity[0]: expected a list of 1 finite numbers"),
}


@pytest.mark.parametrize("case", sorted(BAD_FUNCTIONS))
def test_bad_transfer_function_names_file_key_and_entry(tmp_path, case):
    text, expected = BAD_FUNCTIONS[case]
    path = tmp_path / "bad.toml"
    path.write_text(text)
    with pytest.raises(UserError) as caught:
        load_transfer_function(path)
    message = str(caught.value)
    assert message.startswith(str(path)) and "\n" not in message
    assert expected in message


def test_every_preset_loads(root):
    presets = sorted((root / "transfer_functions").glob("*.toml"))
    assert len(presets) >= 5
    for path in presets:
        tf = load_transfer_function(path)
        assert tf.opacity.max() > 0


def test_hounsfield_presets_put_air_and_water_at_their_fixed_points(root):
    """The Hounsfield scale is defined by two fixed points: air at -1000 HU and water at 0 HU.
    Every HU preset has control points exactly there, air is transparent, and any other tissue
    range it uses is marked as coming from memory."""
    presets = [p for p in sorted((root / "transfer_functions").glob("*.toml"))
               if tomllib.loads(p.read_text()).get("scale") == "HU"]
    assert len(presets) >= 3
    for path in presets:
        tf = load_transfer_function(path)
        assert -1000.0 in tf.opacity_values and 0.0 in tf.opacity_values, path
        assert tf.opacity_at(-1000.0) == 0.0, path
        assert tf.opacity_at(0.0) < 0.1, path          # water is nearly transparent in every preset
        assert "from memory" in path.read_text(), path


def test_medical_presets_are_marked_and_start_without_a_red_onset(root):
    """The HU presets are marked for medical data (they carry the caution) and their colour ramps are
    our own: at the first value with opacity, red exceeds green by less than 0.15 (no dark-red onset)."""
    for name in ("hu_mineral", "hu_translucent_tissue"):
        tf = load_transfer_function(root / "transfer_functions" / f"{name}.toml")
        assert tf.medical and tf.scale == "HU"
        values = np.linspace(-1000, 3000, 4001)
        onset = values[np.argmax(tf.opacity_at(values) > 0)]
        r, g, _ = tf.albedo_at(onset)
        assert r - g < 0.15 and r > 0.5, (name, onset, r, g)
    clay = load_transfer_function(root / "transfer_functions" / "figurine_clay.toml")
    assert not clay.medical
