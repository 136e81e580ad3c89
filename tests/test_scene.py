"""Scene files: parsing, overrides, the environment image convention, one-line errors."""

import math

import numpy as np
import pytest

from tracer._kernels.shading import environment_radiance
from tracer.errors import UserError
from tracer.outputs.exr import write_image_exr
from tracer.rendering import render
from tracer.scene import ViewWarning, load_scene

BASE = """
[volume]
path = "{volume}"

[transfer_function]
path = "{tf}"

[camera]
position = [0.0, -120.0, 30.0]
target = [0.0, 0.0, 28.0]
width = 8
height = 6
{extra_camera}

[[lights]]
kind = "directional"
toward = [0.0, -1.0, 1.0]
irradiance = [1.0, 1.0, 1.0]

[environment]
kind = "constant"
radiance = [0.1, 0.1, 0.1]

[render]
spp = 2
{extra_render}
"""


def scene_file(tmp_path, root, extra_camera="", extra_render="", replace=None, append=""):
    text = BASE.format(volume=root / "sample_volumes" / "plume.nrrd", tf=root / "transfer_functions" / "plume_smoke.toml",
                       extra_camera=extra_camera, extra_render=extra_render) + append
    for old, new in (replace or {}).items():
        assert old in text
        text = text.replace(old, new)
    path = tmp_path / "scene.toml"
    path.write_text(text)
    return path


@pytest.mark.parametrize("name", ["figurine", "lattice", "plume"])
def test_examples_load_and_render(root, name):
    scene = load_scene(root / "examples" / f"{name}.toml").with_overrides(width=16, height=16)
    spp = 8
    frame = render(scene, spp=spp)
    assert frame["event1_hit"].mean() > 0.05            # the example's camera sees its volume
    assert np.isfinite(frame["radiance"]).all()
    # with K = 2 stratified thresholds (README, "The optical model"), event k exists when alpha passes threshold k,
    # so E[hit1 + hit2] = 2 alpha exactly: P(u1 < a) + P(u2 < a) = min(1, 2a) + max(0, 2a - 1) = 2a. Per sample the
    # sum of the two hits has variance at most 1/2, so the image mean lies within 4 standard errors of 2 x alpha
    assert scene.settings.events == 2
    hits = (frame["event1_hit"] + frame["event2_hit"]).astype(float)
    standard_error = np.sqrt(0.5 / spp / hits.size)
    assert abs(hits.mean() - 2 * frame["alpha"].astype(float).mean()) < 4 * standard_error


def test_overrides_and_defaults(root, tmp_path):
    scene = load_scene(scene_file(tmp_path, root))
    assert scene.settings.step_mm == pytest.approx(0.25)         # half the smallest spacing by default
    assert scene.settings.events == 2 and scene.settings.scattering == "graded"
    changed = scene.with_overrides(spp=7, seed=3, width=20, height=10)
    assert (changed.settings.spp, changed.settings.seed, changed.camera.width, changed.camera.height) == (7, 3, 20, 10)
    with pytest.raises(UserError, match="--spp"):
        scene.with_overrides(spp=0)


def test_inline_transfer_function(root, tmp_path):
    inline = '[transfer_function]\nopacity = [[0.0, 0.0], [1.0, 0.4]]\ncolor = [[0.0, [0.5, 0.5, 0.5]]]\n'
    path = scene_file(tmp_path, root, replace={f'[transfer_function]\npath = "{root / "transfer_functions" / "plume_smoke.toml"}"\n': inline})
    assert load_scene(path).transfer_function.opacity[-1] == 0.4


BAD_SCENES = {
    "unknown key": (dict(extra_render="sampels = 3"), "unknown key 'sampels' in [render]"),
    "spp zero": (dict(replace={"spp = 2": "spp = 0"}), "render.spp: must be >= 1"),
    "spp not a number": (dict(replace={"spp = 2": 'spp = "many"'}), "render.spp: expected a number"),
    "negative step": (dict(extra_render="step_mm = -0.5"), "render.step_mm: must be > 0.0"),
    "five events": (dict(extra_render="events = 5"), "render.events: must be <= 4"),
    "scattering unknown": (dict(extra_render='scattering = "toon"'), "render.scattering: must be one of"),
    "phase_g of one": (dict(extra_render="phase_g = 1.0"), "render.phase_g: must be <= 0.99"),
    "levels decreasing": (dict(extra_render="feature_levels = [0.7, 0.3]"), "levels must increase"),
    "level of one": (dict(extra_render="feature_levels = [1.0]"), "strictly between 0 and 1"),
    "fov too wide": (dict(extra_camera="fov_deg = 180.0"), "camera.fov_deg: must be <= 170.0"),
    "zero width": (dict(replace={"width = 8": "width = 0"}), "camera.width: must be >= 1"),
    "position equals target": (dict(replace={"position = [0.0, -120.0, 30.0]": "position = [0.0, 0.0, 28.0]"}),
                               "camera.position: equals the target"),
    "up along the view": (dict(extra_camera="up = [0.0, 120.0, -2.0]"), "camera.up: is parallel"),
    "negative irradiance": (dict(replace={"irradiance = [1.0, 1.0, 1.0]": "irradiance = [1.0, -1.0, 1.0]"}),
                            "lights[0].irradiance: entries must be >= 0.0"),
    "zero light direction": (dict(replace={"toward = [0.0, -1.0, 1.0]": "toward = [0.0, 0.0, 0.0]"}),
                             "lights[0].toward: must not be the zero vector"),
    "unknown light": (dict(replace={'kind = "directional"': 'kind = "area"'}), "lights[0].kind: must be one of"),
    "unknown environment": (dict(replace={'kind = "constant"': 'kind = "studio"'}), "environment.kind: must be one of"),
    "missing volume": (dict(replace={"plume.nrrd": "nothing.nrrd"}), "nothing.nrrd: file not found"),
    "broken TOML": (dict(append="[render\n"), "not valid TOML"),
    "background word": (dict(replace={"radiance = [0.1, 0.1, 0.1]": 'radiance = [0.1, 0.1, 0.1]\nbackground = "black"'}),
                        "environment.background: must be \"environment\" or an RGB triple"),
}


