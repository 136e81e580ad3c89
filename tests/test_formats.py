"""Readers of the formats real scans come in: NIfTI, DICOM series, TIFF stacks, zarr / OME-Zarr, HDF5.

Sources: NIfTI world positions against ``nibabel.affines.apply_affine`` on the file's own affine; DICOM against
the standard's formula (PS3.3, C.7.6.2.1.1: Image Position + i * column spacing * row direction + j * row spacing *
column direction), written out here, and the modality LUT ``stored * slope + intercept`` (PS3.3, C.11.1.1.2);
TIFF, zarr and HDF5 as round trips of arrays written by their own libraries.
"""

from __future__ import annotations

import math
import random

import numpy as np
import pytest

from tracer.errors import UserError
from tracer.volumes import load_volume

nibabel = pytest.importorskip("nibabel")
pydicom = pytest.importorskip("pydicom")


def rotation(axis, degrees):
    axis = np.asarray(axis, float) / np.linalg.norm(axis)
    a = math.radians(degrees)
    k = np.array([[0, -axis[2], axis[1]], [axis[2], 0, -axis[0]], [-axis[1], axis[0], 0]])
    return np.eye(3) + math.sin(a) * k + (1 - math.cos(a)) * k @ k


# ---------------------------------------------------------------------------------------------- NIfTI


def test_nifti_world_positions_follow_its_affine(tmp_path):
    data = np.arange(6 * 5 * 4, dtype=np.int16).reshape(6, 5, 4)
    affine = np.eye(4)
    affine[:3, :3] = rotation((1, 2, 3), 25) @ np.diag([0.7, 0.5, 1.2])
    affine[:3, 3] = (-12.5, 30.0, 4.25)
    path = tmp_path / "scan.nii.gz"
    image = nibabel.Nifti1Image(data, affine)
    image.set_sform(affine, code=1)
    nibabel.save(image, str(path))
    volume = load_volume(path)
    stored = nibabel.load(str(path)).affine                 # the file's affine (float32 in the header)
    for index in [(0, 0, 0), (5, 4, 3), (2, 1, 3), (3, 4, 0)]:
        np.testing.assert_allclose(volume.index_to_world(index), nibabel.affines.apply_affine(stored, index),
                                   atol=1e-9)
    np.testing.assert_array_equal(volume.data, data.astype(np.float32))
    assert volume.space == "right-anterior-superior" and volume.source_format == "NIfTI-1"


def test_nifti_lengths_in_microns_become_millimetres(tmp_path):
    image = nibabel.Nifti1Image(np.zeros((3, 3, 3), np.uint8), np.diag([2.0, 2.0, 5.0, 1.0]))
    image.header.set_xyzt_units("micron")
    nibabel.save(image, str(tmp_path / "m.nii"))
    np.testing.assert_allclose(load_volume(tmp_path / "m.nii").spacing, [0.002, 0.002, 0.005])


def test_nifti_written_from_an_nrrd_renders_the_same_image(tmp_path, root):
    """Same voxels, same world geometry (an axis flip and anisotropic spacing, exact in float32): same bits."""
    from tests.reference.files import write_volume

    import tracer

    field = np.zeros((14, 12, 10), np.float32)
    x, y, z = np.meshgrid(*(np.linspace(-1, 1, n) for n in field.shape), indexing="ij")
    field[...] = np.exp(-3 * ((x - 0.3) ** 2 + y ** 2 + (z + 0.2) ** 2))
    directions = np.array([[-0.5, 0.0, 0.0], [0.0, 0.75, 0.0], [0.0, 0.0, 1.25]])
    origin = np.array([4.0, -3.5, -6.0])
    nrrd_path = write_volume(tmp_path / "blob.nrrd", field, directions, origin)
    affine = np.eye(4)
    affine[:3, :3] = directions.T
    affine[:3, 3] = origin
    image = nibabel.Nifti1Image(field, affine)
    image.set_sform(affine, code=1)
    nibabel.save(image, str(tmp_path / "blob.nii.gz"))
    tf = root / "transfer_functions" / "plume_smoke.toml"
    frames = []
    for name in ("blob.nrrd", "blob.nii.gz"):
        scene = tmp_path / f"{name}.toml"
        scene.write_text(f'[volume]\npath = "{tmp_path / name}"\n[transfer_function]\npath = "{tf}"\n'
                         "[camera]\nposition = [20.0, -25.0, 8.0]\ntarget = [0.0, 0.0, 0.0]\nwidth = 16\nheight = 12\n"
                         '[environment]\nkind = "constant"\nradiance = [0.5, 0.5, 0.5]\n[render]\nspp = 4\nstep_mm = 0.3\n')
        frames.append(tracer.render(scene))
    assert frames[0]["alpha"].max() > 0.05
    np.testing.assert_array_equal(frames[0]["radiance"], frames[1]["radiance"])
    assert nrrd_path.exists()


