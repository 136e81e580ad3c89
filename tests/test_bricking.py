"""A loaded volume is held as bricks only, filled plane by plane where the format allows it (README, "Bringing
your own volume", Memory).

The bricks a reader builds part by part must be the bits the whole array gives (``Volume(data=...)``, which
bricks the array in one go); the plain array assembled back from them must be the file's; macrocells read
from the bricks must be the largest extinction over each cell's voxels, computed here with numpy from the
voxels and the baked table; and renders must not change: a 512^3 uint16 zarr read chunk by chunk renders
the bits of the same array held whole, and an 8-bit volume renders the bits of its float32 copy.
"""

from __future__ import annotations


import nrrd
import numpy as np
import pytest

from tracer.volumes import load_volume
from tracer.volumes.volume import Volume

SHAPES = [(21, 18, 27), (17, 9, 2), (9, 16, 10)]      # odd, one plane past a layer, an exact number of bricks


def field(shape, dtype, seed=0):
    values = np.random.default_rng(seed).random(shape) * (200 if np.dtype(dtype).itemsize == 1 else 3000)
    return values.astype(dtype)


def assert_same_volume(loaded, data):
    whole = Volume(data=data)
    assert loaded.bricks.dtype == whole.bricks.dtype
    np.testing.assert_array_equal(loaded.bricks, whole.bricks)
    np.testing.assert_array_equal(loaded.data, whole.data)
    assert loaded.value_range == whole.value_range == (float(whole.data.min()), float(whole.data.max()))


@pytest.mark.parametrize("shape", SHAPES)
@pytest.mark.parametrize("dtype", ["uint8", "int16", "float32", "float64"])
@pytest.mark.parametrize("order", ["C", "F"])
def test_npy_read_plane_by_plane_gives_the_bricks_of_the_whole_array(tmp_path, shape, dtype, order):
    data = field(shape, dtype)
    np.save(tmp_path / "v.npy", np.asarray(data, order=order))
    assert_same_volume(load_volume(tmp_path / "v.npy"), data)


@pytest.mark.parametrize("encoding", ["raw", "gzip", "bzip2"])
@pytest.mark.parametrize("detached", [False, True])
def test_nrrd_read_plane_by_plane_gives_the_bricks_of_the_whole_array(tmp_path, encoding, detached):
    data = field((21, 18, 27), ">u2")
    path = tmp_path / ("v.nhdr" if detached else "v.nrrd")
    nrrd.write(str(path), data, {"encoding": encoding, "endian": "big"}, index_order="F", detached_header=detached)
    assert_same_volume(load_volume(path), data.astype(np.uint16))


def test_chunked_stores_read_plane_by_plane_give_the_bricks_of_the_whole_array(tmp_path):
    zarr = pytest.importorskip("zarr")
    h5py = pytest.importorskip("h5py")
    data = field((21, 18, 27), "int16")
    array = zarr.open_array(str(tmp_path / "v.zarr"), mode="w", shape=data.shape, dtype=data.dtype, chunks=(5, 7, 9))
    array[...] = data
    assert_same_volume(load_volume(tmp_path / "v.zarr"), data)
    with h5py.File(tmp_path / "v.h5", "w") as handle:
        handle.create_dataset("a/b", data=data, chunks=(4, 4, 4))
    assert_same_volume(load_volume(f"{tmp_path / 'v.h5'}::a/b"), data)
    ome = zarr.open_group(str(tmp_path / "ome.zarr"), mode="w")
    zyx = data.transpose(2, 1, 0)
    ome.create_array("0", shape=zyx.shape, dtype=zyx.dtype, chunks=(3, 4, 5))[...] = zyx
    ome.attrs["multiscales"] = [{"version": "0.4", "axes": [{"name": a, "type": "space"} for a in "zyx"],
                                 "datasets": [{"path": "0"}]}]
    assert_same_volume(load_volume(tmp_path / "ome.zarr"), data)


def test_tiff_pages_give_the_bricks_of_the_whole_array(tmp_path):
    tifffile = pytest.importorskip("tifffile")
    data = field((21, 18, 11), "uint16")
    (tmp_path / "pages").mkdir()
    for k in range(data.shape[2]):
        tifffile.imwrite(tmp_path / "pages" / f"slice_{k}.tif", data[:, :, k].T)
    assert_same_volume(load_volume(tmp_path / "pages"), data)
    tifffile.imwrite(tmp_path / "stack.tif", data.transpose(2, 1, 0))
    assert_same_volume(load_volume(tmp_path / "stack.tif"), data)


def test_a_loaded_volume_keeps_no_plain_array(tmp_path):
    data = field((40, 33, 20), "uint8")
    np.save(tmp_path / "v.npy", data)
    volume = load_volume(tmp_path / "v.npy")
    assert volume._data is None
    assert volume.data is not volume.data                          # assembled afresh on each use, never kept
    assert volume._data is None
    assert volume.to_arrays().field.size == 8                      # the kernels get a placeholder, read bricks


