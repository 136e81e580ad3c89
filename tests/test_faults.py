"""Faults: a write that fails half-way, a Dask worker killed mid-run, and the safety rules."""

from __future__ import annotations

import errno
import os
import re
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

from tracer.errors import UserError
from tracer.outputs.npz import write_npz
from tracer.rendering import render

from .cli.cli_helpers import assert_user_error, invoke
from .dataset.plans import write_plan
from .helpers import blob_scene

ROOT = Path(__file__).resolve().parents[1]


def test_a_write_that_fails_half_way_keeps_the_previous_file(tmp_path, monkeypatch):
    """Disk full, simulated: the archive writer raises ENOSPC after writing part of the file."""
    scene = blob_scene(width=6, height=6, spp=2)
    first = render(scene)
    path = write_npz(tmp_path / "render.npz", first)
    before = path.read_bytes()

    original = np.lib.format.write_array
    calls = []

    def full_disk(handle, array, *args, **kwargs):
        calls.append(1)
        if len(calls) > 3:
            raise OSError(errno.ENOSPC, "No space left on device")
        return original(handle, array, *args, **kwargs)

    monkeypatch.setattr(np.lib.format, "write_array", full_disk)
    with pytest.raises(UserError, match="cannot write: No space left on device; the previous file, if any, is unchanged"):
        write_npz(path, render(scene, seed=5))
    assert path.read_bytes() == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["render.npz"]


def test_disk_full_during_a_cli_render_is_one_line(tmp_path, monkeypatch, root):
    from .cli.test_cli_render import small_scene

    scene = small_scene(tmp_path, root, "plume")
    out = tmp_path / "out"

    def full_disk(*args, **kwargs):
        raise OSError(errno.ENOSPC, "No space left on device")

    monkeypatch.setattr(np.lib.format, "write_array", full_disk)
    result = invoke("render", scene, "--spp", 1, "--width", 4, "--height", 4, "--out", out)
    assert_user_error(result, "plume.npz: cannot write: No space left on device")
    assert not out.exists() or not any(out.iterdir())


def _descendants(pid: int) -> list[int]:
    children = []
    for entry in Path("/proc").iterdir():
        if not entry.name.isdigit():
            continue
        try:
            fields = (entry / "stat").read_text().rsplit(")", 1)[1].split()
        except OSError:
            continue
        if int(fields[1]) == pid:
            children.append(int(entry.name))
    out = list(children)
    for child in children:
        out += _descendants(child)
    return out


@pytest.mark.slow
def test_killing_one_worker_mid_run_loses_nothing(tmp_path):
    """kill -9 one Dask worker process while items are in flight: the nanny restarts it, Dask reruns its
    tasks, and the dataset completes with the same files as a serial build."""
    from tracer.dataset.manifest import read_manifest
    from tracer.dataset.run import build_dataset

    from .dataset.test_build import assert_complete, dataset_files

    plan = write_plan(tmp_path / "plan", views=4, width=32, height=32, reference_spp=64)
    out = tmp_path / "out"
    process = subprocess.Popen([sys.executable, "-m", "tracer", "dataset", str(plan), "--out", str(out), "--workers", "2"],
                               stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, start_new_session=True)
    deadline = time.time() + 120
    victim = None
    while time.time() < deadline and process.poll() is None and victim is None:
        if len(read_manifest(out)) >= 1:
            # the nannies live in the parent; each worker is a process it spawned
            workers = [pid for pid in _descendants(process.pid)
                       if b"spawn_main" in Path(f"/proc/{pid}/cmdline").read_bytes()]
            if workers:
                victim = workers[0]
        time.sleep(0.05)
    assert victim is not None, "no worker process found while the run was going"
    os.kill(victim, signal.SIGKILL)
    assert process.wait(timeout=300) == 0
    assert_complete(out, 8)
    serial = tmp_path / "serial"
    build_dataset(plan, serial)
    assert dataset_files(out) == dataset_files(serial)


def test_local_clusters_bind_to_loopback(tmp_path):
    from tracer.dataset.cluster import client_for

    with client_for(1, None) as client:
        address = client.scheduler.address
        workers = list(client.scheduler_info()["workers"])
    assert address.startswith("tcp://127.0.0.1:")
    assert all(worker.startswith("tcp://127.0.0.1:") for worker in workers)


def test_no_pickle_and_no_eval_in_the_package():
    """Safety rules: the package never unpickles and never evaluates text as code."""
    offenders = []
    for path in (ROOT / "tracer").rglob("*.py"):
        text = path.read_text()
        if re.search(r"allow_pickle\s*=\s*True", text) or re.search(r"(?<![\w.])(eval|exec)\s*\(", text) \
                or "pickle.load" in text:
            offenders.append(str(path))
    assert offenders == []
