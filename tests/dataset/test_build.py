"""Building datasets: serial and on a real Dask LocalCluster, bit-identical; independent noise;
certified references; resume after kill -9; checksums."""

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

from tracer.dataset.manifest import read_manifest, record_is_intact
from tracer.dataset.plan import load_plan
from tracer.dataset.items import item_scene
from tracer.dataset.run import build_dataset
from tracer.errors import UserError
from tracer.outputs.npz import read_npz
from tracer.rendering import render

from .plans import write_plan


def dataset_files(folder: Path) -> dict[str, bytes]:
    return {str(p.relative_to(folder)): p.read_bytes() for p in sorted((folder / "items").rglob("*")) if p.is_file()}


def assert_complete(folder: Path, n_items: int):
    records = read_manifest(folder)
    assert len(records) == n_items
    assert len({r["id"] for r in records}) == n_items                 # no item twice
    assert all(record_is_intact(folder, r) for r in records)          # every checksum matches
    assert not list(folder.rglob("*.partial-*"))                      # no stray temporary files
    listed = {entry["path"] for r in records for entry in r["files"].values()}
    present = {str(p.relative_to(folder)) for p in (folder / "items").rglob("*") if p.is_file()}
    assert listed == present


@pytest.fixture(scope="module")
def serial_dataset(tmp_path_factory):
    folder = tmp_path_factory.mktemp("serial")
    # the flame glows (blackbody emission) and scatters: with 3 bounces under "track" it exercises every transport path
    plan = write_plan(folder / "plan", views=2, extra_render="reference_chunks = 2\nbounces = 3\nestimator = \"track\"",
                      extra='formats = ["npz", "exr"]', volumes=("plume", "flame"))
    summary = build_dataset(plan, folder / "out")
    return plan, folder / "out", summary


def test_serial_build_writes_every_item_with_a_manifest(serial_dataset):
    plan_path, out, summary = serial_dataset
    assert summary.n_items == 4 and sum(summary.per_split.values()) == 4
    assert_complete(out, 4)
    record = read_manifest(out)[0]
    assert {"id", "split", "files", "camera", "lights", "transfer_function", "transfer_function_jitter", "seed",
            "reference"} <= set(record)
    names = sorted(record["files"])
    assert names == ["reference.exr", "reference.npz", "spp0001.exr", "spp0001.npz", "spp0002.exr", "spp0002.npz"]
    reference = read_npz(out / record["files"]["reference.npz"]["path"])
    assert reference.spp == 16 and reference.meta["render_seconds"] is None
    flames = [read_npz(out / r["files"]["reference.npz"]["path"]) for r in read_manifest(out) if "flame" in r["volume"]]
    assert flames and all(f.meta["scene"]["render"]["bounces"] == 3 for f in flames)
    assert max((f["radiance"][..., 0] - 2 * f["radiance"][..., 2]).max() for f in flames) > 0.2    # it glows red-orange
    assert record["reference"]["psnr_vs_converged_db"] > 20


def test_cluster_build_is_bit_identical_to_the_serial_one(serial_dataset, tmp_path):
    """A real Dask LocalCluster, 2 worker processes; the chunked reference merges in chunk order."""
    plan_path, serial_out, _ = serial_dataset
    summary = build_dataset(plan_path, tmp_path / "cluster", workers=2)
    assert summary.n_items == 4
    assert dataset_files(tmp_path / "cluster") == dataset_files(serial_out)
    strip = lambda records: [{k: v for k, v in r.items() if k != "files" and k != "reference"} for r in records]  # noqa: E731
    assert strip(read_manifest(tmp_path / "cluster")) == strip(read_manifest(serial_out))


def test_chunked_reference_equals_one_render_within_rounding(serial_dataset):
    plan_path, out, _ = serial_dataset
    plan = load_plan(plan_path)
    item = plan.items()[1]
    scene, _ = item_scene(plan, item)
    whole = render(scene, spp=16)
    record = next(r for r in read_manifest(out) if r["index"] == 1)
    chunked = read_npz(out / record["files"]["reference.npz"]["path"])
    for key in whole.buffers:
        np.testing.assert_allclose(chunked[key], whole[key], rtol=1e-5, atol=1e-7, err_msg=key)


