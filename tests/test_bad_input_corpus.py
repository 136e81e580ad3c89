"""The bad-input corpus: every case through the real command line, with the exact line a user sees.

Each case writes its broken input into a fresh folder, runs one ``tracer`` command in-process and
checks: exit status 2 (or 0 with a warning line for the one warning case), exactly the expected
line on stderr (``{tmp}`` stands for the case's folder), no traceback, and nothing written under
the output folder. The error class behind every message is :class:`tracer.UserError`.
"""

from __future__ import annotations

import gzip
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import numpy as np
import nrrd
import numba
import pytest
from typer.testing import CliRunner

from tracer.cli.main import app

ROOT = Path(__file__).resolve().parents[1]
PLUME = ROOT / "sample_volumes" / "plume.nrrd"
PLUME_TF = ROOT / "transfer_functions" / "plume_smoke.toml"


@dataclass(frozen=True)
class Case:
    name: str
    kind: str                                   # NRRD, transfer function, scene, plan, output, merge, format, report
    setup: Callable[[Path], list]
    message: str
    exit_code: int = 2
    env: dict = field(default_factory=dict)


def header_file(text: str, data: bytes = b"", name: str = "bad.nrrd"):
    def setup(tmp: Path):
        path = tmp / name
        path.write_bytes(text.encode() + b"\n" + data)
        return ["info", path]
    return setup


def nrrd_volume(data, header=None, name="v.nrrd", command="tf-check"):
    def setup(tmp: Path):
        path = tmp / name
        nrrd.write(str(path), data, header or {}, compression_level=1)
        return [command, path, PLUME_TF, "--out", tmp / "out" / "report.png"] if command == "tf-check" else [command, path]
    return setup


def text_file(text: str, name: str, command: Callable[[Path, Path], list]):
    def setup(tmp: Path):
        path = tmp / name
        path.write_text(text)
        return command(tmp, path)
    return setup


def tf_check(tmp, path):
    return ["tf-check", PLUME, path, "--out", tmp / "out" / "report.png"]


def render(tmp, path):
    return ["render", path, "--out", tmp / "out"]


SCENE = f"""[volume]
path = "{PLUME}"
[transfer_function]
path = "{PLUME_TF}"
[camera]
position = [0.0, -120.0, 30.0]
target = [0.0, 0.0, 30.0]
width = 8
height = 8
[render]
spp = 1
"""


def scene(replace: dict | None = None, append: str = ""):
    text = SCENE
    for old, new in (replace or {}).items():
        assert old in text, old
        text = text.replace(old, new)
    return text_file(text + append, "scene.toml", render)


TF = 'opacity = [[0.0, 0.0], [1.0, 0.5]]\ncolor = [[0.0, [0.5, 0.5, 0.5]]]\n'
SIZES = "NRRD0004\ntype: float\ndimension: 3\nsizes: 2 2 2\nendian: little\nencoding: raw\n"


def detached_escape(tmp: Path):
    (tmp / "outside.raw").write_bytes(bytes(8))
    (tmp / "inner").mkdir()
    path = tmp / "inner" / "x.nhdr"
    path.write_text("NRRD0004\ntype: uint8\ndimension: 3\nsizes: 2 2 2\nencoding: raw\ndata file: ../outside.raw\n")
    return ["info", path]


def corrupt_gzip(tmp: Path):
    path = tmp / "zip.nrrd"
    payload = bytearray(gzip.compress(np.arange(64, dtype=np.float32).tobytes()))
    payload[12:20] = b"\xff" * 8
    path.write_bytes(SIZES.replace("sizes: 2 2 2", "sizes: 4 4 4").replace("raw", "gzip").encode() + b"\n" + bytes(payload))
    return ["info", path]


def unwritable_output(tmp: Path):
    (tmp / "blocker").write_text("a file where the output folder should be")
    path = tmp / "scene.toml"
    path.write_text(SCENE)
    return ["render", path, "--out", tmp / "blocker" / "out"]


def merge_overlap(tmp: Path):
    from tests.helpers import blob_scene
    from tracer.outputs.npz import write_npz
    from tracer.rendering import render as render_scene

    scene_ = blob_scene(width=4, height=4, spp=2)
    write_npz(tmp / "a.npz", render_scene(scene_))
    write_npz(tmp / "b.npz", render_scene(scene_, first_sample=1))
    return ["pool", tmp / "a.npz", tmp / "b.npz", "--out", tmp / "out" / "c"]


