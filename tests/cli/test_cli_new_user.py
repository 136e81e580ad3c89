"""What a new user meets: the spp cap under a target, stop reasons in words, compile time apart,
thread counts, preview sizes, the medical caution only for medical scans, orientation, markup-safe paths."""

import json
import subprocess
import sys

import numpy as np
import nrrd
import pytest
from PIL import Image

from tracer.outputs.npz import read_npz

from ..helpers import blob_scene
from .cli_helpers import assert_user_error, invoke
from .test_cli_render import small_scene


def test_spp_is_the_cap_under_a_target_error(tmp_path, root):
    """Asked for 3 spp and an error no render reaches, the render stops at 3 spp (it ran to 188 before)."""
    scene = small_scene(tmp_path, root, "plume")
    out = tmp_path / "out"
    result = invoke("render", scene, "--spp", 3, "--target-error", "1e-9", "--width", 8, "--height", 8, "--out", out)
    assert result.exit_code == 0, result.output
    assert read_npz(out / "plume.npz").spp == 3
    assert "reached 3 spp" in result.stdout


def test_a_met_target_is_said_in_words(tmp_path, root):
    scene = small_scene(tmp_path, root, "plume")
    result = invoke("render", scene, "--target-error", "0.5", "--width", 8, "--height", 8, "--out", tmp_path / "o")
    assert result.exit_code == 0, result.output
    frame = read_npz(tmp_path / "o" / "plume.npz")
    assert frame.meta["stopped"] == "target_error" and 2 <= frame.spp < 64
    assert f"target error 0.5 met after {frame.spp} spp" in result.stdout


def test_spp_cap_rules():
    from tracer.rendering.passes import DEFAULT_TARGET_SPP_CAP, spp_cap

    assert spp_cap(64, None, False) == 64
    assert spp_cap(64, 16, True) == 16
    assert spp_cap(64, None, True) == DEFAULT_TARGET_SPP_CAP == 65536


def test_compiling_is_reported_apart_from_the_render_time(tmp_path):
    """A fresh process loads the kernel (from the session's cache here): that time is compile_seconds,
    and render_seconds plus compile_seconds fit inside the wall time of the call."""
    code = (
        "import time, json; from tests.helpers import blob_scene; from tracer.rendering.passes import render\n"
        "t = time.perf_counter(); f = render(blob_scene(width=4, height=4, spp=2)); wall = time.perf_counter() - t\n"
        "print(json.dumps([f.meta['compile_seconds'], f.meta['render_seconds'], wall]))\n"
        "g = render(blob_scene(width=4, height=4, spp=2)); print(json.dumps(g.meta['compile_seconds']))\n")
    result = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=300,
                            cwd=str(__import__("pathlib").Path(__file__).resolve().parents[2]))
    assert result.returncode == 0, result.stderr
    first, second = result.stdout.strip().splitlines()
    compile_seconds, render_seconds, wall = json.loads(first)
    assert compile_seconds > render_seconds > 0
    assert compile_seconds + render_seconds <= wall + 1e-3
    assert json.loads(second) == 0.0


def test_denoise_reports_its_compile_time_apart():
    from tracer.rendering.passes import render
    from tracer.scoring.denoise import denoise

    frame = render(blob_scene(width=8, height=8, spp=2))
    denoise(frame)
    again = denoise(frame)
    assert again.compile_seconds == 0.0 and again.seconds > 0


@pytest.mark.parametrize("threads", [0, -1, 100000])
def test_out_of_range_threads_are_refused(tmp_path, root, threads):
    scene = small_scene(tmp_path, root, "plume")
    assert_user_error(invoke("render", scene, "--threads", threads, "--out", tmp_path / "o"), "--threads",
                      "must be a whole number from 1")
    assert_user_error(invoke("preview", scene, "--threads", threads, "--out", tmp_path / "o"), "--threads")
    assert not (tmp_path / "o").exists()


def test_threads_on_dataset(tmp_path):
    from tests.dataset.plans import write_plan

    plan = write_plan(tmp_path / "plan", views=1, width=8, height=8, reference_spp=4)
    result = invoke("dataset", plan, "--out", tmp_path / "ds", "--threads", 1)
    assert result.exit_code == 0, result.output
    assert_user_error(invoke("dataset", plan, "--out", tmp_path / "x", "--threads", 0), "--threads")
    assert_user_error(invoke("dataset", plan, "--out", tmp_path / "x", "--scheduler", "tcp://127.0.0.1:9",
                             "--threads", 1), "--threads", "NUMBA_NUM_THREADS")


def test_preview_takes_the_full_render_size(tmp_path, root):
    scene = small_scene(tmp_path, root, "plume")
    result = invoke("preview", scene, "--spp", 1, "--width", 40, "--height", 24, "--out", tmp_path / "p")
    assert result.exit_code == 0, result.output
    assert "preview 10x6 at 1 spp" in result.stdout and "cost at full size 40x24" in result.stdout