@pytest.mark.slow
def test_input_noise_is_independent_of_the_reference_noise(tmp_path):
    """Across the pixels of an item, the error of the 8-spp input and the error of the 32-spp reference,
    each against a third independent 2048-spp render (another seed), correlate below 0.05 in
    magnitude. Control: an input drawn from the reference's own sample range correlates strongly."""
    plan_path = write_plan(tmp_path / "plan", views=1, volumes=("figurine",), width=32, height=32,
                           input_spp=(8,), reference_spp=32)
    build_dataset(plan_path, tmp_path / "out")
    record = read_manifest(tmp_path / "out")[0]
    load = lambda name: read_npz(tmp_path / "out" / record["files"][name]["path"])["radiance"].astype(np.float64)  # noqa: E731
    plan = load_plan(plan_path)
    scene, _ = item_scene(plan, plan.items()[0])
    third = render(scene, spp=2048, seed=987654321)["radiance"]
    input_error = (load("spp0008.npz") - third).ravel()
    reference_error = (load("reference.npz") - third).ravel()
    assert abs(np.corrcoef(input_error, reference_error)[0, 1]) < 0.05
    shared = render(scene, spp=8, first_sample=0)["radiance"] - third           # same indices as the reference
    assert np.corrcoef(shared.ravel(), reference_error)[0, 1] > 0.3


def test_references_are_certified_to_the_plan(tmp_path):
    plan_path = write_plan(tmp_path / "plan", views=1, volumes=("plume",), width=16, height=16,
                           reference_spp=4096, extra_render="reference_min_psnr = 38.0")
    summary = build_dataset(plan_path, tmp_path / "out")
    record = read_manifest(tmp_path / "out")[0]
    assert record["reference"]["certified"] and record["reference"]["psnr_vs_converged_db"] >= 38.0
    assert record["reference"]["spp"] < 4096 and not summary.uncertified


def test_resume_reverifies_checksums_and_redoes_damaged_items(serial_dataset, tmp_path):
    import shutil

    plan_path, serial_out, _ = serial_dataset
    copy = tmp_path / "copy"
    shutil.copytree(serial_out, copy)
    record = read_manifest(copy)[2]
    damaged = copy / record["files"]["spp0002.npz"]["path"]
    damaged.write_bytes(damaged.read_bytes()[:-10] + b"0123456789")
    (copy / "items" / record["id"] / ".spp0001.partial-123.npz").write_bytes(b"junk")
    summary = build_dataset(plan_path, copy, resume=True)
    assert summary.n_done_before == 3
    assert_complete(copy, 4)
    assert dataset_files(copy) == dataset_files(serial_out)


def test_building_into_a_used_folder_without_resume_is_refused(serial_dataset):
    plan_path, out, _ = serial_dataset
    with pytest.raises(UserError, match="--resume"):
        build_dataset(plan_path, out)


def test_the_loader_example_iterates_pairs(serial_dataset, root):
    import importlib.util

    spec = importlib.util.spec_from_file_location("dataset_loader", root / "examples" / "dataset_loader.py")
    loader = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(loader)
    _, out, _ = serial_dataset
    pairs = list(loader.iterate_pairs(out, split=None, input_spp=2))
    assert len(pairs) == 4
    noisy, features, reference = pairs[0]
    assert noisy.shape == reference.shape == (24, 24, 3)
    assert features.shape[:2] == (24, 24) and features.shape[2] >= 10


def _kill_and_resume(tmp_path, extra_args):
    plan_path = write_plan(tmp_path / "plan", views=4, width=32, height=32, reference_spp=48)
    out = tmp_path / "out"
    command = [sys.executable, "-m", "tracer", "dataset", str(plan_path), "--out", str(out), *extra_args]
    process = subprocess.Popen(command, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, start_new_session=True)
    deadline = time.time() + 180
    while time.time() < deadline and process.poll() is None:
        if len(read_manifest(out)) >= 2:
            break
        time.sleep(0.05)
    assert process.poll() is None, "the run finished before it could be killed"
    os.killpg(process.pid, signal.SIGKILL)
    process.wait()
    done = len(read_manifest(out))
    assert 2 <= done < 8
    subprocess.run(command + ["--resume"], check=True, capture_output=True, timeout=300)
    assert_complete(out, 8)
    clean = tmp_path / "clean"
    build_dataset(plan_path, clean)
    assert dataset_files(out) == dataset_files(clean)


@pytest.mark.slow
def test_kill_9_then_resume_serially(tmp_path):
    _kill_and_resume(tmp_path, [])


@pytest.mark.slow
def test_kill_9_then_resume_on_a_cluster(tmp_path):
    _kill_and_resume(tmp_path, ["--workers", "2"])
