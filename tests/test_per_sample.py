"""``render --per-sample S`` (README, "Per-sample output"): the first S samples of every pixel, one by one.

The render's radiance is the mean of its samples: summed in sample order in float64 (the kernel's own
order) and rounded to float32, the written samples give the render's ``radiance`` bit for bit. Peak memory is
the operating system's VmHWM of the rendering process, with and without ``--per-sample``.
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

import tracer
from tests.cli.cli_helpers import assert_user_error, invoke

ROOT = Path(__file__).resolve().parents[1]


def featured_scene(tmp_path: Path) -> Path:
    text = (ROOT / "examples" / "plume.toml").read_text().replace('"../', f'"{ROOT}/')
    path = tmp_path / "plume.toml"
    path.write_text(text.replace("[render]\n", '[render]\nfeatures = ["expected_depth", "event1_value"]\n', 1))
    return path


def test_the_samples_sum_to_the_render(tmp_path):
    scene = featured_scene(tmp_path)
    result = invoke("render", scene, "--spp", 6, "--per-sample", 6, "--width", 20, "--height", 16, "--out", tmp_path / "r")
    assert result.exit_code == 0, result.output
    folder = tmp_path / "r" / "plume.samples"
    index = json.loads((folder / "samples.json").read_text())
    assert index["spp"] == 6 and "expected_depth" in index["keys"] and "radiance_variance" not in index["keys"]
    with np.load(tmp_path / "r" / "plume.npz") as archive:
        render = {key: archive[key] for key in archive.files}
    samples = np.load(folder / "radiance.npy", mmap_mode="r")
    assert isinstance(samples, np.memmap) and samples.shape == (6, 16, 20, 3) and samples.dtype == np.float64
    total = np.zeros(samples.shape[1:])
    for k in range(6):                                   # in sample order, as the kernel adds them
        total = total + samples[k]
    assert np.array_equal((total / 6).astype(np.float32), render["radiance"])
    assert np.abs(samples.mean(axis=0) - total / 6).max() <= 1e-15 * np.abs(total).max()    # any order: float64 rounding
    # one sample's own features: its event exists or not, and its depth is that event's
    hit = np.load(folder / "event1_hit.npy")
    assert set(np.unique(hit)) <= {0.0, 1.0} and 0 < hit.mean() < 1
    depth = np.load(folder / "event1_depth.npy")
    counted = hit.sum(axis=0)
    mean_depth = np.where(counted > 0, (depth * hit).sum(axis=0) / np.maximum(counted, 1), 0)
    np.testing.assert_allclose(mean_depth, render["event1_depth"], rtol=1e-6, atol=1e-5)
    assert np.load(folder / "expected_depth.npy").shape == (6, 16, 20)
    # the loader example reads them lazily, sample by sample
    import importlib.util

    spec = importlib.util.spec_from_file_location("dataset_loader", ROOT / "examples" / "dataset_loader.py")
    loader = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(loader)
    stacks = list(loader.iterate_samples(folder, pixels=(slice(2, 10), slice(None))))
    assert len(stacks) == 6 and stacks[0].shape == (8, 20, 11)
    np.testing.assert_array_equal(stacks[3][..., :3], samples[3, 2:10].astype(np.float32))


def test_per_sample_changes_no_bit_of_the_render(tmp_path):
    scene = tracer.load_scene(featured_scene(tmp_path)).with_overrides(width=20, height=16)
    from tracer.outputs.samples import SampleWriter

    plain = tracer.render(scene, spp=9, seed=3)
    writer = SampleWriter(tmp_path, "x", 4)
    streamed = tracer.render(scene, spp=9, seed=3, per_sample=writer)
    writer.finish()
    for key in plain.buffers:
        assert np.array_equal(plain[key], streamed[key]), key


def test_bad_per_sample_counts_are_one_line(tmp_path):
    scene = featured_scene(tmp_path)
    assert_user_error(invoke("render", scene, "--spp", 4, "--per-sample", 5, "--out", tmp_path / "out"),
                      "--per-sample: 5 samples asked for, but the render takes at most 4 spp")
    assert_user_error(invoke("render", scene, "--spp", 4, "--per-sample", 0, "--out", tmp_path / "out"),
                      "--per-sample: must be at least 1")
    assert_user_error(invoke("render", scene, "--target-error", 0.1, "--per-sample", 2, "--out", tmp_path / "out"),
                      "--per-sample: needs a fixed --spp")
    assert not (tmp_path / "out").exists() or not any((tmp_path / "out").rglob("*"))


PEAK = ("import sys, tracer.cli.main as m; sys.argv = ['tracer'] + sys.argv[1:]\n"
        "try:\n    m.run()\nexcept SystemExit:\n    pass\n"
        "print([int(l.split()[1]) for l in open('/proc/self/status') if l.startswith('VmHWM')][0] // 1024)")


@pytest.mark.slow
def test_per_sample_memory_stays_bounded_by_one_pass(tmp_path):
    """256 x 256, 64 spp of the figurine with ``--per-sample 64``: 416 MiB of samples, written as they come (held
    whole they would take that much memory). A first run compiles the kernels, so that neither measured run does."""
    base = [sys.executable, "-c", PEAK, "render", str(ROOT / "examples" / "figurine.toml"), "--spp", "64",
            "--width", "256", "--height", "256", "--format", "npz"]
    subprocess.run(base[:5] + ["--spp", "1", "--width", "16", "--height", "16", "--out", str(tmp_path / "warm")],
                   capture_output=True, check=True)
    peaks = {}
    for label, extra in (("plain", []), ("per-sample", ["--per-sample", "64"])):
        result = subprocess.run(base + extra + ["--out", str(tmp_path / label)], capture_output=True, text=True, check=True)
        peaks[label] = int(result.stdout.strip().splitlines()[-1])
    size = sum(p.stat().st_size for p in (tmp_path / "per-sample" / "figurine.samples").iterdir()) / 2**20
    print(f"peak MiB {peaks}, samples {size:.0f} MiB")
    assert size > 400
    assert peaks["per-sample"] - peaks["plain"] < 64, peaks          # the README's bound