def _patient_volume(path, space="left-posterior-superior", directions=((-0.5, 0, 0), (0, 0.5, 0), (0, 0, 1.0))):
    data = np.zeros((6, 6, 6), np.int16) - 1000
    data[2:4, 2:4, 2:4] = 800
    nrrd.write(str(path), data, {"space": space, "space directions": np.array(directions),
                                 "space origin": np.zeros(3)}, compression_level=1)
    return path


def test_info_names_the_anatomical_direction_of_every_axis(tmp_path):
    """LPS: world +x points to the patient's left, +y posterior, +z superior (NRRD file format
    specification, teem, the ``space`` field); an i axis stepping along -x therefore points right."""
    result = invoke("info", _patient_volume(tmp_path / "head.nrrd"))
    assert result.exit_code == 0, result.output
    out = result.stdout
    assert "left-posterior-superior (world +x left, +y posterior, +z superior)" in out
    assert "(-0.5, 0, 0)  -> -x (right)" in out and "(0, 0.5, 0)  -> +y (posterior)" in out
    assert "(0, 0, 1)  -> +z (superior)" in out
    assert "looking +y (posterior), tilted 21 deg" in out and "faces -y (anterior)" in out
    assert "not diagnosis" in out                       # a patient space marks a medical scan


def test_info_of_a_demo_volume_has_no_anatomy_and_no_caution(root):
    result = invoke("info", root / "sample_volumes" / "lattice.nrrd")
    assert result.exit_code == 0, result.output
    assert "3D-right-handed (world axes without anatomical names)" in result.stdout
    assert "-> +x\n" in result.stdout and "not diagnosis" not in result.stdout


def test_the_axes_check_draws_three_views_with_the_axes(tmp_path, root):
    from tracer.outputs.orientation import AXIS_COLOURS

    path = tmp_path / "axes.png"
    result = invoke("info", _patient_volume(tmp_path / "head.nrrd", space="RAS"), "--axes", path)
    assert result.exit_code == 0, result.output
    image = np.asarray(Image.open(path).convert("RGB")).astype(int)
    assert image.shape[1] > 3 * 150
    for colour in AXIS_COLOURS:              # each axis arrow is drawn in its colour somewhere
        rgb = np.array([int(colour[k:k + 2], 16) for k in (1, 3, 5)])
        assert (np.abs(image - rgb).sum(axis=2) < 30).sum() > 20, colour


def test_medical_caution_follows_the_data_not_the_scale(tmp_path, root):
    """An HU preset on the smoke plume is not a medical scan; a function marked medical = true is."""
    plain = small_scene(tmp_path, root, "plume")
    text = plain.read_text().replace("plume_smoke.toml", "hu_mineral.toml")
    marked = tmp_path / "marked.toml"
    marked.write_text(text)
    args = ["--spp", 1, "--width", 4, "--height", 4, "--out", tmp_path / "o"]
    assert "not diagnosis" not in invoke("render", plain, *args).stdout
    assert "not diagnosis" in invoke("render", marked, *args).stdout
    check = invoke("tf-check", root / "sample_volumes" / "plume.nrrd", root / "transfer_functions" / "figurine_clay.toml")
    assert check.exit_code == 0 and "not diagnosis" not in check.stdout
    assert "not diagnosis" in invoke("--help").stdout


def test_paths_with_brackets_print_as_written(tmp_path, root):
    scene = small_scene(tmp_path, root, "plume")
    out = tmp_path / "[bold]renders[/bold]"
    result = invoke("render", scene, "--spp", 1, "--width", 4, "--height", 4, "--out", out)
    assert result.exit_code == 0, result.output
    assert "[bold]renders[/bold]/plume.npz" in result.stdout


def test_score_against_a_dataset_item_takes_the_times_from_the_manifest(tmp_path):
    from tests.dataset.plans import write_plan
    from tracer.dataset.manifest import read_manifest
    from tracer.dataset.run import build_dataset

    plan = write_plan(tmp_path / "plan", views=1, width=12, height=12, input_spp=(1, 2, 4), reference_spp=16)
    build_dataset(plan, tmp_path / "ds")
    record = read_manifest(tmp_path / "ds")[0]
    item = tmp_path / "ds" / "items" / record["id"]
    result = invoke("score", item / "reference.npz", item / "spp0002.npz", "--ladder", item, "--seconds", "0.01",
                    "--json", tmp_path / "s.json")
    assert result.exit_code == 0, result.output
    report = json.loads((tmp_path / "s.json").read_text())
    times = [record["files"][f"spp000{n}.npz"]["seconds"] for n in (1, 2, 4)]
    assert report["seconds_per_spp"] == pytest.approx(sum(times) / 7)
    assert report["speedup"] is not None and report["speedup"] > 0
    assert "speedup" in result.stdout


def test_score_columns_line_up():
    from tracer.cli.scoring import aligned_rows

    rows = [("PSNR", "31.25", "dB", "a"), ("SSIM", "0.9123", "", "b"), ("relative MSE", "1.2e-05", "", "c")]
    lines = aligned_rows(rows)
    value_ends = {line.index(value) + len(value) for line, (_, value, _, _) in zip(lines, rows)}
    note_starts = {line.rindex(note) for line, (_, _, _, note) in zip(lines, rows)}
    assert len(value_ends) == 1 and len(note_starts) == 1
