"""Property-based fuzzing (hypothesis) of the parsers a user's files go through: any input either
loads or raises tracer.UserError with one line; never another exception, never a traceback."""

from __future__ import annotations

import copy
import os
import tomllib
import warnings
from pathlib import Path

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from tracer.dataset.plan import parse_plan
from tracer.errors import UserError
from tracer.io.tomlfile import read_toml
from tracer.scene import parse_scene
from tracer.optics.transfer import parse_transfer_function
from tracer.volumes import load_volume

ROOT = Path(__file__).resolve().parents[1]
EXAMPLES = 150
# CI replays a fixed sequence (derandomize) so that a red run always means a real finding; locally each run explores anew
FUZZ = settings(max_examples=EXAMPLES, deadline=None, derandomize=bool(os.environ.get("CI")),
                suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow,
                                       HealthCheck.data_too_large])

scalars = st.one_of(st.booleans(), st.integers(-10**6, 10**6), st.floats(allow_nan=True), st.text(max_size=12))
values = st.recursive(scalars,
                      lambda children: st.one_of(st.lists(children, max_size=4),
                                                 st.dictionaries(st.text(max_size=8), children, max_size=4)),
                      max_leaves=12)


def loads_or_user_error(function, *args):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            function(*args)
        except UserError as error:
            assert "\n" not in str(error)


@FUZZ
@given(text=st.text(max_size=200))
def test_any_text_is_toml_or_a_user_error(tmp_path, text):
    path = tmp_path / "fuzz.toml"
    path.write_text(text, encoding="utf-8", errors="surrogatepass") if "\ud800" not in text else path.write_bytes(b"\xff")
    loads_or_user_error(read_toml, path)


TF_KEYS = ["name", "reference_length_mm", "scale", "notes", "opacity", "color", "extra"]


@FUZZ
@given(table=st.dictionaries(st.sampled_from(TF_KEYS), values, max_size=7),
       opacity=st.lists(st.lists(st.one_of(st.floats(-2, 3), st.integers(-3, 3), st.text(max_size=2)), max_size=3),
                        max_size=5))
def test_any_transfer_function_table_loads_or_is_refused(table, opacity):
    if "opacity" not in table:
        table["opacity"] = opacity
    loads_or_user_error(parse_transfer_function, table, "fuzz.toml")


def mutate(base: dict, paths, draw_value):
    data = copy.deepcopy(base)
    for path, value in zip(paths, draw_value):
        node = data
        for key in path[:-1]:
            node = node.setdefault(key, {}) if isinstance(node, dict) else node
            if not isinstance(node, dict):
                break
        else:
            node[path[-1]] = value
    return data


SCENE = tomllib.loads((ROOT / "examples" / "plume.toml").read_text())
SCENE_PATHS = [("camera", "position"), ("camera", "target"), ("camera", "fov_deg"), ("camera", "width"),
               ("camera", "up"), ("render", "spp"), ("render", "step_mm"), ("render", "events"), ("render", "scattering"),
               ("render", "phase_g"), ("render", "feature_levels"), ("environment", "kind"), ("environment", "background"),
               ("lights",), ("volume", "path"), ("transfer_function",), ("render", "extra"), ("camera", "height")]


@FUZZ
@given(paths=st.lists(st.sampled_from(SCENE_PATHS), min_size=1, max_size=3), draw=st.lists(values, min_size=3, max_size=3))
def test_any_scene_loads_or_is_refused(paths, draw):
    data = mutate(SCENE, paths, draw)
    if isinstance(data.get("camera"), dict):
        for key in ("width", "height"):       # keep renders small when they do load
            if isinstance(data["camera"].get(key), int) and data["camera"][key] > 64:
                data["camera"][key] = 64
    loads_or_user_error(parse_scene, data, ROOT / "examples" / "fuzz.toml")


PLAN = tomllib.loads((ROOT / "examples" / "dataset_plan.toml").read_text())
PLAN_PATHS = [("seed",), ("formats",), ("volumes",), ("views", "per_volume"), ("views", "distance"),
              ("views", "elevation_deg"), ("lights", "toward"), ("lights", "cone_deg"), ("environments",),
              ("image", "width"), ("image", "crop"), ("render", "input_spp"), ("render", "reference_spp"),
              ("render", "reference_chunks"), ("splits", "train"), ("splits", "by"), ("transfer_jitter", "value")]


@FUZZ
@given(paths=st.lists(st.sampled_from(PLAN_PATHS), min_size=1, max_size=3), draw=st.lists(values, min_size=3, max_size=3))
def test_any_plan_loads_or_is_refused(paths, draw):
    data = mutate(PLAN, paths, draw)

    def parse_and_expand(d, p):
        plan = parse_plan(d, p)
        if len(plan.volumes) * plan.views_per_volume * (1 + plan.tf_variants) < 500:
            plan.items()

    loads_or_user_error(parse_and_expand, data, ROOT / "examples" / "fuzz.toml")


NRRD_FIELDS = ["type: float", "type: uint8", "type: short", "type: quaternion", "dimension: 3", "dimension: 2",
               "dimension: x", "sizes: 2 2 2", "sizes: 3 2", "sizes: 2 -1 2", "sizes: 2 2 2.5", "endian: little",
               "endian: big", "endian: middle", "encoding: raw", "encoding: gzip", "encoding: ascii", "encoding: zip",
               "spacings: 1 1 1", "spacings: 0 1 nan", "space: RAS", "space directions: (1,0,0) (0,1,0) (0,0,1)",
               "space directions: (1,0,0) (1,0,0) (0,0,1)", "space directions: none (0,1,0) (0,0,1)",
               "space origin: (0,0,0)", "space origin: (nan,0,0)", "data file: ../x.raw", "data file: LIST",
               "kinds: domain domain domain", "type: double", "sizes: 1 1 1"]


@FUZZ
@given(fields=st.lists(st.sampled_from(NRRD_FIELDS), max_size=9), data=st.binary(max_size=80),
       magic=st.sampled_from(["NRRD0004", "NRRD0005", "NRRD0001", "NRRX0004", ""]))
def test_any_nrrd_header_loads_or_is_refused(tmp_path, fields, data, magic):
    path = tmp_path / "fuzz.nrrd"
    path.write_bytes(("\n".join([magic, *fields]) + "\n\n").encode() + data)
    loads_or_user_error(lambda p: load_volume(p, budget_bytes=2**26), path)


def test_fuzz_budget_is_what_the_readme_says():
    assert EXAMPLES * 5 == 750