def plan(text_replace: dict):
    from tests.dataset.plans import write_plan

    def setup(tmp: Path):
        path = write_plan(tmp / "plan")
        text = path.read_text()
        for old, new in text_replace.items():
            assert old in text
            text = text.replace(old, new)
        path.write_text(text)
        return ["dataset", path, "--out", tmp / "out"]
    return setup


def render_with(*options):
    def setup(tmp: Path):
        path = tmp / "scene.toml"
        path.write_text(SCENE)
        return ["render", path, "--out", tmp / "out", *options]
    return setup


def former_command(name: str):
    def setup(tmp: Path):
        return [name, "--out", tmp / "out"]
    return setup


THREADS = numba.config.NUMBA_NUM_THREADS

CASES = [
    # --- NRRD headers and data -------------------------------------------------------------
    Case("nrrd missing sizes", "NRRD", header_file("NRRD0004\ntype: float\ndimension: 3\nendian: little\nencoding: raw\n"), "error: {tmp}/bad.nrrd: sizes: missing (a field the NRRD format requires)"),
    Case("nrrd missing type", "NRRD", header_file("NRRD0004\ndimension: 3\nsizes: 2 2 2\nencoding: raw\n"), "error: {tmp}/bad.nrrd: type: missing (a field the NRRD format requires)"),
    Case("nrrd 2-D", "NRRD", header_file("NRRD0004\ntype: float\ndimension: 2\nsizes: 4 4\nendian: little\nencoding: raw\n", bytes(64)), "error: {tmp}/bad.nrrd: dimension: a volume must be 3-D, this file is 2-D (sizes [4, 4])"),
    Case("nrrd dimension disagrees with sizes", "NRRD", header_file("NRRD0004\ntype: float\ndimension: 3\nsizes: 4 4\nendian: little\nencoding: raw\n", bytes(64)), "error: {tmp}/bad.nrrd: sizes: dimension is 3 but sizes lists 2 values [4, 4]"),
    Case("nrrd axis of one sample", "NRRD", header_file(SIZES.replace("sizes: 2 2 2", "sizes: 2 1 2"), bytes(16)), "error: {tmp}/bad.nrrd: sizes: every axis needs at least 2 samples, got [2, 1, 2]"),
    Case("nrrd truncated data", "NRRD", header_file(SIZES, bytes(20)), "error: {tmp}/bad.nrrd: data: the file ends before its sizes [2, 2, 2] are filled (truncated?)"),
    Case("nrrd extra data", "NRRD", header_file(SIZES, bytes(64)), "error: {tmp}/bad.nrrd: data: the file holds more voxels than its sizes [2, 2, 2] say"),
    Case("nrrd unknown type", "NRRD", header_file(SIZES.replace("type: float", "type: quaternion"), bytes(32)), "error: {tmp}/bad.nrrd: type: unknown or unsupported NRRD type 'quaternion'"),
    Case("nrrd unsupported type", "NRRD", header_file(SIZES.replace("type: float", "type: int64"), bytes(64)), "error: {tmp}/bad.nrrd: type: 'int64' is not supported; use one of int8, uint8, int16, uint16, int32, uint32, float32, float64"),
    Case("nrrd unknown encoding", "NRRD", header_file(SIZES.replace("encoding: raw", "encoding: jpeg"), bytes(32)), "error: {tmp}/bad.nrrd: encoding: unknown or unsupported encoding 'jpeg'"),
    Case("nrrd missing endian", "NRRD", header_file(SIZES.replace("endian: little\n", ""), bytes(32)),
         "error: {tmp}/bad.nrrd: endian: Header is missing required field: endian"),
    Case("nrrd zero space direction", "NRRD", header_file(SIZES.replace("encoding: raw", "space: RAS\nspace directions: (1,0,0) (0,0,0) (0,0,1)\nencoding: raw"), bytes(32)), "error: {tmp}/bad.nrrd: space directions: axis 1 has zero length"),
    Case("nrrd parallel space directions", "NRRD", header_file(SIZES.replace("encoding: raw", "space: RAS\nspace directions: (1,0,0) (2,0,0) (0,0,1)\nencoding: raw"), bytes(32)), "error: {tmp}/bad.nrrd: space directions: the axis vectors are parallel (volume has no extent)"),
    Case("nrrd corrupt gzip", "NRRD", corrupt_gzip, "error: {tmp}/zip.nrrd: data: cannot read the voxels: Error -3 while decompressing data: invalid code lengths set"),
    Case("nrrd not a NRRD", "NRRD", header_file("PK\x03\x04 this is a zip file", bytes(16)), "error: {tmp}/bad.nrrd: not a readable NRRD header: Invalid NRRD magic line. Is this an NRRD file?"),
    Case("nrrd detached data outside the folder", "NRRD", detached_escape, "error: {tmp}/inner/x.nhdr: data file: '../outside.raw' lies outside the header's folder; refused (move the data next to the header)"),
    Case("nrrd oversized for the memory budget", "NRRD",
         header_file(SIZES.replace("sizes: 2 2 2", "sizes: 2048 2048 2048").replace("raw", "gzip"), gzip.compress(b"")), "error: {tmp}/bad.nrrd: sizes: [2048, 2048, 2048] needs 49152 MiB, over the memory budget of 1024 MiB (set TRACER_MEMORY_BUDGET_MB to raise it)",
         env={"TRACER_MEMORY_BUDGET_MB": "1024"}),
    Case("volume with NaN voxels", "NRRD", nrrd_volume(np.array([[[np.nan, 1], [1, 1]], [[1, 1], [1, 1]]], np.float32)), "error: {tmp}/v.nrrd: data: 1 voxels are NaN or Inf; fix or mask them before rendering"),
    Case("volume with Inf voxels", "NRRD", nrrd_volume(np.array([[[np.inf, 1], [1, 1]], [[1, 1], [1, -np.inf]]], np.float32)), "error: {tmp}/v.nrrd: data: 2 voxels are NaN or Inf; fix or mask them before rendering"),
    # --- transfer functions ----------------------------------------------------------------
    Case("tf broken TOML", "transfer function", text_file("opacity = [[0, 0]\n", "tf.toml", tf_check), "error: {tmp}/tf.toml: not valid TOML: Unclosed array (at end of document)"),
    Case("tf unknown key", "transfer function", text_file(TF + "gloss = 1\n", "tf.toml", tf_check), "error: {tmp}/tf.toml: unknown key 'gloss' in top level"),
    Case("tf opacity above 1", "transfer function", text_file(TF.replace("0.5]]", "1.5]]"), "tf.toml", tf_check), "error: {tmp}/tf.toml: opacity[1] opacity: entries must lie in [0.0, 1.0], got [1.5]"),
    Case("tf colour below 0", "transfer function", text_file(TF.replace("[0.5, 0.5, 0.5]", "[0.5, -0.1, 0.5]"), "tf.toml", tf_check), "error: {tmp}/tf.toml: color[0] colour: entries must lie in [0.0, 1.0], got [0.5, -0.1, 0.5]"),
    Case("tf negative emission", "transfer function", text_file(TF + "emission = [[0.0, [1.0, -2.0, 0.0]]]\n", "tf.toml", tf_check), "error: {tmp}/tf.toml: emission[0] emission: entries must be >= 0.0, got [1.0, -2.0, 0.0]"),
    Case("tf negative emission scale", "transfer function", text_file(TF + "emission = [[0.0, [1.0, 2.0, 0.0]]]\nemission_scale = -1\n", "tf.toml", tf_check), "error: {tmp}/tf.toml: emission_scale: must be >= 0.0, got -1"),
    Case("tf decreasing values", "transfer function", text_file(TF.replace("[1.0, 0.5]", "[-1.0, 0.5]"), "tf.toml", tf_check), "error: {tmp}/tf.toml: opacity[1]: values must increase, but -1.0 follows 0.0"),
    Case("tf wrong type", "transfer function", text_file(TF.replace("opacity = [[0.0, 0.0], [1.0, 0.5]]", 'opacity = "high"'), "tf.toml", tf_check), "error: {tmp}/tf.toml: opacity: expected a list of [value, ...] control points"),
    # --- scenes ----------------------------------------------------------------------------
    Case("scene broken TOML", "scene", scene(append="[render\n"), "error: {tmp}/scene.toml: not valid TOML: Cannot declare ('render',) twice (at line 12, column 8)"),
    Case("scene unknown key", "scene", scene(append="[lens]\nmodel = 'fisheye'\n"), "error: {tmp}/scene.toml: unknown key 'lens' in top level"),
    Case("scene unknown camera key", "scene", scene({"width = 8": "width = 8\nzoom = 2"}), "error: {tmp}/scene.toml: unknown key 'zoom' in [camera]"),
    Case("scene fov zero", "scene", scene({"width = 8": "width = 8\nfov_deg = 0"}), "error: {tmp}/scene.toml: camera.fov_deg: must be > 0.0, got 0"),
    Case("scene zero width", "scene", scene({"width = 8": "width = 0"}), "error: {tmp}/scene.toml: camera.width: must be >= 1, got 0"),
    Case("scene spp zero", "scene", scene({"spp = 1": "spp = 0"}), "error: {tmp}/scene.toml: render.spp: must be >= 1, got 0"),
    Case("scene negative step", "scene", scene({"spp = 1": "spp = 1\nstep_mm = -1.0"}), "error: {tmp}/scene.toml: render.step_mm: must be > 0.0, got -1.0"),
    Case("scene zero bounces", "scene", scene({"spp = 1": "spp = 1\nbounces = 0"}), "error: {tmp}/scene.toml: render.bounces: must be >= 1, got 0"),
    Case("scene too many bounces", "scene", scene({"spp = 1": "spp = 1\nbounces = 5000"}), "error: {tmp}/scene.toml: render.bounces: must be <= 4096, got 5000"),
    Case("scene unknown estimator", "scene", scene({"spp = 1": 'spp = 1\nestimator = "delta"'}), "error: {tmp}/scene.toml: render.estimator: must be one of 'march', 'track', got 'delta'"),
    Case("plan unknown estimator", "plan", plan({"reference_spp = 16": 'reference_spp = 16\nestimator = "ratio"'}), "error: {tmp}/plan/plan.toml: render.estimator: must be one of 'march', 'track', got 'ratio'"),
    Case("scene events as text", "scene", scene({"spp = 1": 'spp = 1\nevents = "two"'}), "error: {tmp}/scene.toml: render.events: expected a number, got a string ('two')"),
    Case("scene position equals target", "scene", scene({"position = [0.0, -120.0, 30.0]": "position = [0.0, 0.0, 30.0]"}), "error: {tmp}/scene.toml: camera.position: equals the target [0.0, 0.0, 30.0]; the camera has no viewing direction"),
    Case("scene resolution over the memory budget", "scene", scene({"width = 8": "width = 8000", "height = 8": "height = 8000"}), "error: {tmp}/scene.toml: camera.width x camera.height = 8000 x 8000 needs 25391 MiB of buffers, over the memory budget of 512 MiB",
         env={"TRACER_MEMORY_BUDGET_MB": "512"}),
    Case("scene missing volume", "scene", scene({f'path = "{PLUME}"': 'path = "missing.nrrd"'}), "error: {tmp}/scene.toml: volume.path: {tmp}/missing.nrrd: file not found"),
    Case("scene view misses the volume (warning)", "scene", scene({"target = [0.0, 0.0, 30.0]": "target = [0.0, -240.0, 30.0]"}),
         "warning: {tmp}/scene.toml: camera: the view misses the volume; the render will show only background",
         exit_code=0),
    Case("render --estimator delta", "scene", render_with("--estimator", "delta"), "error: command line: --estimator must be one of march, track, got 'delta'"),
    Case("render --bounces 0", "scene", render_with("--bounces", 0), "error: command line: --bounces: must lie in [1, 4096], got 0"),
    Case("render --threads 0", "scene", render_with("--threads", 0), f"error: --threads: must be a whole number from 1 to {THREADS} (the cores numba sees), got 0; leave it out to use them all"),
    # --- names of an earlier release, refused with their new name (for one release) ---------
    Case("former key shading", "former name", scene({"spp = 1": 'spp = 1\nshading = "hybrid"'}), 'error: {tmp}/scene.toml: render.shading: is now called scattering; write scattering = "graded" (former names: "phase" -> "medium", "surface" -> "interface", "hybrid" -> "graded")'),
    Case("former value of scattering", "former name", scene({"spp = 1": 'spp = 1\nscattering = "phase"'}), 'error: {tmp}/scene.toml: render.scattering: "phase" is now called "medium"'),
    Case("former key surface_gradient", "former name", scene({"spp = 1": "spp = 1\nsurface_gradient = 0.2"}), "error: {tmp}/scene.toml: render.surface_gradient: is now called interface_gradient (same meaning and value)"),
    Case("former option --sample-offset", "former name", render_with("--sample-offset", 4), "error: --sample-offset is now called --first-sample (same meaning)"),
    Case("former command merge", "former name", former_command("merge"), "error: `tracer merge` is now called `tracer pool` (same arguments and options)"),
    Case("former command samples", "former name", former_command("samples"), "error: `tracer samples` is now called `tracer demo-volumes` (same arguments and options)"),
    Case("former preset ct_bone", "former name", scene({f'path = "{PLUME_TF}"': 'path = "ct_bone.toml"'}), "error: {tmp}/scene.toml: transfer_function.path: {tmp}/ct_bone.toml: file not found; the preset ct_bone.toml is now hu_mineral.toml (same folder, new colours)"),
    # --- outputs, merges, plans ------------------------------------------------------------
    Case("output folder blocked by a file", "output", unwritable_output, "error: {tmp}/blocker/out: cannot create the output folder: {tmp}/blocker is not a folder"),
    Case("pool of overlapping sample ranges", "pool", merge_overlap, "error: {tmp}/b.npz: samples [1, 3) overlap {tmp}/a.npz's [0, 2); pooled renders must cover disjoint sample ranges"),
    Case("plan fractions", "plan", plan({"train = 0.5": "train = 0.9"}), "error: {tmp}/plan/plan.toml: splits: fractions must add up to 1, got 1.4"),
    Case("plan unknown key", "plan", plan({'name = "test"': 'name = "test"\ncolour = 3'}), "error: {tmp}/plan/plan.toml: unknown key 'colour' in top level"),
]


