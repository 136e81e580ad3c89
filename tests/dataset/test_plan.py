"""Plans: deterministic expansion, splits, views, jitter bounds, one-line errors."""

import math

import numpy as np
import pytest

from tracer.dataset.plan import INPUT_SAMPLE_BASE, load_plan
from tracer.errors import UserError

from .plans import write_plan


def test_items_are_deterministic_and_unique(tmp_path):
    plan = load_plan(write_plan(tmp_path, views=5, variants=2))
    items = plan.items()
    assert len(items) == 2 * 3 * 5
    assert items == load_plan(write_plan(tmp_path / "again", views=5, variants=2)).items()
    assert len({item.item_id for item in items}) == len(items)
    assert len({item.seed for item in items}) == len(items)


def test_split_fractions_and_no_view_in_two_splits(tmp_path):
    plan = load_plan(write_plan(tmp_path, views=20, splits='train = 0.6\nvalidation = 0.2\ntest = 0.2'))
    items = plan.items()
    counts = {name: sum(item.split == name for item in items) for name in ("train", "validation", "test")}
    assert counts == {"train": 24, "validation": 8, "test": 8}
    views = [(item.volume_index, item.tf_index, item.variant, item.view) for item in items]
    assert len(set(views)) == len(views)          # each view is one item, in exactly one split


def test_split_by_volume_keeps_every_view_of_a_volume_together(tmp_path):
    plan = load_plan(write_plan(tmp_path, views=4, splits='train = 0.5\ntest = 0.5\nby = "volume"'))
    by_volume = {}
    for item in plan.items():
        by_volume.setdefault(item.volume_index, set()).add(item.split)
    assert all(len(splits) == 1 for splits in by_volume.values())
    assert {next(iter(s)) for s in by_volume.values()} == {"train", "test"}


def test_views_respect_distance_elevation_and_fov(tmp_path):
    plan = load_plan(write_plan(tmp_path, views=40))
    center, radius = np.zeros(3), 10.0
    for item in plan.items():
        camera = plan.camera(item, center, radius)
        offset = np.asarray(camera.position)
        distance = np.linalg.norm(offset)
        assert 2.0 * radius - 1e-9 <= distance <= 2.4 * radius + 1e-9
        elevation = math.degrees(math.asin(offset[2] / distance))
        assert -20.0 - 1e-9 <= elevation <= 60.0 + 1e-9
        assert 24.0 <= camera.fov_deg <= 34.0


def test_fibonacci_views_cover_the_sphere_evenly(tmp_path):
    """Fibonacci-sphere points (golden-angle spiral) are nearly uniform: the mean of the unit
    directions of many views is close to the centre of the allowed band."""
    plan = load_plan(write_plan(tmp_path, views=400, volumes=("plume",)))
    directions = np.array([plan.camera(item, np.zeros(3), 1.0).position for item in plan.items()])
    directions /= np.linalg.norm(directions, axis=1, keepdims=True)
    assert np.linalg.norm(directions[:, :2].mean(axis=0)) < 0.05


def test_transfer_function_jitter_is_bounded(tmp_path):
    from tracer.optics.transfer import load_transfer_function

    plan = load_plan(write_plan(tmp_path, views=3, variants=3))
    base = load_transfer_function(plan.volumes[0].transfer_functions[0])
    for item in plan.items():
        tf, record = plan.transfer_function(item, base, (0.0, 1.0))
        if item.variant == 0:
            assert tf is base
            continue
        assert abs(record["value_shift"]) <= 0.02 + 1e-12
        assert np.all(np.diff(tf.opacity_values) > 0)
        assert np.all((tf.opacity >= 0) & (tf.opacity <= 1))
        ratio = tf.opacity[base.opacity > 0] / base.opacity[base.opacity > 0]
        assert np.all((ratio >= 0.8 - 1e-9) & (ratio <= 1.2 + 1e-9) | (tf.opacity[base.opacity > 0] == 1.0))


def test_input_ranges_never_meet_the_reference(tmp_path):
    plan = load_plan(write_plan(tmp_path, input_spp=(1, 2, 4, 8), reference_spp=1024))
    ranges = [plan.reference_range()] + plan.input_ranges()
    flat = sorted(ranges)
    assert all(a[1] <= b[0] for a, b in zip(flat, flat[1:]))
    assert all(start >= INPUT_SAMPLE_BASE for start, _ in plan.input_ranges())


BAD_PLANS = {
    "fractions": (dict(splits="train = 0.5\ntest = 0.2"), "fractions must add up to 1"),
    "split by what": (dict(splits='train = 1.0\nby = "colour"'), "splits.by: must be one of"),
    "zero views": (dict(views=0), "views.per_volume: must be >= 1"),
    "spp ladder": (dict(input_spp=(1, 0)), "render.input_spp: expected a list of positive whole numbers"),
    "unknown key": (dict(extra="colour = 3"), "unknown key 'colour'"),
    "chunks with target": (dict(extra_render="reference_chunks = 2\nreference_min_psnr = 30.0"), "reference_chunks"),
    "former key shading": (dict(extra_render='shading = "surface"'), 'render.shading: is now called scattering; write scattering = "interface"'),
    "former key surface_gradient": (dict(extra_render="surface_gradient = 0.3"), "render.surface_gradient: is now called interface_gradient"),
}


@pytest.mark.parametrize("case", sorted(BAD_PLANS))
def test_bad_plan_is_one_line(tmp_path, case):
    options, expected = BAD_PLANS[case]
    path = write_plan(tmp_path, **options)
    with pytest.raises(UserError) as caught:
        load_plan(path)
    assert expected in str(caught.value) and str(path) in str(caught.value)


def test_a_plan_is_medical_only_with_a_medical_function_or_a_patient_space(tmp_path):
    """The demo volumes are in 3D-right-handed space and their functions are not medical; swapping in
    an HU preset marked medical = true makes the plan medical (it then carries the caution)."""
    path = write_plan(tmp_path / "a")
    assert not load_plan(path).medical
    text = path.read_text().replace("figurine_clay.toml", "hu_mineral.toml")
    (tmp_path / "b").mkdir()
    medical = tmp_path / "b" / "plan.toml"
    medical.write_text(text)
    assert load_plan(medical).medical
