"""Demo volumes: bit-identical regeneration, size limits, and the properties each scenario promises."""

import hashlib

import numpy as np
import pytest

from tracer.volumes.demo import GENERATORS, generate, write_demo_volumes
from tracer.volumes import load_volume


def sha256(array):
    return hashlib.sha256(np.ascontiguousarray(array).tobytes()).hexdigest()


@pytest.mark.parametrize("name", sorted(GENERATORS))
def test_shipped_volume_regenerates_bit_identically(root, name, tmp_path):
    shipped = load_volume(root / "sample_volumes" / f"{name}.nrrd")
    fresh = generate(name)
    assert shipped.source_dtype == fresh.data.dtype.name
    assert sha256(shipped.data) == sha256(fresh.data.astype(shipped.data.dtype))     # 8/16-bit integers are kept
    written = write_demo_volumes(tmp_path, [name])[0]
    again = load_volume(written)
    assert sha256(again.data) == sha256(shipped.data)
    np.testing.assert_allclose(again.directions, shipped.directions)
    np.testing.assert_allclose(again.origin, shipped.origin)


@pytest.mark.parametrize("name", sorted(GENERATORS))
def test_shipped_files_stay_small(root, name):
    assert (root / "sample_volumes" / f"{name}.nrrd").stat().st_size < 2_000_000     # README: "under 2 MB each"


def test_figurine_is_hounsfield_like_with_wire_and_pores():
    sample = generate("figurine")
    data = sample.data
    assert data.dtype == np.int16 and len(set(sample.spacing_mm)) > 1      # anisotropic
    assert abs(np.median(data[:10, :10, :10]) - (-1000)) < 20                # air at -1000 HU
    assert (data > 2900).sum() > 200                                        # steel wire
    assert ((data > 1500) & (data < 2100)).mean() > 0.05                    # clay


def test_lattice_struts_are_two_to_three_voxels_thick():
    """Thickness by the Euclidean distance transform (scipy.ndimage): along the struts' medial
    axis the local maximum inscribed radius r gives a thickness of about 2r - 1 voxels."""
    from scipy import ndimage

    data = generate("lattice").data
    solid = data[:, :, 20:100] > 106
    distance = ndimage.distance_transform_edt(solid)
    ridge = distance[(distance >= ndimage.maximum_filter(distance, 3)) & solid]
    thickness = 2 * np.median(ridge) - 1
    assert 2.0 <= thickness <= 3.0


def test_plume_is_soft():
    data = generate("plume").data
    assert data.dtype == np.float32 and data.min() == 0.0 and 0.3 < data.max() < 1.0
    gradient = np.abs(np.diff(data, axis=2)).max()
    assert gradient < 0.25 * data.max()     # no sharp surfaces


def test_flame_is_a_temperature_field_hot_below_and_smoky_above():
    sample = generate("flame")
    data = sample.data.astype(float)
    assert sample.data.dtype == np.uint16
    assert data.min() == 300 and 1850 <= data.max() <= 1950                 # ambient to a flame's core, kelvin
    assert np.all(data[:4, :4, :] < 320)                                     # ambient air at the box's edge
    flame_layers, smoke_layers = data[:, :, :40], data[:, :, 60:]            # below and above 20 / 30 mm
    assert flame_layers.max() > 1800 and smoke_layers.max() < 1200 and (smoke_layers > 500).sum() > 500