def dicom_series(**options):
    def setup(tmp: Path):
        from tests.test_formats import write_series

        write_series(tmp / "series", **options)
        if options.get("uid") == "1.2.3":
            write_series(tmp / "series", n_slices=3, uid="1.2.4", description="scout", seed=2, prefix="SC")
        return ["convert", tmp / "series", tmp / "out" / "ct.nrrd"]
    return setup


def hdf5_volume(member):
    def setup(tmp: Path):
        import h5py

        with h5py.File(tmp / "scan.h5", "w") as handle:
            handle.create_dataset("volumes/ct", data=np.zeros((4, 4, 4), np.uint8))
        return ["convert", f"{tmp / 'scan.h5'}::{member}", tmp / "out" / "ct.nrrd"]
    return setup


FORMAT_CASES = [
    Case("DICOM mixed series", "format", dicom_series(uid="1.2.3"), "error: {tmp}/series: holds 2 DICOM series ('test series' (6 files), 'scout' (3 files)); (0020,000E) Series Instance UID must be the same for all: put each series in its own folder, or name one file of the series"),
    Case("DICOM missing slice", "format", dicom_series(n_slices=8, skip=(4,)), "error: {tmp}/series: missing slices: (0020,0032) Image Position (Patient) jumps 2.500 mm after IM0000 where the others are 1.250 mm apart (about 1 missing)"),
    Case("HDF5 missing dataset", "format", hdf5_volume("volumes/mr"), "error: {tmp}/scan.h5: no dataset 'volumes/mr'; datasets here: volumes/ct"),
    Case("convert to a non-NRRD", "format", lambda tmp: ["convert", PLUME, tmp / "out" / "plume.vtk"], "error: {tmp}/out/plume.vtk: the output must be a .nrrd file"),
]
CASES += FORMAT_CASES


