"""tf-check findings: optical depth by the Beer-Lambert law, and warnings for useless functions."""

import math

import numpy as np
import pytest

from tracer.optics.check import check_transfer_function, plot_transfer_check
from tracer.optics.transfer import TransferFunction
from tracer.volumes import Volume


def constant(value_points, opacity_points):
    return TransferFunction(np.array(value_points, float), np.array(opacity_points, float),
                            np.array([0.0]), np.array([[0.5, 0.5, 0.5]]))


def cube(values):
    return Volume(values.astype(np.float32), directions=np.eye(3) * 0.5)


def test_optical_depth_along_the_diagonal():
    """Uniform material with opacity a per mm crossed over the diagonal D: optical depth -ln(1-a) * D."""
    data = np.ones((9, 9, 9))
    check = check_transfer_function(cube(data), constant([0.0, 2.0], [0.1, 0.1]))
    diagonal = math.sqrt(3) * 4.0
    assert check.diagonal_mm == pytest.approx(diagonal)
    assert check.optical_depth == pytest.approx(-math.log(0.9) * diagonal)
    assert check.nonzero_fraction == 1.0


def test_transparent_function_warns():
    data = np.linspace(0, 1, 8**3).reshape(8, 8, 8)
    check = check_transfer_function(cube(data), constant([2.0, 3.0], [0.0, 0.8]))
    assert any("transparent over the whole data range" in w for w in check.warnings)
    assert check.verdict.startswith("invisible")


def test_opaque_function_warns():
    data = np.linspace(0, 1, 8**3).reshape(8, 8, 8)
    check = check_transfer_function(cube(data), constant([0.0, 1.0], [1.0, 1.0]))
    assert any("opaque over the whole data range" in w for w in check.warnings)


def test_faint_material_is_nearly_invisible():
    data = np.zeros((8, 8, 8))
    data[3:5, 3:5, 3:5] = 1.0
    check = check_transfer_function(cube(data), constant([0.0, 0.5, 1.0], [0.0, 0.0, 0.005]))
    assert check.verdict.startswith("nearly invisible")
    assert check.nonzero_fraction == pytest.approx(8 / 512)


def test_dense_material_shows_only_its_shell():
    data = np.ones((40, 40, 40))
    check = check_transfer_function(cube(data), constant([0.0, 2.0], [0.99, 0.99]))
    assert check.verdict.startswith("only the outer shell")


def test_report_plot_is_written(tmp_path):
    data = np.linspace(0, 1, 8**3).reshape(8, 8, 8)
    volume = cube(data)
    tf = constant([0.2, 0.8], [0.0, 0.5])
    path = tmp_path / "report.png"
    plot_transfer_check(volume, tf, check_transfer_function(volume, tf), path)
    import imageio.v3 as iio

    image = iio.imread(path)
    assert image.shape[0] > 300 and image.shape[1] > 600
    assert [p.name for p in tmp_path.iterdir()] == ["report.png"]


def test_a_background_spike_is_clipped_and_the_rest_keeps_its_shape():
    """90% of the voxels at one value (the zeros around a skull-stripped brain, say) must not flatten
    the histogram: the spike's bin is clipped to a ceiling near the other bins, nothing else is."""
    from tracer.optics.check import clipped_histogram

    rng = np.random.default_rng(3)
    values = np.concatenate([np.zeros(90_000), rng.uniform(10, 100, 10_000)])
    centres, shares, ceiling, clipped = clipped_histogram(values, 0.0, 100.0, n_bins=100)
    assert list(clipped) == [0] and shares[0] == pytest.approx(90.0, abs=0.1)
    rest = shares[10:]
    assert rest.max() < ceiling < 4 * rest.max()           # 2.5 x the 90th percentile of the occupied bins
    uniform = clipped_histogram(rng.uniform(0, 1, 10_000), 0.0, 1.0, n_bins=50)
    assert len(uniform[3]) == 0 and uniform[2] >= uniform[1].max()


def test_emission_is_reported_as_what_the_medium_emits():
    """(1 - albedo) L_e (sigma_a carries the emission, Max 1995): half the voxels glow with albedo 0.5 and
    L_e = (2, 1, 0) where the value is 1, none where it is 0."""
    import dataclasses

    data = np.zeros((9, 9, 9))
    data[:, :, 4:] = 1.0
    tf = dataclasses.replace(constant([0.0, 1.0], [0.1, 0.1]), emission_values=np.array([0.0, 0.5, 1.0]),
                             emissions=np.array([[0, 0, 0], [0, 0, 0], [2.0, 1.0, 0.0]]))
    check = check_transfer_function(cube(data), tf)
    assert check.glowing_fraction == pytest.approx(5 / 9)
    assert check.brightest_glow[0] == pytest.approx((1.0, 0.5, 0.0)) and check.brightest_glow[1] == pytest.approx(1.0)
    assert any(line.startswith("emission") for line in check.lines())
    assert check_transfer_function(cube(data), constant([0.0, 1.0], [0.1, 0.1])).glowing_fraction is None


def test_emission_where_nothing_absorbs_is_a_warning():
    import dataclasses

    tf = dataclasses.replace(constant([0.0, 0.5, 1.0], [0.0, 0.0, 0.1]), emission_values=np.array([0.0, 0.4, 0.5]),
                             emissions=np.array([[1.0, 1.0, 1.0], [1.0, 1.0, 1.0], [0.0, 0.0, 0.0]]))
    check = check_transfer_function(cube(np.linspace(0, 1, 729).reshape(9, 9, 9)), tf)
    assert any("nothing will glow" in warning for warning in check.warnings)