@pytest.mark.parametrize("case", sorted(BAD_SCENES))
def test_bad_scene_is_one_line_naming_file_and_field(root, tmp_path, case):
    options, expected = BAD_SCENES[case]
    path = scene_file(tmp_path, root, **options)
    with pytest.raises(UserError) as caught:
        load_scene(path)
    message = str(caught.value)
    assert "\n" not in message and expected in message, message
    assert str(tmp_path) in message


def test_resolution_over_the_memory_budget_is_refused(root, tmp_path, monkeypatch):
    monkeypatch.setenv("TRACER_MEMORY_BUDGET_MB", "50")
    path = scene_file(tmp_path, root, replace={"width = 8": "width = 4000", "height = 6": "height = 4000"})
    with pytest.raises(UserError, match="over the memory budget"):
        load_scene(path)


def test_view_that_misses_the_volume_warns(root, tmp_path):
    path = scene_file(tmp_path, root, replace={"target = [0.0, 0.0, 28.0]": "target = [0.0, -240.0, 30.0]"})
    with pytest.warns(ViewWarning, match="misses the volume"):
        load_scene(path)


def test_environment_image_follows_the_lat_long_convention(tmp_path, root):
    """Row 0 is +z; the left edge is azimuth 0 (+x); azimuth grows toward +y (README, "Conventions")."""
    height, width = 8, 16
    image = np.zeros((height, width, 3), np.float32)
    rows, cols = np.mgrid[0:height, 0:width]
    image[..., 0] = rows
    image[..., 1] = cols
    path = write_image_exr(tmp_path / "env.exr", image)
    scene = load_scene(scene_file(tmp_path, root, replace={'kind = "constant"\nradiance = [0.1, 0.1, 0.1]':
                                                              f'kind = "image"\npath = "{path}"'}))
    env = scene.environment_image
    colors = np.zeros((3, 3))

    def look(direction):
        d = np.asarray(direction, float)
        d /= np.linalg.norm(d)
        return environment_radiance(2, colors, env, *d)

    assert look([0.0, 0.0, 1.0])[0] == pytest.approx(0.0, abs=1e-9)              # +z: top row
    assert look([0.0, 0.0, -1.0])[0] == pytest.approx(height - 1, abs=1e-9)      # -z: bottom row
    horizon = look([1.0, 0.0, 0.0])
    assert horizon[0] == pytest.approx(height / 2 - 0.5)
    assert horizon[1] == pytest.approx((width - 1) / 2)            # azimuth 0 wraps between the edges
    toward_y = look([0.0, 1.0, 0.0])
    assert toward_y[1] == pytest.approx(width / 4 - 0.5)          # azimuth 90 degrees: a quarter across
    toward_x_then_y = look([math.cos(0.3), math.sin(0.3), 0.0])
    assert toward_x_then_y[1] == pytest.approx(0.3 / (2 * math.pi) * width - 0.5)


def test_the_default_camera_is_in_front_of_and_above_the_volume():
    """README, "Orientation": centre + 3.2 bounding radii toward -y and 1.2 toward +z, looking at the
    centre with +z up; the scene records the volume's space in its meta."""
    from tests.helpers import blob_volume
    from tracer.scene.camera import default_view

    volume = blob_volume()
    view = default_view(volume)
    offset = np.subtract(view.position, volume.center) / volume.bounding_radius
    np.testing.assert_allclose(offset, [0.0, -3.2, 1.2], atol=1e-12)
    expected = -offset / np.linalg.norm(offset)
    np.testing.assert_allclose(view.forward, expected, atol=1e-12)
    assert view.up[2] > 0.9 and abs(np.dot(view.up, view.forward)) < 1e-12