def report_of(name: str, content: bytes | None):
    def setup(tmp: Path):
        path = tmp / name
        if content is None:
            path.mkdir()
        else:
            path.write_bytes(content)
        return ["report", path, "--out", tmp / "out"]
    return setup


def scene_with_features(names: str):
    def setup(tmp: Path):
        text = (ROOT / "examples" / "plume.toml").read_text().replace('"../', f'"{ROOT}/')
        path = tmp / "plume.toml"
        path.write_text(text.replace("[render]\n", f"[render]\nfeatures = {names}\n", 1))
        return ["render", path, "--spp", "1", "--out", tmp / "out"]
    return setup


CASES.append(Case("unknown candidate feature", "scene", scene_with_features('["expected_depth", "curvature"]'),
                  "error: {tmp}/plume.toml: render.features: unknown feature 'curvature'; choose from all, "
                  "event1_value, event1_gradient, event1_extinction, event1_interface_weight, event1_light_transmittance, "
                  "event2_value, event2_gradient, event2_extinction, event2_interface_weight, event2_light_transmittance, "
                  "opacity_before_event1, expected_depth, optical_depth, background_part, illumination"))

def sequence_scene(sequence: str, *extra):
    def setup(tmp: Path):
        text = (ROOT / "examples" / "plume.toml").read_text().replace('"../', f'"{ROOT}/')
        path = tmp / "plume.toml"
        path.write_text(text + f"\n[sequence]\n{sequence}\n")
        return ["sequence", path, "--out", tmp / "out", *extra]
    return setup


