"""``tracer feature-study`` (README, "Feature study"): guide sets ranked on a dataset, and the feature noise report.

Its colour-only row must be what ``tracer denoise --color-only`` scored by ``tracer score --ladder`` gives, number
for number; the noise report's relative noise and edge alignment are recomputed here from their definitions.
"""

from __future__ import annotations

import json
import math
import time

import numpy as np
import pytest

from tests.cli.cli_helpers import assert_user_error, invoke
from tests.dataset.plans import write_plan

pytestmark = pytest.mark.slow


@pytest.fixture(scope="module")
def dataset(tmp_path_factory):
    from tracer.dataset.run import build_dataset

    tmp = tmp_path_factory.mktemp("study")
    plan = write_plan(tmp / "plan", views=2, width=48, height=40, input_spp=(1, 2, 4), reference_spp=32,
                      extra_render='features = ["expected_depth", "event1_gradient", "background_part"]')
    build_dataset(plan, tmp / "ds")
    return tmp


def records(folder):
    return [json.loads(line) for line in (folder / "manifest.jsonl").read_text().splitlines() if line.strip()]


def test_a_study_of_four_items_ranks_the_sets_and_matches_the_plain_commands(dataset, tmp_path):
    (tmp_path / "sets.toml").write_text('[[sets]]\nname = "normal and depth"\nbuffers = ["event1_normal", "event1_depth"]\n')
    started = time.perf_counter()
    result = invoke("feature-study", dataset / "ds", "--out", tmp_path / "study", "--sets", tmp_path / "sets.toml")
    seconds = time.perf_counter() - started
    assert result.exit_code == 0, result.output
    assert seconds < 120, seconds                                    # the bound for 4 items on 2 cores
    study = json.loads((tmp_path / "study" / "study.json").read_text())
    names = [s["name"] for s in study["sets"]]
    assert names[:5] == ["colour only", "+ normal", "+ albedo", "+ depth", "+ event 2"]
    assert {"+ expected_depth", "+ event1_gradient", "+ background_part", "all", "normal and depth"} <= set(names)
    items = records(dataset / "ds")
    assert len(study["items"]) == len(names) * len(items) == len(names) * 4
    for name in ("study.txt", "study.csv", "noise.csv", "study.png"):
        assert (tmp_path / "study" / name).stat().st_size > 200
    assert "ranked by mean PSNR" in result.stdout

    # the colour-only row is `tracer denoise --color-only` scored by `tracer score --ladder`
    for record in items:
        item = dataset / "ds" / "items" / record["id"]
        assert invoke("denoise", item / "spp0001.npz", "--out", tmp_path / "pred" / record["id"], "--color-only").exit_code == 0
        scored = invoke("score", item / "reference.npz", tmp_path / "pred" / f"{record['id']}.npz", "--ladder", item,
                        "--json", tmp_path / f"{record['id']}.json")
        assert scored.exit_code == 0, scored.output
        plain = json.loads((tmp_path / f"{record['id']}.json").read_text())
        row = next(r for r in study["items"] if r["set"] == "colour only" and r["id"] == record["id"])
        assert row["psnr_db"] == plain["scores"]["psnr_db"] and row["ssim"] == plain["scores"]["ssim"]
        assert row["equal_quality_spp"] == plain["equal_quality_spp"]
    summary = next(s for s in study["summary"] if s["set"] == "colour only")
    assert summary["all"]["psnr_db"] == pytest.approx(np.mean([r["psnr_db"] for r in study["items"]
                                                               if r["set"] == "colour only"]), abs=1e-12)


def test_the_noise_report_follows_its_definitions(dataset, tmp_path):
    assert invoke("feature-study", dataset / "ds", "--out", tmp_path / "study", "--spp", 2).exit_code == 0
    study = json.loads((tmp_path / "study" / "study.json").read_text())
    noise = {entry["buffer"]: entry for entry in study["noise"]}
    relative, alignment = [], []
    for record in records(dataset / "ds"):
        item = dataset / "ds" / "items" / record["id"]
        with np.load(item / "spp0002.npz") as a, np.load(item / "reference.npz") as b:
            f, g, hit, radiance = a["event1_depth"].astype(float), b["event1_depth"].astype(float), b["event1_hit"], b["radiance"]
        covered = hit > 0
        relative.append(math.sqrt(((f - g)[covered] ** 2).sum() / (g[covered] ** 2).sum()))
        luminance = radiance.astype(float) @ [0.2126, 0.7152, 0.0722]
        edges = np.hypot(*np.gradient(luminance))
        alignment.append(np.corrcoef(np.hypot(*np.gradient(f)).ravel(), edges.ravel())[0, 1])
    assert noise["event1_depth"]["relative_noise"] == pytest.approx(np.mean(relative), rel=1e-9)
    assert noise["event1_depth"]["edge_alignment"] == pytest.approx(np.mean(alignment), rel=1e-9)
    # a nearly noise-free feature is far less noisy than one placed by a random threshold
    assert noise["expected_depth"]["relative_noise"] < 0.5 * noise["event1_depth"]["relative_noise"]


def test_bad_studies_are_one_line_and_write_nothing(dataset, tmp_path):
    (tmp_path / "sets.toml").write_text('[[sets]]\nname = "values"\nbuffers = ["event1_value"]\n')
    out = tmp_path / "out"
    assert_user_error(invoke("feature-study", dataset / "ds", "--out", out, "--sets", tmp_path / "sets.toml"),
                      "sets[0].buffers: 'event1_value' is not in the dataset's inputs")
    assert_user_error(invoke("feature-study", dataset / "ds", "--out", out, "--spp", 3), "has no 3-spp input")
    (tmp_path / "bad.toml").write_text('[[sets]]\nbuffers = ["radiance"]\n')
    assert_user_error(invoke("feature-study", dataset / "ds", "--out", out, "--sets", tmp_path / "bad.toml"),
                      "'radiance' is what the filter filters")
    assert not out.exists()
