"""Volume loading: geometry against the NRRD file format specification (teem), dtypes, errors."""

import gzip

import nrrd
import numpy as np
import pytest

from tracer.errors import UserError
from tracer.volumes import load_volume, summarize


def write(path, data, header=None, **options):
    nrrd.write(str(path), data, header or {}, compression_level=1, **options)
    return path


def test_space_directions_and_origin_give_world_positions(tmp_path, rng):
    """NRRD specification (teem): voxel (i, j, k) sits at space origin + i*d0 + j*d1 + k*d2,
    where d_a is the a-th vector of `space directions`; sizes are listed fastest axis (x) first."""
    data = rng.normal(size=(5, 7, 4)).astype(np.float32)
    directions = np.array([[0.0, 0.5, 0.0], [-0.3, 0.0, 0.1], [0.0, 0.0, 1.2]])
    origin = np.array([10.0, -4.0, 2.5])
    header = {"space": "right-anterior-superior", "space directions": directions, "space origin": origin}
    path = write(tmp_path / "oblique.nrrd", data, header)
    volume = load_volume(path)
    assert volume.shape == (5, 7, 4)
    np.testing.assert_array_equal(volume.data, data)
    for index in [(0, 0, 0), (4, 0, 0), (0, 6, 0), (0, 0, 3), (2, 5, 1)]:
        i, j, k = index
        expected = origin + i * directions[0] + j * directions[1] + k * directions[2]
        np.testing.assert_allclose(volume.index_to_world(index), expected, atol=1e-12)
        np.testing.assert_allclose(volume.world_to_index(expected), index, atol=1e-9)
    np.testing.assert_allclose(volume.spacing, np.linalg.norm(directions, axis=1))


def test_spacings_field_gives_axis_aligned_anisotropic_grid(tmp_path):
    """NRRD specification: `spacings` is the per-axis sample distance when there is no space field."""
    data = np.arange(3 * 4 * 5, dtype=np.uint16).reshape(3, 4, 5)
    path = write(tmp_path / "spacings.nrrd", data, {"spacings": [0.5, 0.25, 2.0]})
    volume = load_volume(path)
    np.testing.assert_allclose(volume.directions, np.diag([0.5, 0.25, 2.0]))
    np.testing.assert_allclose(volume.extent_mm, [1.0, 0.75, 8.0])
    assert volume.data[2, 3, 4] == data[2, 3, 4]


@pytest.mark.parametrize("dtype", ["int8", "uint8", "int16", "uint16", "int32", "uint32", "float32", "float64"])
def test_every_supported_dtype_loads_exactly(tmp_path, dtype):
    """8- and 16-bit integers are kept as they are (exact in float32, a quarter to a half of the memory); the
    other types are held as float32."""
    data = (np.arange(24).reshape(2, 3, 4) - 5).astype(dtype) if dtype[0] != "u" else np.arange(24, dtype=dtype).reshape(2, 3, 4)
    volume = load_volume(write(tmp_path / f"v_{dtype}.nrrd", data))
    kept = dtype in ("int8", "uint8", "int16", "uint16")
    assert volume.data.dtype == (np.dtype(dtype) if kept else np.float32) and volume.data.flags.c_contiguous
    assert volume.bricks.dtype == volume.data.dtype
    assert volume.source_dtype == dtype
    np.testing.assert_array_equal(volume.data, data.astype(np.float32))


@pytest.mark.parametrize("encoding", ["raw", "gzip"])
def test_detached_header_reads_its_data_file(tmp_path, encoding, rng):
    data = rng.integers(-1000, 2000, size=(4, 5, 6)).astype(np.int16)
    path = tmp_path / "detached.nhdr"
    nrrd.write(str(path), data, {"encoding": encoding, "spacings": [1.0, 1.0, 2.0]}, detached_header=True)
    volume = load_volume(path)
    np.testing.assert_array_equal(volume.data, data)


def test_big_endian_data_is_normalised(tmp_path):
    data = np.arange(8, dtype=">i2").reshape(2, 2, 2)
    volume = load_volume(write(tmp_path / "be.nrrd", data, {"endian": "big"}))
    np.testing.assert_array_equal(volume.data, np.arange(8).reshape(2, 2, 2))


def test_npy_takes_spacing_and_origin(tmp_path):
    data = np.zeros((3, 4, 5), np.float32)
    path = tmp_path / "v.npy"
    np.save(path, data)
    volume = load_volume(path, spacing_mm=(0.5, 1.0, 2.0), origin_mm=(1, 2, 3))
    np.testing.assert_allclose(volume.index_to_world((2, 3, 4)), [2.0, 5.0, 11.0])


def test_summary_reports_range_percentiles_and_nonfinite(tmp_path):
    data = np.arange(60, dtype=np.float32).reshape(3, 4, 5)
    data[0, 0, 0] = np.nan
    volume = load_volume(write(tmp_path / "nan.nrrd", data), allow_nonfinite=True)
    summary = summarize(volume)
    assert summary.n_nonfinite == 1
    assert summary.value_min == 1.0 and summary.value_max == 59.0
    assert summary.percentiles["p50"] == pytest.approx(np.percentile(np.arange(1, 60), 50))
    assert summary.histogram_counts.sum() == 59


# --- errors: one line naming the file and the problem -------------------------------------

def _gzip_truncated(tmp_path):
    path = write(tmp_path / "trunc.nrrd", np.zeros((8, 8, 8), np.float32), {"encoding": "raw"})
    raw = path.read_bytes()
    path.write_bytes(raw[:-100])
    return path