def render_plume(*options):
    return lambda tmp: ["render", ROOT / "examples" / "plume.toml", "--out", tmp / "out", *options]


CASES += [
    Case("sequence with one key", "sequence", sequence_scene('kind = "keys"\n[[sequence.keys]]\nposition = [0.0, -90.0, 30.0]\ntarget = [0.0, 0.0, 30.0]'),
         "error: {tmp}/plume.toml: sequence.keys: a keyed path needs at least 2 [[sequence.keys]], got 1"),
    Case("zero-length orbit", "sequence", sequence_scene('kind = "orbit"\ndegrees = 0.0'),
         "error: {tmp}/plume.toml: sequence.degrees: a zero-length orbit does not move; give a non-zero angle, got 0.0"),
    Case("sequence of one frame", "sequence", sequence_scene('kind = "orbit"\ndegrees = 5.0', "--frames", "1"),
         "error: --frames: a sequence needs at least 2 frames, got 1"),
    Case("per-sample beyond the spp", "render", render_plume("--spp", "4", "--per-sample", "5"),
         "error: --per-sample: 5 samples asked for, but the render takes at most 4 spp"),
    Case("cluster render with no workers", "render", render_plume("--workers", "0"), "error: --workers: must be at least 1, got 0"),
    Case("cluster render, address without scheme", "render", render_plume("--scheduler", "localhost:8786"),
         "error: --scheduler: 'localhost:8786' is not a scheduler address like tcp://HOST:8786"),
    Case("reference halves of an odd spp", "plan", plan({"reference_spp = 16": "reference_spp = 15\nreference_halves = true"}),
         "error: {tmp}/plan/plan.toml: render.reference_halves: halves need an even reference_spp, got 15"),
]

