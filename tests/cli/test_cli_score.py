"""``tracer score``, ``score-dataset`` and ``denoise`` from the command line."""

import csv
import json

import numpy as np
from skimage.metrics import peak_signal_noise_ratio

import pytest

from tests.dataset.plans import write_plan
from tracer.dataset.manifest import read_manifest
from tracer.dataset.run import build_dataset
from tracer.outputs.npz import read_npz

from .cli_helpers import assert_user_error, invoke
from .test_cli_render import small_scene


def test_render_denoise_and_score_round_trip(tmp_path, root):
    scene = small_scene(tmp_path, root, "plume")
    out = tmp_path / "r"
    common = ["--width", 32, "--height", 32, "--out", out]
    assert invoke("render", scene, "--spp", 128, "--seed", 9, "--name", "ref", *common).exit_code == 0
    for k, spp in enumerate([1, 2, 4, 8]):
        assert invoke("render", scene, "--spp", spp, "--seed", k + 1, "--name", f"s{spp}", *common).exit_code == 0
    result = invoke("denoise", out / "s1.npz", "--out", out / "den")
    assert result.exit_code == 0, result.output
    denoised = read_npz(out / "den.npz")
    assert denoised.meta["denoised"]["color_only"] is False and (out / "den.png").exists()
    ladder = [arg for spp in (1, 2, 4, 8) for arg in ("--ladder", out / f"s{spp}.npz")]
    result = invoke("score", out / "ref.npz", out / "den.npz", *ladder, "--seconds", "0.05",
                    "--json", tmp_path / "s.json", "--plot", tmp_path / "s.png")
    assert result.exit_code == 0, result.output
    assert "PSNR" in result.stdout and "equal quality" in result.stdout and "speedup" in result.stdout
    report = json.loads((tmp_path / "s.json").read_text())
    # the figures recomputed here from the README's definitions: PSNR by skimage on the display-referred image
    # (sRGB curve of IEC 61966-2-1 written out, exposure 0), the candidate placed on the ladder's PSNR-against-
    # log2(spp) line between its neighbours, the speedup as that many spp's render time over the candidate's
    reference = display(read_npz(out / "ref.npz")["radiance"])
    psnr = peak_signal_noise_ratio(reference, display(denoised["radiance"]), data_range=1.0)
    assert report["scores"]["psnr_db"] == pytest.approx(psnr, abs=1e-9)
    ladder_psnr = [peak_signal_noise_ratio(reference, display(read_npz(out / f"s{spp}.npz")["radiance"]), data_range=1.0)
                   for spp in (1, 2, 4, 8)]
    assert ladder_psnr[0] < psnr, "the filtered 1-spp image must beat the 1-spp render, or the placement is moot"
    k = next((k for k in range(3) if ladder_psnr[k] <= psnr <= ladder_psnr[k + 1]), None)
    if k is not None:
        log2_spp = k + (psnr - ladder_psnr[k]) / (ladder_psnr[k + 1] - ladder_psnr[k])
    else:       # beyond the top of the ladder: the line through its last two points, extended (README)
        assert report["extrapolated"]
        log2_spp = 3 + (psnr - ladder_psnr[3]) / (ladder_psnr[3] - ladder_psnr[2])
    assert report["equal_quality_spp"] == pytest.approx(2 ** log2_spp, rel=1e-9)
    seconds = [read_npz(out / f"s{spp}.npz").meta["render_seconds"] for spp in (1, 2, 4, 8)]
    assert report["speedup"] == pytest.approx(report["equal_quality_spp"] * sum(seconds) / 15 / 0.05, rel=1e-9)
    assert (tmp_path / "s.png").stat().st_size > 10_000


def display(radiance):
    x = np.clip(np.asarray(radiance, np.float64), 0, 1)
    return np.where(x <= 0.0031308, 12.92 * x, 1.055 * x ** (1 / 2.4) - 0.055)


def test_score_errors_are_one_line(tmp_path):
    assert_user_error(invoke("score", tmp_path / "a.npz", tmp_path / "b.npz"), "a.npz", "file not found")


def test_score_dataset_writes_a_table_and_csv(tmp_path):
    plan = write_plan(tmp_path / "plan", views=2, width=16, height=16, input_spp=(1, 2, 4), reference_spp=32)
    build_dataset(plan, tmp_path / "ds")
    predictions = tmp_path / "pred"
    for record in read_manifest(tmp_path / "ds"):
        source = tmp_path / "ds" / record["files"]["spp0004.npz"]["path"]
        assert invoke("denoise", source, "--out", predictions / record["id"]).exit_code == 0
    result = invoke("score-dataset", tmp_path / "ds", "--predictions", predictions, "--input-spp", 4,
                    "--denoise-seconds", "0.01", "--csv", tmp_path / "scores.csv")
    assert result.exit_code == 0, result.output
    assert "all" in result.stdout
    with (tmp_path / "scores.csv").open() as handle:
        rows = list(csv.DictReader(handle))
    assert sum(row["kind"] == "item" for row in rows) == 4
    assert any(row["kind"] == "split" and row["split"] == "all" for row in rows)
    for row in (row for row in rows if row["kind"] == "item"):
        reference = display(read_npz(tmp_path / "ds" / "items" / row["id"] / "reference.npz")["radiance"])
        prediction = display(read_npz(predictions / f"{row['id']}.npz")["radiance"])
        expected = peak_signal_noise_ratio(reference, prediction, data_range=1.0)       # skimage, README definition
        assert float(row["psnr_db"]) == pytest.approx(expected, abs=5e-5)      # the CSV keeps 4 decimals
    missing = invoke("score-dataset", tmp_path / "ds", "--predictions", tmp_path / "nothing")
    assert_user_error(missing, "prediction folder not found")