# ---------------------------------------------------------------------------------------------- DICOM

ROW_DIRECTION = rotation((0.2, 1.0, 0.4), 20) @ np.array([1.0, 0.0, 0.0])
COLUMN_DIRECTION = rotation((0.2, 1.0, 0.4), 20) @ np.array([0.0, 1.0, 0.0])
PIXEL_SPACING = (0.6, 0.45)               # (between rows, between columns), DICOM's order
SLICE_STEP = 1.25


def write_series(folder, n_slices=6, rows=5, columns=7, slope=2.0, intercept=-1024.0, uid="1.2.3.4.5", tilt=0.0,
                 skip=(), steps=None, description="test series", syntax=None, seed=1, prefix="IM"):
    """A synthetic CT series written with pydicom, files in shuffled order under uninformative names."""
    from pydicom.dataset import Dataset, FileMetaDataset
    from pydicom.uid import CTImageStorage, ExplicitVRLittleEndian, generate_uid

    folder.mkdir(parents=True, exist_ok=True)
    normal = np.cross(ROW_DIRECTION, COLUMN_DIRECTION)
    origin = np.array([-40.0, 12.5, 80.0])
    stored = np.random.default_rng(seed).integers(0, 2000, size=(n_slices, rows, columns)).astype(np.int16)
    positions = []
    offset = 0.0
    order = list(range(n_slices))
    random.Random(seed).shuffle(order)
    for k in range(n_slices):
        offset = k * SLICE_STEP if steps is None else sum(steps[:k])
        positions.append(origin + offset * normal + k * tilt * COLUMN_DIRECTION)
    for name_index, k in enumerate(order):
        if k in skip:
            continue
        meta = FileMetaDataset()
        meta.MediaStorageSOPClassUID = CTImageStorage
        meta.MediaStorageSOPInstanceUID = generate_uid()
        meta.TransferSyntaxUID = syntax or ExplicitVRLittleEndian
        ds = Dataset()
        ds.file_meta = meta
        ds.SOPClassUID = CTImageStorage
        ds.SOPInstanceUID = meta.MediaStorageSOPInstanceUID
        ds.Modality = "CT"
        ds.SeriesInstanceUID = uid
        ds.SeriesDescription = description
        ds.Rows, ds.Columns = rows, columns
        ds.PixelSpacing = list(PIXEL_SPACING)
        ds.ImageOrientationPatient = [float(v) for v in np.concatenate([ROW_DIRECTION, COLUMN_DIRECTION])]
        ds.ImagePositionPatient = [float(v) for v in positions[k]]
        ds.SamplesPerPixel = 1
        ds.PhotometricInterpretation = "MONOCHROME2"
        ds.BitsAllocated, ds.BitsStored, ds.HighBit, ds.PixelRepresentation = 16, 16, 15, 1
        ds.RescaleSlope, ds.RescaleIntercept = slope, intercept
        if syntax is None:
            ds.PixelData = stored[k].tobytes()
        else:                                          # a compressed syntax: a JPEG frame no decoder here can read
            from pydicom.encaps import encapsulate

            ds.PixelData = encapsulate([b"\xff\xd8\xff\xe0" + stored[k].tobytes()[:64]])
        ds.save_as(str(folder / f"{prefix}{name_index:04d}"), enforce_file_format=True)
    return stored, positions