REPORT_CASES = [
    Case("report of a folder that is no dataset", "report", report_of("renders", None), "error: {tmp}/renders: not a dataset folder (manifest.jsonl missing)"),
    Case("report of a JSON that is no score result", "report", report_of("scores.json", b'{"psnr": 30}'), "error: {tmp}/scores.json: not a score-dataset result (write one with tracer score-dataset --json)"),
    Case("report of a missing file", "report", lambda tmp: ["report", tmp / "render.npz", "--out", tmp / "out"], "error: {tmp}/render.npz: not found; give a render .npz, a dataset folder or a score-dataset --json result"),
]
CASES += REPORT_CASES


def run_case(case: Case, tmp: Path):
    args = [str(a) for a in case.setup(tmp)]
    runner = CliRunner()
    return runner.invoke(app, args, prog_name="tracer", env=case.env or None), tmp / "out"


@pytest.mark.parametrize("case", CASES, ids=[c.name for c in CASES])
def test_bad_input(case, tmp_path):
    result, out = run_case(case, tmp_path)
    assert result.exit_code == case.exit_code, (result.exit_code, result.output, result.exception)
    assert "Traceback" not in result.output and result.exception is None or isinstance(result.exception, SystemExit)
    lines = [line for line in result.stderr.splitlines() if line.strip()]
    expected = case.message.replace("{tmp}", str(tmp_path))
    if case.exit_code == 0:      # a warning: the render goes on (its progress bar shares stderr)
        assert expected in lines, lines
    else:
        assert lines == [expected], lines
    if case.exit_code == 2:
        assert not out.exists() or not any(p.is_file() for p in out.rglob("*"))
    assert not list(tmp_path.rglob("*.partial-*"))


def test_the_corpus_is_large_enough():
    assert len(CASES) >= 30
