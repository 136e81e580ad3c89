"""``tracer report`` output as files (README, "Report pages"): the half floats the page decodes, the
folder's replacement rules, and the size switch. The pages themselves are tested in a browser in
``tests/browser/``. Decoding here uses NumPy's own IEEE 754 binary16 type, not the package's code.
"""

from __future__ import annotations

import base64
import hashlib
import json
from pathlib import Path

import numpy as np

from tests.cli.cli_helpers import assert_user_error, invoke
from tracer.outputs.npz import write_arrays
from tracer.rendering.buffers import buffer_specs


def synthetic_render(path: Path, seed: int, width=20, height=12) -> dict:
    """A render file with every buffer of the contract, filled with random values (some beyond float16's range)."""
    rng = np.random.default_rng(seed)
    arrays = {}
    for spec in buffer_specs(0):
        shape = (height, width, 3) if spec.channels == 3 else (height, width)
        arrays[spec.key] = (rng.lognormal(0.0, 2.0, shape) * rng.choice([-1, 1], shape)).astype(np.float32)
    arrays["radiance"][0, 0] = [70000.0, 1e-9, 0.0]
    arrays["meta"] = np.array(json.dumps({"spp": 4, "seed": seed, "first_sample": 0, "width": width, "height": height}))
    path.parent.mkdir(parents=True, exist_ok=True)
    write_arrays(path, arrays)
    return arrays


def sha256(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def synthetic_dataset(folder: Path, n_items=3) -> list[dict]:
    records = []
    for index in range(n_items):
        item = f"{index:05d}-synthetic"
        files = {}
        for name, role, spp in (("spp0001.npz", "input", 1), ("reference.npz", "reference", 64)):
            path = folder / "items" / item / name
            synthetic_render(path, seed=10 * index + spp)
            files[name] = {"path": f"items/{item}/{name}", "role": role, "spp": spp, "sha256": sha256(path), "seconds": 0.1}
        records.append({"id": item, "index": index, "split": ("train", "test")[index % 2], "volume": "/v/box.nrrd",
                        "transfer_function": "/t/box.toml", "files": files,
                        "reference": {"certified": True, "mean_relative_error": 0.01, "psnr_vs_converged_db": 40.0, "spp": 64}})
    (folder / "manifest.jsonl").write_text("".join(json.dumps(r) + "\n" for r in records))
    return records


def bundle(path: Path) -> tuple[str, dict]:
    text = path.read_text()
    assert text.startswith("tracerArrive(") and text.rstrip().endswith(");")
    name, _, payload = text[len("tracerArrive("):].rstrip()[:-2].partition(", ")
    return json.loads(name), json.loads(payload)


def decoded(buffer: dict, shape) -> np.ndarray:
    return np.frombuffer(base64.b64decode(buffer["data"]), dtype="<f2").reshape(shape)


def test_render_data_is_the_npz_in_float16(tmp_path):
    arrays = synthetic_render(tmp_path / "r.npz", seed=1)
    result = invoke("report", tmp_path / "r.npz", "--out", tmp_path / "page")
    assert result.exit_code == 0, result.output
    name, payload = bundle(tmp_path / "page" / "data" / "render.js")
    assert name == "render" and (payload["width"], payload["height"]) == (20, 12)
    assert sorted(payload["buffers"]) == sorted(k for k in arrays if k != "meta")
    for key, buffer in payload["buffers"].items():
        with np.errstate(over="ignore"):
            expected = arrays[key].astype(np.float16)    # IEEE 754 binary16, round to nearest even
        assert np.array_equal(decoded(buffer, arrays[key].shape).view(np.uint16), expected.view(np.uint16)), key
    radiance = decoded(payload["buffers"]["radiance"], (12, 20, 3))
    assert np.isinf(radiance[0, 0, 0]) and radiance[0, 0, 1] == 0.0          # beyond 65504, and below 2**-24
    for name in ("index.html", "report.js", "report.css", "data/report.js"):
        assert (tmp_path / "page" / name).stat().st_size > 500
    assert "http://" not in (tmp_path / "page" / "index.html").read_text().replace('"http://www.w3.org', "")


def test_dataset_pages_ship_features_unless_asked_not_to(tmp_path):
    records = synthetic_dataset(tmp_path / "ds")
    assert invoke("report", tmp_path / "ds", "--out", tmp_path / "full").exit_code == 0
    assert invoke("report", tmp_path / "ds", "--out", tmp_path / "lean", "--no-features").exit_code == 0
    _, full = bundle(tmp_path / "full" / "data" / "00000-reference.js")
    _, lean = bundle(tmp_path / "lean" / "data" / "00000-reference.js")
    assert len(full["buffers"]) == len(buffer_specs(0)) and list(lean["buffers"]) == ["radiance"]
    _, model = bundle_model(tmp_path / "full")
    assert [item["id"] for item in model["items"]] == [r["id"] for r in records]
    assert all(f["status"] == "ok" for item in model["items"] for f in item["files"])
    assert len(list((tmp_path / "full" / "thumbs").glob("*.png"))) == 2 * len(records)


def bundle_model(folder: Path):
    text = (folder / "data" / "report.js").read_text()
    kind, _, payload = text[len("tracerReportModel("):].rstrip()[:-2].partition(", ")
    return json.loads(kind), json.loads(payload)


def test_an_earlier_report_is_replaced_and_other_folders_are_kept(tmp_path):
    synthetic_render(tmp_path / "a.npz", seed=2)
    synthetic_render(tmp_path / "b.npz", seed=3)
    out = tmp_path / "page"
    assert invoke("report", tmp_path / "a.npz", "--out", out).exit_code == 0
    first = (out / "data" / "render.js").read_text()
    assert invoke("report", tmp_path / "b.npz", "--out", out).exit_code == 0
    assert (out / "data" / "render.js").read_text() != first
    before = {p.relative_to(out): p.read_bytes() for p in out.rglob("*") if p.is_file()}
    assert_user_error(invoke("report", tmp_path / "missing.npz", "--out", out), "missing.npz", "not found")
    assert {p.relative_to(out): p.read_bytes() for p in out.rglob("*") if p.is_file()} == before   # left as it was
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.npz", "b.npz", "page"]                 # no staging left
    assert_user_error(invoke("report", tmp_path / "ds", "--out", tmp_path / "a.npz"), "not found")
    assert_user_error(invoke("report", tmp_path / "a.npz", "--out", tmp_path / "b.npz"), "exists and is not a folder")
