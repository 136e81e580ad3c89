"""One render spread over a Dask cluster (README, "One render on a cluster"): chunks of the sample range,
pooled in chunk order.

Bit-identity is against the same chunks rendered one after another in this process (``--chunk-spp`` alone),
for a real 2-worker LocalCluster, after ``kill -9`` of a cluster render and ``--resume``, and with a target
error; a chunked render agrees with an unchunked one to float64 rounding of the sums.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

from tests.cli.cli_helpers import assert_user_error, invoke

pytestmark = pytest.mark.slow
ROOT = Path(__file__).resolve().parents[1]
PLUME = ROOT / "examples" / "plume.toml"
SIZE = ["--width", "40", "--height", "32", "--format", "npz"]


def buffers(path) -> dict:
    with np.load(path) as archive:
        return {key: archive[key] for key in archive.files if key != "meta"}


def meta(path) -> dict:
    import json

    with np.load(path) as archive:
        return json.loads(str(archive["meta"]))


def assert_same_bits(a: dict, b: dict) -> None:
    assert a.keys() == b.keys()
    for key in a:
        assert np.array_equal(a[key], b[key]), key


def test_a_cluster_render_has_the_bits_of_the_same_chunks_rendered_here(tmp_path):
    serial = invoke("render", PLUME, "--spp", 12, "--chunk-spp", 5, *SIZE, "--out", tmp_path / "serial")
    cluster = invoke("render", PLUME, "--spp", 12, "--chunk-spp", 5, "--workers", 2, *SIZE, "--out", tmp_path / "cluster")
    plain = invoke("render", PLUME, "--spp", 12, *SIZE, "--out", tmp_path / "plain")
    assert serial.exit_code == cluster.exit_code == plain.exit_code == 0, (serial.output, cluster.output)
    a, b, c = (buffers(tmp_path / name / "plume.npz") for name in ("serial", "cluster", "plain"))
    assert_same_bits(a, b)
    assert meta(tmp_path / "cluster" / "plume.npz")["chunk_spp"] == 5 and meta(tmp_path / "cluster" / "plume.npz")["spp"] == 12
    for key in c:                                  # chunks only regroup the same float64 additions
        np.testing.assert_allclose(a[key], c[key], rtol=1e-6, atol=1e-7, err_msg=key)
    assert not (tmp_path / "cluster" / "plume.checkpoint.npz").exists()


def test_a_target_error_is_checked_between_rounds(tmp_path):
    result = invoke("render", PLUME, "--target-error", 0.08, "--spp", 256, "--chunk-spp", 2, "--workers", 2, *SIZE,
                    "--out", tmp_path / "t")
    assert result.exit_code == 0, result.output
    m = meta(tmp_path / "t" / "plume.npz")
    assert m["stopped"] == "target_error" and m["relative_error"] <= 0.08
    assert m["spp"] % 8 == 0 and m["spp"] < 256               # whole rounds of 2 chunks per worker
    assert "target error 0.08 met" in result.stdout


def test_kill_9_of_a_cluster_render_then_resume_loses_nothing(tmp_path):
    command = [sys.executable, "-m", "tracer", "render", str(PLUME), "--spp", "48", "--chunk-spp", "2", "--workers", "2",
               "--width", "64", "--height", "64", "--format", "npz"]
    out = tmp_path / "killed"
    process = subprocess.Popen(command + ["--out", str(out)], stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                               start_new_session=True)
    checkpoint = out / "plume.checkpoint.npz"
    deadline = time.time() + 180
    while time.time() < deadline and process.poll() is None and not checkpoint.exists():
        time.sleep(0.05)
    assert process.poll() is None, "the render finished before it could be killed"
    os.killpg(process.pid, signal.SIGKILL)                 # the CLI, its cluster and its workers
    process.wait()
    assert checkpoint.exists() and not (out / "plume.npz").exists()
    resumed = subprocess.run(command + ["--out", str(out), "--resume"], capture_output=True, text=True)
    assert resumed.returncode == 0, resumed.stderr
    serial = invoke("render", PLUME, "--spp", 48, "--chunk-spp", 2, "--width", 64, "--height", 64, "--format", "npz",
                    "--out", tmp_path / "serial")
    assert serial.exit_code == 0
    assert_same_bits(buffers(out / "plume.npz"), buffers(tmp_path / "serial" / "plume.npz"))
    assert not checkpoint.exists()


def test_bad_cluster_options_are_one_line_and_write_nothing(tmp_path):
    out = tmp_path / "out"
    assert_user_error(invoke("render", PLUME, "--workers", 0, "--out", out), "--workers: must be at least 1, got 0")
    assert_user_error(invoke("render", PLUME, "--scheduler", "localhost:8786", "--out", out),
                      "--scheduler: 'localhost:8786' is not a scheduler address like tcp://HOST:8786")
    started = time.perf_counter()
    assert_user_error(invoke("render", PLUME, "--scheduler", "tcp://127.0.0.1:9", "--spp", 2, *SIZE, "--out", out),
                      "--scheduler: cannot reach tcp://127.0.0.1:9 within 5 s")
    assert time.perf_counter() - started < 30
    assert_user_error(invoke("render", PLUME, "--chunk-spp", 0, "--out", out), "--chunk-spp: must be at least 1")
    assert_user_error(invoke("render", PLUME, "--workers", 2, "--per-sample", 2, "--out", out), "--per-sample: not available")
    assert not out.exists() or not any(p.is_file() for p in out.rglob("*"))