def test_dicom_series_follows_the_standard(tmp_path):
    stored, positions = write_series(tmp_path / "series")
    volume = load_volume(tmp_path / "series")
    n_slices, rows, columns = stored.shape
    assert volume.shape == (columns, rows, n_slices)
    for i, j, k in [(0, 0, 0), (6, 4, 5), (3, 2, 1), (6, 0, 3)]:
        expected = positions[k] + i * PIXEL_SPACING[1] * ROW_DIRECTION + j * PIXEL_SPACING[0] * COLUMN_DIRECTION
        np.testing.assert_allclose(volume.index_to_world((i, j, k)), expected, atol=1e-6)
        assert volume.data[i, j, k] == stored[k, j, i] * 2.0 - 1024.0
    assert volume.space == "left-posterior-superior" and volume.patient_space
    assert dict(volume.details)["modality"] == "CT"
    assert "Hounsfield" in dict(volume.details)["rescale"]


def test_dicom_gantry_tilt_is_kept_as_a_sheared_grid(tmp_path):
    stored, positions = write_series(tmp_path / "tilted", tilt=0.4)
    volume = load_volume(tmp_path / "tilted")
    for i, j, k in [(0, 0, 0), (6, 4, 5), (2, 3, 4)]:
        expected = positions[k] + i * PIXEL_SPACING[1] * ROW_DIRECTION + j * PIXEL_SPACING[0] * COLUMN_DIRECTION
        np.testing.assert_allclose(volume.index_to_world((i, j, k)), expected, atol=1e-6)
    assert "gantry tilt" in dict(volume.details)


@pytest.mark.parametrize("case, make, expected", [
    ("mixed series", lambda f: (write_series(f, uid="1.2.3"), write_series(f / ".." / f.name, n_slices=3, uid="1.2.4",
                                                                              description="scout", seed=2, prefix="SC")),
     "holds 2 DICOM series"),
    ("missing slices", lambda f: write_series(f, n_slices=8, skip=(4,)), "missing slices: (0020,0032) Image Position (Patient) jumps 2.500 mm"),
    ("uneven spacing", lambda f: write_series(f, steps=[1.0, 1.3, 1.0, 1.2, 1.0]), "uneven slice spacing"),
    ("one slice", lambda f: write_series(f, n_slices=1), "a volume needs at least 2"),
    ("compressed", lambda f: write_series(f, syntax="1.2.840.10008.1.2.4.50"), "(0002,0010) Transfer Syntax"),
])
def test_bad_dicom_series_gives_one_line(tmp_path, case, make, expected):
    folder = tmp_path / "series"
    make(folder)
    with pytest.raises(UserError) as caught:
        load_volume(folder)
    message = str(caught.value)
    assert "\n" not in message and expected in message, message


# ---------------------------------------------------------------------------------------------- TIFF, zarr, HDF5


def test_tiff_stack_and_folder_round_trip(tmp_path):
    tifffile = pytest.importorskip("tifffile")
    stack = np.random.default_rng(3).integers(0, 60000, size=(5, 6, 7)).astype(np.uint16)      # (z, y, x)
    tifffile.imwrite(tmp_path / "stack.tif", stack, imagej=True, resolution=(1 / 0.2, 1 / 0.25),
                     metadata={"spacing": 0.5, "unit": "um"})
    volume = load_volume(tmp_path / "stack.tif")
    np.testing.assert_array_equal(volume.data, stack.transpose(2, 1, 0).astype(np.float32))
    np.testing.assert_allclose(volume.spacing, [0.0002, 0.00025, 0.0005], rtol=1e-6)
    pages = tmp_path / "pages"
    pages.mkdir()
    for k in range(stack.shape[0]):
        tifffile.imwrite(pages / f"slice{k + 1}.tif", stack[k])                 # slice10 after slice9: natural order
    folder_volume = load_volume(pages, spacing_mm=(0.1, 0.1, 0.3))
    np.testing.assert_array_equal(folder_volume.data, volume.data)
    np.testing.assert_allclose(folder_volume.spacing, [0.1, 0.1, 0.3])


