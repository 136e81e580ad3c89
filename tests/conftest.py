"""Shared fixtures. Kernels compile into a fresh cache per test session (numba does not notice
edits in helper modules of a cached kernel), shared with the subprocesses the tests start."""

import os
import tempfile

if "TRACER_TEST_KEEP_CACHE" not in os.environ:
    os.environ["NUMBA_CACHE_DIR"] = tempfile.mkdtemp(prefix="tracer-numba-")
os.environ.setdefault("MPLBACKEND", "Agg")

from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402
import pytest  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture
def rng():
    return np.random.default_rng(20261201)


@pytest.fixture
def root():
    return ROOT


def write_text(path: Path, text: str) -> Path:
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(text)
    return path
