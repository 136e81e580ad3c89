"""Determinism: bits independent of threads, passes, resumes; independent noise across seeds."""

import os
import signal
import subprocess
import sys
import time

import numpy as np
import pytest

from tracer.outputs.npz import read_npz
from tracer.rendering import render

from .helpers import blob_scene, example_scene


def assert_same_bits(a, b):
    assert set(a.buffers) == set(b.buffers)
    for key in a.buffers:
        assert np.array_equal(a[key], b[key]), key


def test_one_and_two_threads_give_identical_bits():
    scene = blob_scene(width=16, height=12, spp=8, feature_levels=(0.3, 0.7))
    assert_same_bits(render(scene, threads=1), render(scene, threads=2))


def test_pass_sizes_do_not_change_the_bits():
    scene = blob_scene(width=9, height=7, spp=12)
    assert_same_bits(render(scene, pass_seconds=1e-9), render(scene, pass_seconds=10.0))


def test_different_seeds_give_uncorrelated_noise():
    """Errors of two renders (seeds 1 and 2) against a third, high-spp render (seed 3) are
    uncorrelated across pixels: |r| < 0.05 over 3 x 1600 values (the standard error of r is about 0.015)."""
    scene = blob_scene(width=40, height=40, spp=4)
    reference = render(scene, spp=256, seed=3)["radiance"]
    a = render(scene, seed=1)["radiance"] - reference
    b = render(scene, seed=2)["radiance"] - reference
    same = render(scene, seed=1)["radiance"] - reference
    assert abs(np.corrcoef(a.ravel(), b.ravel())[0, 1]) < 0.05
    assert np.corrcoef(a.ravel(), same.ravel())[0, 1] == pytest.approx(1.0)


def test_interrupt_keeps_complete_passes_with_their_true_spp():
    scene = blob_scene(width=8, height=8, spp=64)
    calls = []

    def interrupt_after_two_passes(progress):
        calls.append(progress.spp_done)
        if len(calls) == 3:
            raise KeyboardInterrupt

    frame = render(scene, on_progress=interrupt_after_two_passes, pass_seconds=1e-9)
    assert frame.meta["stopped"] == "interrupted"
    assert frame.spp == calls[-1] and 0 < frame.spp < 64
    assert_same_bits(frame, render(scene, spp=frame.spp))


def test_checkpoint_and_resume_in_process_is_bit_exact(tmp_path):
    scene = blob_scene(width=8, height=8, spp=24)
    checkpoint = tmp_path / "c.checkpoint.npz"
    calls = []

    def stop_midway(progress):
        calls.append(progress.spp_done)
        if progress.spp_done >= 9:
            raise KeyboardInterrupt

    partial = render(scene, on_progress=stop_midway, pass_seconds=1e-9, checkpoint_path=checkpoint,
                     checkpoint_every=1e-9)
    assert partial.meta["stopped"] == "interrupted" and checkpoint.exists()
    resumed = render(scene, checkpoint_path=checkpoint, resume=True)
    assert resumed.spp == 24 and not checkpoint.exists()
    assert_same_bits(resumed, render(scene))


def test_target_error_stops_when_reached():
    scene = blob_scene(width=8, height=8, spp=4096)
    frame = render(scene, target_error=0.05)
    assert frame.meta["stopped"] == "target_error"
    assert frame.meta["relative_error"] <= 0.05
    assert frame.spp < 4096


@pytest.mark.slow
def test_kill_and_resume_from_the_command_line_is_bit_exact(tmp_path, root):
    """kill -9 a render after its first checkpoint, resume it, and compare with an uninterrupted run."""
    scene = example_scene(tmp_path, root, "plume")
    common = [sys.executable, "-m", "tracer", "render", str(scene), "--width", "64", "--height", "64",
              "--spp", "96", "--threads", "2"]
    killed = tmp_path / "killed"
    process = subprocess.Popen(common + ["--out", str(killed), "--checkpoint-every", "0.3"],
                               stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    checkpoint = killed / "plume.checkpoint.npz"
    deadline = time.time() + 120
    while not checkpoint.exists() and time.time() < deadline and process.poll() is None:
        time.sleep(0.05)
    assert checkpoint.exists(), "no checkpoint appeared"
    os.kill(process.pid, signal.SIGKILL)
    process.wait()
    assert not (killed / "plume.npz").exists()
    assert not [p for p in killed.iterdir() if ".partial-" in p.name]
    subprocess.run(common + ["--out", str(killed), "--resume"], check=True, capture_output=True, timeout=300)
    clean = tmp_path / "clean"
    subprocess.run(common + ["--out", str(clean)], check=True, capture_output=True, timeout=300)
    resumed, uninterrupted = read_npz(killed / "plume.npz"), read_npz(clean / "plume.npz")
    assert resumed.spp == uninterrupted.spp == 96
    assert_same_bits(resumed, uninterrupted)
    assert not checkpoint.exists()


@pytest.mark.slow
def test_ctrl_c_from_the_command_line_writes_a_valid_render_and_resumes(tmp_path, root):
    """SIGINT mid-render: exit 130, a valid NPZ with its true spp, a checkpoint; --resume finishes bit-exactly."""
    scene = example_scene(tmp_path, root, "plume")
    command = [sys.executable, "-m", "tracer", "render", str(scene), "--width", "24", "--height", "24",
               "--spp", "4000", "--out", str(tmp_path / "out")]
    render(blob_scene(width=2, height=2, spp=1))       # the kernel is compiled into the shared cache first
    process = subprocess.Popen(command, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    time.sleep(3.0)
    process.send_signal(signal.SIGINT)
    stdout, _ = process.communicate(timeout=120)
    assert process.returncode == 130, stdout
    partial = read_npz(tmp_path / "out" / "plume.npz")
    assert 0 < partial.spp < 4000 and partial.meta["stopped"] == "interrupted"
    assert (tmp_path / "out" / "plume.checkpoint.npz").exists()
    subprocess.run(command + ["--resume"], check=True, capture_output=True, timeout=300)
    resumed = read_npz(tmp_path / "out" / "plume.npz")
    assert resumed.spp == 4000 and not (tmp_path / "out" / "plume.checkpoint.npz").exists()
    from tracer import load_scene

    assert_same_bits(resumed, render(load_scene(scene).with_overrides(width=24, height=24), spp=4000))
