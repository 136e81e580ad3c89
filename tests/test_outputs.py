"""Output files: the NPZ and EXR contracts of the README, "What a render writes" (EXR read back through the
OpenEXR library), PNG encoding against IEC 61966-2-1, pooling of sample ranges, contact sheets."""

import json

import numpy as np
import OpenEXR
import pytest

from tracer.rendering.accumulate import merge_frames
from tracer.rendering.buffers import buffer_specs
from tracer.errors import UserError
from tracer.outputs.exr import read_exr, write_exr
from tracer.outputs.npz import read_npz, write_npz
from tracer.outputs.png import srgb_encode
from tracer.outputs.save import save_frame
from tracer.rendering import render

from .helpers import assert_pools_to_the_whole, blob_scene

CONTRACT_EXR_CHANNELS = (
    ["R", "G", "B", "A"] + [f"variance.{c}" for c in "RGB"] + [f"albedo.{c}" for c in "RGB"]
    + [f"{e}.{layer}.{a}" for e in ("event1", "event2") for layer in ("position", "normal") for a in "XYZ"]
    + [f"{e}.depth.Z" for e in ("event1", "event2")] + [f"{e}.hit.Y" for e in ("event1", "event2")]
)
CONTRACT_NPZ_KEYS = ["radiance", "radiance_variance", "alpha", "albedo", "event1_position", "event2_position",
                   "event1_normal", "event2_normal", "event1_depth", "event2_depth", "event1_hit", "event2_hit"]


@pytest.fixture(scope="module")
def frame():
    return render(blob_scene(width=12, height=10, spp=8, feature_levels=(0.4,)))


def test_npz_holds_every_key_of_the_contract(frame, tmp_path):
    path = write_npz(tmp_path / "a.npz", frame)
    with np.load(path, allow_pickle=False) as archive:
        keys = set(archive.files)
        for key in CONTRACT_NPZ_KEYS:
            array = archive[key]
            assert array.dtype == np.float32
            assert array.shape[:2] == (10, 12)
            assert array.shape[2:] in ((), (3,))
        meta = json.loads(str(archive["meta"]))
    assert set(CONTRACT_NPZ_KEYS) <= keys and {"level1_position", "level1_hit"} <= keys
    for field in ["version", "scene", "spp", "seed", "first_sample", "width", "height", "render_seconds",
                  "events", "step_mm"]:
        assert field in meta
    assert meta["spp"] == 8 and meta["width"] == 12 and meta["height"] == 10
    back = read_npz(path)
    for key in frame.buffers:
        assert np.array_equal(back[key], frame[key])


def test_exr_reads_back_through_openexr_with_every_layer(frame, tmp_path):
    path = write_exr(tmp_path / "a.exr", frame)
    with OpenEXR.File(str(path), separate_channels=True) as handle:
        channels = handle.channels()
        header = handle.header()
        names = set(channels)
        for name in CONTRACT_EXR_CHANNELS + ["level1.position.X", "level1.hit.Y"]:
            assert name in names, name
            assert channels[name].pixels.dtype == np.float32
        np.testing.assert_array_equal(channels["R"].pixels, frame["radiance"][..., 0])
        np.testing.assert_array_equal(channels["A"].pixels, frame["alpha"])
        np.testing.assert_array_equal(channels["event2.normal.Y"].pixels, frame["event2_normal"][..., 1])
        np.testing.assert_array_equal(channels["variance.B"].pixels, frame["radiance_variance"][..., 2])
        assert json.loads(header["tracer_meta"])["spp"] == 8
    back = read_exr(path)
    for spec in buffer_specs(1):
        np.testing.assert_array_equal(back[spec.key], frame[spec.key])


def test_srgb_curve_matches_iec_61966_2_1():
    """IEC 61966-2-1: 12.92 x below 0.0031308, else 1.055 x^(1/2.4) - 0.055; 0.5 linear -> 0.7354."""
    assert srgb_encode(0.0) == 0.0 and srgb_encode(1.0) == pytest.approx(1.0)
    assert srgb_encode(0.0031308) == pytest.approx(0.0031308 * 12.92, rel=1e-6)
    assert srgb_encode(0.5) == pytest.approx(0.735356983, rel=1e-7)
    assert srgb_encode(0.18) == pytest.approx(0.461356129, rel=1e-7)
    assert srgb_encode(2.0) == pytest.approx(1.0) and srgb_encode(-1.0) == 0.0


def test_merge_of_disjoint_ranges_equals_one_render():
    scene = blob_scene(width=10, height=8, spp=12)
    whole = render(scene)
    parts = [render(scene, spp=5), render(scene, spp=4, first_sample=5), render(scene, spp=3, first_sample=9)]
    merged = merge_frames(parts)
    assert merged.spp == 12 and merged.meta["first_sample"] == 0
    assert_pools_to_the_whole(merged, whole)


def test_merge_refuses_overlap_other_seed_and_other_scene():
    scene = blob_scene(width=4, height=4, spp=4)
    a, b = render(scene), render(scene, first_sample=2)
    with pytest.raises(UserError, match="overlap"):
        merge_frames([a, b])
    with pytest.raises(UserError, match="seed"):
        merge_frames([a, render(scene, seed=9, first_sample=4)])
    other = blob_scene(width=4, height=4, spp=4, phase_g=0.1)
    with pytest.raises(UserError, match="scene differs"):
        merge_frames([a, render(other, first_sample=4)])


def test_save_frame_writes_the_asked_formats_and_a_sheet(frame, tmp_path):
    paths = save_frame(frame, tmp_path, "shot", ("npz", "exr", "png"), sheet=True)
    assert sorted(p.name for p in paths) == ["shot.exr", "shot.npz", "shot.png", "shot.sheet.png"]
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted(p.name for p in paths)
    import imageio.v3 as iio

    assert iio.imread(tmp_path / "shot.png").shape == (10, 12, 3)
    assert iio.imread(tmp_path / "shot.sheet.png").shape[1] > 800


def test_a_render_file_of_the_previous_release_reads_with_first_sample(tmp_path):
    """Files written before the rename carry meta key sample_offset; they read (and pool) as first_sample."""
    from tests.helpers import blob_scene
    from tracer.outputs.npz import read_npz, write_npz
    from tracer.rendering import render as render_scene
    from tracer.rendering.accumulate import merge_frames

    scene = blob_scene(width=3, height=3, spp=2)
    old = render_scene(scene, first_sample=2)
    old.meta["sample_offset"] = old.meta.pop("first_sample")
    write_npz(tmp_path / "old.npz", old)
    frame = read_npz(tmp_path / "old.npz")
    assert frame.meta["first_sample"] == 2 and "sample_offset" not in frame.meta
    assert merge_frames([render_scene(scene), frame]).spp == 4
