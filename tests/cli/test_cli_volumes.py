"""``tracer info``, ``tf-check``, ``demo-volumes`` and the root help, in-process and as a real command."""

import subprocess
import sys

import numpy as np
import nrrd

from .cli_helpers import assert_user_error, invoke

COMMANDS = ["info", "tf-check", "preview", "render", "pool", "dataset", "dataset-sheet", "score", "score-dataset",
            "denoise", "demo-volumes"]


def test_help_lists_every_command_and_the_medical_caution():
    result = invoke("--help")
    assert result.exit_code == 0
    for command in COMMANDS:
        assert command in result.stdout
    assert "not diagnosis" in result.stdout


def test_installed_command_answers_help():
    result = subprocess.run([sys.executable, "-m", "tracer", "--help"], capture_output=True, text=True, timeout=60)
    assert result.returncode == 0
    assert all(command in result.stdout for command in COMMANDS)


def test_info_describes_the_figurine(root):
    result = invoke("info", root / "sample_volumes" / "figurine.nrrd")
    assert result.exit_code == 0, result.output
    out = result.stdout
    assert "120 x 120 x 112" in out and "int16" in out and "0.4 x 0.4 x 0.5 mm" in out
    assert "-1024 .. 3071" in out and "p50" in out and "NaN/Inf      0" in out
    assert out.count("#") > 100          # the text histogram


def test_info_counts_nan_voxels_instead_of_refusing(tmp_path):
    data = np.ones((3, 3, 3), np.float32)
    data[0, 0, 0] = np.nan
    path = tmp_path / "nan.nrrd"
    nrrd.write(str(path), data)
    result = invoke("info", path)
    assert result.exit_code == 0
    assert "NaN/Inf      1" in result.stdout


def test_info_on_a_missing_file_is_one_line(tmp_path):
    assert_user_error(invoke("info", tmp_path / "none.nrrd"), "none.nrrd", "file not found")


def test_info_on_an_escaping_detached_header_is_refused(tmp_path):
    (tmp_path / "secret.raw").write_bytes(bytes(8))
    folder = tmp_path / "data"
    folder.mkdir()
    header = folder / "x.nhdr"
    header.write_text("NRRD0004\ntype: uint8\ndimension: 3\nsizes: 2 2 2\nencoding: raw\ndata file: ../secret.raw\n")
    assert_user_error(invoke("info", header), "x.nhdr", "outside the header's folder")


def test_tf_check_prints_findings_and_writes_the_plot(root, tmp_path):
    out = tmp_path / "report.png"
    result = invoke("tf-check", root / "sample_volumes" / "figurine.nrrd",
                    root / "transfer_functions" / "figurine_clay.toml", "--out", out)
    assert result.exit_code == 0, result.output
    assert "non-empty voxels" in result.stdout and "optical depth" in result.stdout
    assert "only the outer shell will show" in result.stdout
    assert "not diagnosis" not in result.stdout       # an industrial scan with a clay function: no medical caution
    assert out.stat().st_size > 10_000


def test_tf_check_warns_when_everything_is_transparent(root, tmp_path):
    tf = tmp_path / "clear.toml"
    tf.write_text("opacity = [[5000, 0], [6000, 1]]\ncolor = [[0, [1, 1, 1]]]\n")
    result = invoke("tf-check", root / "sample_volumes" / "figurine.nrrd", tf)
    assert result.exit_code == 0
    assert "transparent over the whole data range" in result.stderr


def test_tf_check_bad_function_writes_nothing(root, tmp_path):
    tf = tmp_path / "bad.toml"
    tf.write_text("opacity = [[0, 0], [10, 2.0]]\ncolor = [[0, [1, 1, 1]]]\n")
    out = tmp_path / "report.png"
    assert_user_error(invoke("tf-check", root / "sample_volumes" / "plume.nrrd", tf, "--out", out),
                      "bad.toml", "opacity[1]")
    assert list(tmp_path.iterdir()) == [tf]


def test_tf_check_on_nan_volume_writes_nothing(tmp_path, root):
    data = np.ones((3, 3, 3), np.float32)
    data[1, 1, 1] = np.inf
    path = tmp_path / "inf.nrrd"
    nrrd.write(str(path), data)
    out = tmp_path / "report.png"
    assert_user_error(invoke("tf-check", path, root / "transfer_functions" / "plume_smoke.toml", "--out", out),
                      "inf.nrrd", "NaN or Inf")
    assert not out.exists()


def test_demo_volumes_command_writes_the_four_volumes(tmp_path):
    result = invoke("demo-volumes", "--out", tmp_path / "demo")
    assert result.exit_code == 0, result.output
    assert sorted(p.name for p in (tmp_path / "demo").iterdir()) == ["figurine.nrrd", "flame.nrrd", "lattice.nrrd", "plume.nrrd"]


def test_every_bad_volume_is_one_line_from_tf_check_and_writes_nothing(tmp_path, root, monkeypatch):
    from tests.test_volume import BAD_VOLUMES

    monkeypatch.setenv("TRACER_MEMORY_BUDGET_MB", "1024")
    tf = root / "transfer_functions" / "plume_smoke.toml"
    for case, (make, expected) in sorted(BAD_VOLUMES.items()):
        folder = tmp_path / case.replace(" ", "_")
        folder.mkdir()
        path = make(folder)
        out = tmp_path / f"{case}.png"
        assert_user_error(invoke("tf-check", path, tf, "--out", out), expected)
        assert not out.exists(), case