def _unknown_encoding(tmp_path):
    path = tmp_path / "enc.nrrd"
    path.write_bytes(b"NRRD0004\ntype: uint8\ndimension: 3\nsizes: 2 2 2\nencoding: jpeg2000\n\n" + bytes(8))
    return path


def _unknown_type(tmp_path):
    path = tmp_path / "type.nrrd"
    path.write_bytes(b"NRRD0004\ntype: quaternion\ndimension: 3\nsizes: 2 2 2\nencoding: raw\n\n" + bytes(8))
    return path


def _missing_endian(tmp_path):
    path = tmp_path / "endian.nrrd"
    path.write_bytes(b"NRRD0004\ntype: short\ndimension: 3\nsizes: 2 2 2\nencoding: raw\n\n" + bytes(16))
    return path


def _int64(tmp_path):
    return write(tmp_path / "int64.nrrd", np.zeros((2, 2, 2), np.int64))


def _escape(tmp_path):
    outside = tmp_path / "outside.raw"
    outside.write_bytes(bytes(8))
    folder = tmp_path / "inner"
    folder.mkdir()
    path = folder / "escape.nhdr"
    path.write_text("NRRD0004\ntype: uint8\ndimension: 3\nsizes: 2 2 2\nencoding: raw\ndata file: ../outside.raw\n")
    return path


def _absolute_escape(tmp_path):
    secret = tmp_path / "secret.txt"
    secret.write_bytes(b"12345678")
    folder = tmp_path / "inner2"
    folder.mkdir()
    path = folder / "abs.nhdr"
    path.write_text(f"NRRD0004\ntype: uint8\ndimension: 3\nsizes: 2 2 2\nencoding: raw\ndata file: {secret}\n")
    return path


def _nan(tmp_path):
    data = np.ones((3, 3, 3), np.float32)
    data[1, 1, 1] = np.nan
    data[0, 1, 2] = np.inf
    return write(tmp_path / "nan.nrrd", data)


def _two_d(tmp_path):
    return write(tmp_path / "flat.nrrd", np.zeros((4, 5), np.float32))


def _thin_axis(tmp_path):
    return write(tmp_path / "thin.nrrd", np.zeros((4, 1, 5), np.float32))


def _huge(tmp_path):
    path = tmp_path / "huge.nrrd"
    path.write_bytes(b"NRRD0004\ntype: float\ndimension: 3\nsizes: 4096 4096 4096\nendian: little\nencoding: gzip\n\n" + gzip.compress(b""))
    return path


def _parallel(tmp_path):
    header = {"space": "right-anterior-superior", "space directions": np.array([[1.0, 0, 0], [2.0, 0, 0], [0, 0, 1.0]])}
    return write(tmp_path / "parallel.nrrd", np.zeros((2, 2, 2), np.float32), header)


def _zero_direction(tmp_path):
    header = {"space": "right-anterior-superior", "space directions": np.array([[1.0, 0, 0], [0, 0, 0], [0, 0, 1.0]])}
    return write(tmp_path / "zero.nrrd", np.zeros((2, 2, 2), np.float32), header)


def _missing_file(tmp_path):
    return tmp_path / "nowhere.nrrd"


def _npy_2d(tmp_path):
    path = tmp_path / "flat.npy"
    np.save(path, np.zeros((3, 3)))
    return path


def _npy_object(tmp_path):
    """An .npy whose header declares Python objects (written by hand: nothing here pickles)."""
    path = tmp_path / "obj.npy"
    with open(path, "wb") as handle:
        np.lib.format.write_array_header_1_0(handle, {"descr": "|O", "fortran_order": False, "shape": (2, 2, 2)})
        handle.write(b"\x80\x04N." * 8)
    return path


def _wrong_suffix(tmp_path):
    path = tmp_path / "volume.vtk"
    path.write_bytes(b"# vtk DataFile Version 3.0\n")
    return path


def _damaged_tiff(tmp_path):
    path = tmp_path / "volume.tif"
    path.write_bytes(b"II*\x00")
    return path


BAD_VOLUMES = {
    "truncated data": (_gzip_truncated, "data: the file ends before its sizes"),
    "unknown encoding": (_unknown_encoding, "encoding"),
    "unknown type": (_unknown_type, "type"),
    "missing endian": (_missing_endian, "endian: Header is missing required field: endian"),
    "unsupported type": (_int64, "type: 'int64' is not supported"),
    "data file escapes the folder": (_escape, "lies outside the header's folder"),
    "absolute data file elsewhere": (_absolute_escape, "lies outside the header's folder"),
    "NaN and Inf voxels": (_nan, "2 voxels are NaN or Inf"),
    "not 3-D": (_two_d, "must be 3-D"),
    "axis of size 1": (_thin_axis, "at least 2 samples"),
    "over the memory budget": (_huge, "over the memory budget"),
    "parallel space directions": (_parallel, "parallel"),
    "zero space direction": (_zero_direction, "zero length"),
    "missing file": (_missing_file, "file not found"),
    "npy not 3-D": (_npy_2d, "must be 3-D"),
    "npy of objects": (_npy_object, "not a readable .npy array"),
    "unknown format": (_wrong_suffix, "unknown volume format"),
    "damaged TIFF": (_damaged_tiff, "not a readable TIFF"),
}


@pytest.mark.parametrize("case", sorted(BAD_VOLUMES))
def test_bad_volume_gives_one_line_naming_the_file(tmp_path, case):
    make, expected = BAD_VOLUMES[case]
    path = make(tmp_path)
    with pytest.raises(UserError) as caught:
        load_volume(path, budget_bytes=2**30)
    message = str(caught.value)
    assert "\n" not in message
    assert str(path) in message
    assert expected in message
