"""``tracer render``, ``preview`` and ``pool`` from the command line."""

import json

import numpy as np

from tracer.outputs.npz import read_npz

from ..helpers import assert_pools_to_the_whole, example_scene

from .cli_helpers import assert_user_error, invoke


def small_scene(tmp_path, root, name="figurine", extra=""):
    return example_scene(tmp_path, root, name, extra)


def test_render_writes_every_format_and_the_sheet(tmp_path, root):
    scene = small_scene(tmp_path, root)
    out = tmp_path / "out"
    result = invoke("render", scene, "--spp", 2, "--width", 24, "--height", 20, "--out", out, "--format", "npz,exr,png",
                    "--sheet", "--name", "shot", "--seed", 5)
    assert result.exit_code == 0, result.output
    assert sorted(p.name for p in out.iterdir()) == ["shot.exr", "shot.npz", "shot.png", "shot.sheet.png"]
    frame = read_npz(out / "shot.npz")
    assert frame["radiance"].shape == (20, 24, 3)
    assert frame.meta["spp"] == 2 and frame.meta["seed"] == 5 and frame.meta["stopped"] == "spp"
    assert "reached 2 spp in" in result.stdout
    assert "not diagnosis" not in result.stdout      # an industrial CT of a clay figurine is not a medical scan


def test_render_with_target_error_reports_the_spp_reached(tmp_path, root):
    scene = small_scene(tmp_path, root, "plume")
    out = tmp_path / "out"
    result = invoke("render", scene, "--width", 12, "--height", 12, "--target-error", "0.08", "--out", out)
    assert result.exit_code == 0, result.output
    frame = read_npz(out / "plume.npz")
    assert frame.meta["stopped"] == "target_error" and frame.meta["relative_error"] <= 0.08
    assert f"{frame.spp} spp" in result.stdout and "mean relative error" in result.stdout


def test_render_sample_ranges_merge_into_the_whole(tmp_path, root):
    scene = small_scene(tmp_path, root, "lattice")
    out = tmp_path / "out"
    common = ["--width", 10, "--height", 10, "--out", out]
    assert invoke("render", scene, "--spp", 6, "--name", "whole", *common).exit_code == 0
    assert invoke("render", scene, "--spp", 4, "--name", "a", *common).exit_code == 0
    assert invoke("render", scene, "--spp", 2, "--first-sample", 4, "--name", "b", *common).exit_code == 0
    result = invoke("pool", out / "a.npz", out / "b.npz", "--out", out / "merged")
    assert result.exit_code == 0, result.output
    merged, whole = read_npz(out / "merged.npz"), read_npz(out / "whole.npz")
    assert merged.spp == 6
    assert_pools_to_the_whole(merged, whole)
    overlapping = invoke("pool", out / "a.npz", out / "whole.npz", "--out", out / "bad")
    assert_user_error(overlapping, "overlap")
    assert not (out / "bad.npz").exists()


def test_preview_predicts_the_full_render(tmp_path, root):
    scene = small_scene(tmp_path, root, "plume")
    result = invoke("preview", scene, "--out", tmp_path / "p", "--spp", 1)
    assert result.exit_code == 0, result.output
    assert "s per spp" in result.stdout and "predicted full render at 64 spp" in result.stdout
    assert (tmp_path / "p" / "plume.preview.png").exists()


def test_render_errors_are_one_line_and_write_nothing(tmp_path, root):
    out = tmp_path / "out"
    scene = small_scene(tmp_path, root, extra="\n[extra]\nx = 1\n")
    assert_user_error(invoke("render", scene, "--out", out), "figurine.toml", "unknown key 'extra'")
    good = small_scene(tmp_path, root, "plume")
    assert_user_error(invoke("render", good, "--out", out, "--spp", 0), "--spp")
    assert_user_error(invoke("render", good, "--out", out, "--format", "npz,tiff"), "--format", "tiff")
    assert_user_error(invoke("render", good, "--out", out, "--resume"), "no checkpoint")
    assert_user_error(invoke("render", tmp_path / "missing.toml", "--out", out), "missing.toml", "file not found")
    assert not out.exists() or not any(out.iterdir())


def test_render_into_an_unwritable_folder_is_one_line(tmp_path, root):
    blocker = tmp_path / "file"
    blocker.write_text("not a folder")
    scene = small_scene(tmp_path, root, "plume")
    result = invoke("render", scene, "--spp", 1, "--width", 4, "--height", 4, "--out", blocker / "sub")
    assert_user_error(result, "cannot create the output folder")


def test_meta_records_the_scene_as_parsed(tmp_path, root):
    scene = small_scene(tmp_path, root, "lattice")
    out = tmp_path / "out"
    assert invoke("render", scene, "--spp", 1, "--width", 6, "--height", 6, "--out", out).exit_code == 0
    with np.load(out / "lattice.npz", allow_pickle=False) as archive:
        meta = json.loads(str(archive["meta"]))
    assert meta["scene"]["camera"]["width"] == 6
    assert meta["scene"]["render"]["feature_levels"] == [0.5]
    assert len(meta["scene"]["lights"]) == 2 and meta["scene"]["lights"][1]["kind"] == "point"