def test_nonfinite_voxels_are_counted_across_planes(tmp_path):
    from tracer.errors import UserError

    data = field((20, 12, 30), "float32")
    data[3, 4, 8] = np.nan                                         # on a plane two layers of bricks share
    data[19, 0, 29] = np.inf
    data[0, 11, 0] = -np.inf
    np.save(tmp_path / "v.npy", np.asfortranarray(data))
    with pytest.raises(UserError, match="data: 3 voxels are NaN or Inf"):
        load_volume(tmp_path / "v.npy")
    assert np.isnan(load_volume(tmp_path / "v.npy", allow_nonfinite=True).data[3, 4, 8])


@pytest.mark.parametrize("size", [8, 4])
def test_macrocells_are_the_largest_extinction_over_each_cells_voxels(size):
    """Reference: numpy over the voxel block [size c, size c + size] per axis and the baked table entries spanning
    the block's value range (the definition in ``rendering.arguments.macrocells``' docstring)."""
    from tracer.optics.transfer import TransferFunction
    from tracer.rendering.arguments import macrocells

    data = np.zeros((37, 20, 9), np.uint8)
    data[5:9, 3:6, 2:4] = 180
    data[30:, 15:, :] = 90
    volume = Volume(data=data)
    tf = TransferFunction(opacity_values=np.array([50.0, 150.0]), opacity=np.array([0.0, 0.8]),
                          color_values=np.array([0.0]), colors=np.array([[1.0, 1.0, 1.0]]), reference_length_mm=1.0)
    table = tf.bake(*volume.value_range)
    cells = macrocells(volume, table, size)
    n_entries = table.extinction.size
    expected = np.zeros(cells.shape, np.float32)
    for index in np.ndindex(*cells.shape):
        block = data[tuple(slice(size * c, size * c + size + 1) for c in index)]
        position = lambda v: np.clip((float(v) - table.lookup[0]) * table.lookup[1], 0, n_entries - 1)
        e0, e1 = int(np.floor(position(block.min()))), int(np.ceil(position(block.max())))
        expected[index] = table.extinction[e0:e1 + 1].max()
    np.testing.assert_array_equal(cells, expected)
    assert (cells == 0).sum() > 0 and (cells > 0).sum() > 0


SCENE = ('[transfer_function]\nopacity = [[0.0, 0.0], [{top}, 0.6]]\ncolor = [[0.0, [0.9, 0.7, 0.5]]]\n'
         '[camera]\nwidth = 24\nheight = 20\n[environment]\nkind = "constant"\nradiance = [0.6, 0.6, 0.6]\n'
         '[[lights]]\nkind = "directional"\ntoward = [-1.0, -0.5, 0.8]\nirradiance = [2.0, 2.0, 2.0]\n[render]\nspp = 2\n')


def render_both(tmp_path, path, whole_data, top):
    """The render of ``path`` loaded from disk and of ``whole_data`` held whole, same scene otherwise."""
    import dataclasses

    import tracer

    scene_path = tmp_path / "scene.toml"
    scene_path.write_text(f'[volume]\npath = "{path}"\n' + SCENE.format(top=top))
    scene = tracer.load_scene(scene_path)
    whole = dataclasses.replace(scene, volume=Volume(data=whole_data, origin=scene.volume.origin,
                                                     directions=scene.volume.directions))
    return tracer.render(scene), tracer.render(whole)


def test_an_8_bit_volume_renders_the_bits_of_its_float32_copy(tmp_path):
    x, y, z = np.meshgrid(*(np.linspace(-1, 1, n) for n in (30, 26, 22)), indexing="ij")
    data = (np.exp(-3 * (x ** 2 + y ** 2 + z ** 2)) * 250).astype(np.uint8)
    np.save(tmp_path / "v.npy", data)
    kept, as_float = render_both(tmp_path, tmp_path / "v.npy", data.astype(np.float32), 250.0)
    assert kept["alpha"].max() > 0.3
    for key in ("radiance", "radiance_variance", "alpha", "albedo", "event1_normal", "event1_depth", "event2_position"):
        np.testing.assert_array_equal(kept[key], as_float[key], err_msg=key)


@pytest.mark.slow
def test_a_512_cubed_uint16_zarr_read_chunk_by_chunk_renders_the_bits_of_the_whole_array(tmp_path):
    """Issue 16's check: chunked reading of a 512^3 uint16 volume renders the same bits as reading it whole."""
    zarr = pytest.importorskip("zarr")
    n = 512
    axis = np.linspace(-1, 1, n, dtype=np.float32)
    data = np.empty((n, n, n), np.uint16)
    for i in range(n):                               # plane by plane: no 512^3 float temporary
        r2 = axis[i] ** 2 + axis[:, None] ** 2 + axis[None, :] ** 2
        data[i] = (40000 * np.exp(-5 * r2) + 3000 * (np.sin(9 * axis[None, :]) > 0.7)).astype(np.uint16)
    array = zarr.open_array(str(tmp_path / "big.zarr"), mode="w", shape=data.shape, dtype=data.dtype,
                            chunks=(64, 64, 64))
    array[...] = data
    chunked, whole = render_both(tmp_path, tmp_path / "big.zarr", data, 43000.0)
    assert chunked["alpha"].max() > 0.3
    for key in ("radiance", "radiance_variance", "alpha", "albedo", "event1_normal", "event1_depth", "event2_position"):
        np.testing.assert_array_equal(chunked[key], whole[key], err_msg=key)