def test_zarr_and_ome_zarr_round_trip(tmp_path):
    zarr = pytest.importorskip("zarr")
    data = np.random.default_rng(4).random((6, 5, 4)).astype(np.float32)
    array = zarr.open_array(str(tmp_path / "plain.zarr"), mode="w", shape=data.shape, dtype=data.dtype, chunks=(3, 3, 2))
    array[...] = data
    np.testing.assert_array_equal(load_volume(tmp_path / "plain.zarr").data, data)
    group = zarr.open_group(str(tmp_path / "run.zarr"), mode="w")
    member = group.create_array("density", shape=data.shape, dtype=data.dtype, chunks=(2, 2, 2))
    member[...] = data
    np.testing.assert_array_equal(load_volume(f"{tmp_path / 'run.zarr'}::density", spacing_mm=(1, 2, 3)).data, data)
    ome = zarr.open_group(str(tmp_path / "image.zarr"), mode="w")
    zyx = data.transpose(2, 1, 0)                                                # stored z, y, x
    scale0 = ome.create_array("0", shape=zyx.shape, dtype=zyx.dtype, chunks=(2, 2, 2))
    scale0[...] = zyx
    ome.attrs["multiscales"] = [{"version": "0.4", "axes": [{"name": a, "type": "space", "unit": "micrometer"}
                                                             for a in "zyx"],
                                 "datasets": [{"path": "0", "coordinateTransformations": [
                                     {"type": "scale", "scale": [4.0, 2.0, 1.0]}]}]}]
    volume = load_volume(tmp_path / "image.zarr")
    np.testing.assert_array_equal(volume.data, data)
    np.testing.assert_allclose(volume.spacing, [0.001, 0.002, 0.004])
    assert volume.source_format == "OME-Zarr"


def test_hdf5_dataset_round_trip(tmp_path):
    h5py = pytest.importorskip("h5py")
    data = np.random.default_rng(5).integers(0, 255, size=(7, 6, 5)).astype(np.uint8)
    with h5py.File(tmp_path / "scan.h5", "w") as handle:
        handle.create_dataset("volumes/ct", data=data, chunks=(4, 4, 4))
    volume = load_volume(f"{tmp_path / 'scan.h5'}::volumes/ct", spacing_mm=(0.5, 0.5, 1.0))
    np.testing.assert_array_equal(volume.data, data.astype(np.float32))
    with pytest.raises(UserError, match="no dataset 'volumes/mr'; datasets here: volumes/ct"):
        load_volume(f"{tmp_path / 'scan.h5'}::volumes/mr")
    with pytest.raises(UserError, match="name the dataset"):
        load_volume(tmp_path / "scan.h5")


def test_a_missing_optional_library_names_the_extra(tmp_path, monkeypatch):
    import tracer.volumes.optional as optional

    real = optional.importlib.import_module

    def without_nibabel(name, *args):
        if name == "nibabel":
            raise ImportError("No module named 'nibabel'")
        return real(name, *args)

    monkeypatch.setattr(optional.importlib, "import_module", without_nibabel)
    (tmp_path / "scan.nii").write_bytes(b"")
    with pytest.raises(UserError) as caught:
        load_volume(tmp_path / "scan.nii")
    assert 'install the formats extra: python -m pip install ".[formats]"' in str(caught.value)
    assert "\n" not in str(caught.value)


# ---------------------------------------------------------------------------------------------- convert, info


def test_convert_writes_an_nrrd_with_the_same_geometry_and_info_names_the_format(tmp_path):
    import nrrd
    from typer.testing import CliRunner

    from tracer.cli.main import app

    stored, positions = write_series(tmp_path / "series")
    runner = CliRunner()
    result = runner.invoke(app, ["convert", str(tmp_path / "series"), str(tmp_path / "ct.nrrd")])
    assert result.exit_code == 0, result.output
    data, header = nrrd.read(str(tmp_path / "ct.nrrd"), index_order="F")
    assert data.dtype == np.int16                                         # HU are whole numbers: kept whole
    np.testing.assert_array_equal(data[:, :, 2], (stored[2].astype(float) * 2 - 1024).T)
    np.testing.assert_allclose(header["space origin"], positions[0], atol=1e-9)
    assert header["space"] == "left-posterior-superior"
    again = load_volume(tmp_path / "ct.nrrd")
    original = load_volume(tmp_path / "series")
    np.testing.assert_allclose(again.directions, original.directions, atol=1e-12)
    info = runner.invoke(app, ["info", str(tmp_path / "series")])
    assert info.exit_code == 0, info.output
    assert "format       DICOM" in info.output and "modality     CT" in info.output
    assert "research and teaching" in info.output                         # a patient space: the medical caution
