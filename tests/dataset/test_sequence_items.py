"""Sequence items in a dataset plan (README, "Datasets"): every view a camera path of frames, each frame with the
input ladder and a reference; the same files serially and on a 2-worker cluster, and disjoint sample ranges."""

import json

import numpy as np
import pytest

from tests.cli.cli_helpers import assert_user_error, invoke
from tracer.dataset.manifest import read_manifest, sha256_file
from tracer.dataset.run import build_dataset

from .plans import write_plan

pytestmark = pytest.mark.slow


def test_sequence_items_are_the_same_serially_and_on_a_cluster(tmp_path):
    plan = write_plan(tmp_path / "plan", views=2, width=24, height=20, input_spp=(1, 2), reference_spp=8,
                      volumes=("figurine",))
    plan.write_text(plan.read_text() + '\n[sequence]\nkind = "orbit"\nframes = 3\ndegrees_per_frame = 2.0\n')
    build_dataset(plan, tmp_path / "serial")
    build_dataset(plan, tmp_path / "cluster", workers=2)
    serial, cluster = read_manifest(tmp_path / "serial"), read_manifest(tmp_path / "cluster")
    assert len(serial) == 2 and all(record["frames"] == 3 for record in serial)
    for a, b in zip(serial, cluster):
        assert a["files"].keys() == b["files"].keys()
        assert len(a["files"]) == 3 * 3                                          # 3 frames x (2 inputs + reference)
        for name, entry in a["files"].items():
            assert entry["sha256"] == b["files"][name]["sha256"] == sha256_file(tmp_path / "cluster" / entry["path"])
        ranges = sorted(tuple(e["sample_range"]) for e in a["files"].values())
        assert all(x[1] <= y[0] for x, y in zip(ranges, ranges[1:]))               # every file its own samples
    with np.load(tmp_path / "serial" / serial[0]["files"]["frame0002/reference.npz"]["path"]) as frame:
        hit = frame["event1_hit"] > 0
        assert np.abs(frame["motion"][hit]).max() > 0.05
        assert json.loads(str(frame["meta"]))["sequence"]["frame"] == 2
    assert_user_error(invoke("score-dataset", tmp_path / "serial", "--predictions", tmp_path),
                      "a sequence dataset (3 frames per item)")
    assert_user_error(invoke("report", tmp_path / "serial", "--out", tmp_path / "page"), "a sequence dataset")


def test_sequence_plans_refuse_what_they_cannot_do(tmp_path):
    from tracer.dataset.plan import load_plan
    from tracer.errors import UserError

    for extra_render, sequence, message in (
            ("reference_chunks = 2", 'kind = "orbit"', "no reference_chunks"),
            ("", 'kind = "orbit"\ndegrees_per_frame = 0.0', "a zero-length orbit does not move"),
            ("", 'kind = "pan"\nmm_per_frame = 0.0', "a zero-length pan does not move"),
            ("", 'kind = "orbit"\nframes = 1', "frames")):
        path = write_plan(tmp_path / "plan", extra_render=extra_render)
        path.write_text(path.read_text() + f"\n[sequence]\n{sequence}\n")
        with pytest.raises(UserError, match=message):
            load_plan(path)
