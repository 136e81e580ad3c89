"""Sequences (README, "Sequences"): camera paths, motion vectors, disocclusion, per-frame noise.

Sources: a camera turning about its own centre moves every image point by the homography K R K^-1 (Hartley and
Zisserman, Multiple View Geometry, 2004), built here from the cameras' own look-at frames; a moving camera moves
each pixel's mean event-1 point from its projection in this frame to its projection in the previous one, both
computed here with the pinhole of ``tests/reference/camera.py``.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

from tests.cli.cli_helpers import assert_user_error, invoke
from tests.reference.camera import Pinhole

ROOT = Path(__file__).resolve().parents[1]
SIZE = 48


def scene_file(tmp_path: Path, sequence: str, spp: int = 4, name: str = "seq.toml") -> Path:
    text = f"""[volume]
path = "{ROOT}/sample_volumes/figurine.nrrd"
[transfer_function]
path = "{ROOT}/transfer_functions/figurine_clay.toml"
[camera]
position = [45.0, -105.0, 55.0]
target = [0.0, 0.0, 26.0]
fov_deg = 30.0
width = {SIZE}
height = {SIZE + 8}
[[lights]]
kind = "directional"
toward = [-0.6, -1.0, 1.2]
irradiance = [2.6, 2.5, 2.3]
[environment]
kind = "sky"
[render]
spp = {spp}
step_mm = 0.2
[sequence]
{sequence}
"""
    path = tmp_path / name
    path.write_text(text)
    return path


def frames(folder: Path, n: int) -> list[dict]:
    out = []
    for k in range(n):
        with np.load(folder / f"frame{k:04d}.npz") as archive:
            out.append({key: archive[key] for key in archive.files})
    return out


def keys_table(keys) -> str:
    return 'kind = "keys"\n' + "".join(f"[[sequence.keys]]\nposition = {list(p)}\ntarget = {list(t)}\n" for p, t in keys)


def turned(point, about, degrees):
    a = math.radians(degrees)
    x, y = point[0] - about[0], point[1] - about[1]
    return (about[0] + x * math.cos(a) - y * math.sin(a), about[1] + x * math.sin(a) + y * math.cos(a), point[2])


def test_a_camera_turning_about_its_centre_moves_pixels_by_the_homography(tmp_path):
    position, target = (45.0, -105.0, 55.0), (0.0, 0.0, 26.0)
    path = scene_file(tmp_path, keys_table([(position, target), (position, turned(target, position, 2.0))]))
    result = invoke("sequence", path, "--out", tmp_path / "out", "--frames", 2)
    assert result.exit_code == 0, result.output
    first, second = frames(tmp_path / "out", 2)
    assert np.all(first["motion"] == 0) and np.all(first["disocclusion"] == 0)
    cameras = [Pinhole(position, t, fov_deg=30.0, width=SIZE, height=SIZE + 8) for t in (target, turned(target, position, 2.0))]

    def intrinsics(c):
        focal = (c.height / 2) / c.half_height
        return np.array([[focal, 0, c.width / 2], [0, focal, c.height / 2], [0, 0, 1.0]])

    def rotation(c):                                  # world -> camera, x right, y down, z forward
        return np.stack([c.right, -c.up, c.forward])
    k = intrinsics(cameras[0])
    homography = k @ rotation(cameras[0]) @ rotation(cameras[1]).T @ np.linalg.inv(k)
    hit = second["event1_hit"] > 0
    assert hit.mean() > 0.2
    rows_cols = cameras[1].project(second["event1_position"][hit].astype(np.float64))
    now = np.stack([rows_cols[:, 1], rows_cols[:, 0], np.ones(len(rows_cols))], axis=-1)
    mapped = now @ homography.T
    expected = mapped[:, :2] / mapped[:, 2:] - now[:, :2]
    assert np.abs(expected).max() > 1.0                                  # 2 degrees: about 4 pixels here
    assert np.abs(second["motion"][hit] - expected).max() < 0.01


def test_a_moving_camera_reprojects_each_mean_event_point(tmp_path):
    keys = [((45.0, -105.0, 55.0), (0.0, 0.0, 26.0)), ((49.0, -103.0, 56.0), (1.0, 0.0, 26.5))]
    path = scene_file(tmp_path, keys_table(keys), spp=8)
    assert invoke("sequence", path, "--out", tmp_path / "out", "--frames", 2).exit_code == 0
    _, second = frames(tmp_path / "out", 2)
    cameras = [Pinhole(p, t, fov_deg=30.0, width=SIZE, height=SIZE + 8) for p, t in keys]
    visible = (second["event1_hit"] > 0) & (second["disocclusion"] == 0)
    assert visible.mean() > 0.2
    points = second["event1_position"][visible].astype(np.float64)
    before, now = cameras[0].project(points), cameras[1].project(points)
    expected = (before - now)[:, ::-1]                                   # (row, col) -> (x, y)
    assert np.abs(expected).max() > 1.0
    assert np.abs(second["motion"][visible] - expected).max() < 0.01
    # the matrices in meta follow their stated convention: they put the points where the pinhole does
    import json

    meta = json.loads(str(second["meta"]))["sequence"]
    homogeneous = np.concatenate([points, np.ones((len(points), 1))], axis=1)
    pixels = homogeneous @ np.asarray(meta["world_to_camera"]).T @ np.asarray(meta["projection"]).T
    np.testing.assert_allclose(pixels[:, :2] / pixels[:, 2:3], now[:, ::-1], atol=1e-6)
    assert 0 < second["disocclusion"].max() <= 1                          # the silhouette uncovers some background


@pytest.mark.slow
def test_frames_have_independent_noise_unless_asked(tmp_path):
    still = keys_table([((45.0, -105.0, 55.0), (0.0, 0.0, 26.0))] * 2)
    path = scene_file(tmp_path, still, spp=2)
    path.write_text(path.read_text().replace(f"width = {SIZE}\nheight = {SIZE + 8}", "width = 112\nheight = 112"))
    assert invoke("sequence", path, "--out", tmp_path / "own", "--frames", 2).exit_code == 0
    assert invoke("sequence", path, "--out", tmp_path / "same", "--frames", 2, "--same-noise").exit_code == 0
    a, b = frames(tmp_path / "own", 2)
    c, d = frames(tmp_path / "same", 2)
    assert np.array_equal(c["radiance"], d["radiance"]) and np.array_equal(a["radiance"], c["radiance"])
    import tracer

    scene = tracer.load_scene(path)
    high = tracer.render(scene, spp=128, first_sample=2**41)
    deviation = np.sqrt(high["radiance_variance"].astype(float).mean(-1) * 128)
    keep = (high["alpha"] > 0.01) & (deviation > 0)
    za = ((a["radiance"].mean(-1) - high["radiance"].mean(-1)) / np.where(keep, deviation, 1))[keep]
    zb = ((b["radiance"].mean(-1) - high["radiance"].mean(-1)) / np.where(keep, deviation, 1))[keep]
    assert keep.sum() > 3000
    correlation = np.corrcoef(za, zb)[0, 1]
    print(f"frame error correlation {correlation:.4f} over {keep.sum()} pixels")
    assert abs(correlation) < 0.05                                       # 1/sqrt(n) is under 0.02 here
    assert np.all(b["motion"] == 0)                                      # a still camera does not move


def test_bad_sequences_are_one_line_and_write_nothing(tmp_path, monkeypatch):
    out = tmp_path / "out"
    one_key = scene_file(tmp_path, keys_table([((45.0, -105.0, 55.0), (0.0, 0.0, 26.0))]), name="one.toml")
    assert_user_error(invoke("sequence", one_key, "--out", out), "sequence.keys: a keyed path needs at least 2")
    flat = scene_file(tmp_path, 'kind = "orbit"\ndegrees = 0.0', name="flat.toml")
    assert_user_error(invoke("sequence", flat, "--out", out), "sequence.degrees: a zero-length orbit does not move")
    none = scene_file(tmp_path, "", name="none.toml")
    none.write_text(none.read_text().replace("[sequence]\n", ""))
    assert_user_error(invoke("sequence", none, "--out", out), "[sequence]: missing")
    orbit = scene_file(tmp_path, 'kind = "orbit"\ndegrees = 10.0', name="orbit.toml")
    assert_user_error(invoke("sequence", orbit, "--out", out, "--frames", 1), "--frames: a sequence needs at least 2")
    import shutil

    monkeypatch.setattr(shutil, "disk_usage", lambda path: shutil._ntuple_diskusage(10**9, 10**9 - 1000, 1000))
    assert_user_error(invoke("sequence", orbit, "--out", out, "--frames", 50), "the sequence needs up to")
    assert not out.exists() or not any(out.iterdir())


ORBIT = 'kind = "orbit"\ndegrees = 8.0'          # 2 degrees per frame over 5 frames


@pytest.fixture(scope="module")
def orbit(tmp_path_factory):
    """The figurine orbit at 2 degrees per frame: a 256-spp reference sequence, 2-spp inputs, and the spatial and
    temporal baselines on them."""
    tmp = tmp_path_factory.mktemp("orbit")
    text = scene_file(tmp, ORBIT).read_text().replace(f"width = {SIZE}\nheight = {SIZE + 8}", "width = 64\nheight = 64")
    path = tmp / "orbit.toml"
    path.write_text(text)
    for args in (("sequence", path, "--out", tmp / "reference", "--frames", 5, "--spp", 256),
                 ("sequence", path, "--out", tmp / "input", "--frames", 5, "--spp", 2, "--seed", 9),
                 ("denoise", tmp / "input", "--out", tmp / "spatial"),
                 ("denoise", tmp / "input", "--out", tmp / "temporal", "--temporal-alpha", 0.2)):
        result = invoke(*args)
        assert result.exit_code == 0, result.output
    return tmp


def display(radiance):
    """IEC 61966-2-1 on radiance clamped to [0, 1] (exposure 0)."""
    x = np.clip(np.asarray(radiance, np.float64), 0, 1)
    return np.where(x <= 0.0031308, 12.92 * x, 1.055 * x ** (1 / 2.4) - 0.055)


def bilinear(image, motion):
    """The previous image at pixel + motion, bilinear, clamped at the borders; and where that lies inside."""
    height, width = image.shape[:2]
    y, x = np.mgrid[0:height, 0:width].astype(float)
    x, y = x + motion[..., 0], y + motion[..., 1]
    inside = (x >= 0) & (x <= width - 1) & (y >= 0) & (y <= height - 1)
    x, y = np.clip(x, 0, width - 1), np.clip(y, 0, height - 1)
    x0, y0 = np.minimum(x.astype(int), width - 2), np.minimum(y.astype(int), height - 2)
    fx, fy = (x - x0)[..., None], (y - y0)[..., None]
    return ((1 - fx) * (1 - fy) * image[y0, x0] + fx * (1 - fy) * image[y0, x0 + 1]
            + (1 - fx) * fy * image[y0 + 1, x0] + fx * fy * image[y0 + 1, x0 + 1]), inside


@pytest.mark.slow
def test_the_previous_converged_frame_warped_by_motion_gives_the_current_one(orbit):
    previous, current = frames(orbit / "reference", 2)
    warped, inside = bilinear(previous["radiance"].astype(float), current["motion"].astype(float))
    valid = (current["disocclusion"] == 0) & inside
    assert valid.mean() > 0.9 and (current["event1_hit"][valid] > 0).mean() > 0.25
    mse = np.mean((display(warped) - display(current["radiance"]))[valid] ** 2)
    assert 10 * math.log10(1 / mse) >= 40.0


@pytest.mark.slow
def test_score_sequence_follows_its_formulas_and_the_temporal_baseline_lowers_temporal_error(orbit, tmp_path):
    import json

    result = invoke("score-sequence", orbit / "reference", orbit / "spatial", "--json", tmp_path / "spatial.json",
                    "--csv", tmp_path / "s.csv", "--plot", tmp_path / "s.png", "--gif", tmp_path / "s.gif",
                    "--inputs", orbit / "input")
    assert result.exit_code == 0, result.output
    spatial = json.loads((tmp_path / "spatial.json").read_text())
    references, candidates = frames(orbit / "reference", 5), frames(orbit / "spatial", 5)
    for t in range(1, 5):
        r0, r1 = display(references[t - 1]["radiance"]), display(references[t]["radiance"])
        c0, c1 = display(candidates[t - 1]["radiance"]), display(candidates[t]["radiance"])
        valid = references[t]["disocclusion"] == 0
        temporal = 10 * math.log10(1 / np.mean(((c1 - c0) - (r1 - r0))[valid] ** 2))
        assert spatial["frames"][t]["temporal_psnr_db"] == pytest.approx(temporal, abs=1e-9)
        wr, inside = bilinear(r0, references[t]["motion"].astype(float))
        wc, _ = bilinear(c0, references[t]["motion"].astype(float))
        keep = valid & inside
        flicker = 10 * math.log10(1 / np.mean(((c1 - wc) - (r1 - wr))[keep] ** 2))
        assert spatial["frames"][t]["flicker_psnr_db"] == pytest.approx(flicker, abs=1e-9)
    assert spatial["frames"][0]["temporal_psnr_db"] is None
    import imageio.v3 as iio

    gif = iio.imread(tmp_path / "s.gif", index=None)
    assert gif.shape[0] == 5 and gif.shape[2] == 3 * 64 + 2 * 4                 # input | candidate | reference
    assert invoke("score-sequence", orbit / "reference", orbit / "temporal", "--json", tmp_path / "t.json").exit_code == 0
    temporal = json.loads((tmp_path / "t.json").read_text())
    print(f"spatial {spatial['mean']}, temporal {temporal['mean']}")
    assert temporal["mean"]["temporal_psnr_db"] > spatial["mean"]["temporal_psnr_db"] + 3.0
    assert temporal["mean"]["flicker_psnr_db"] > spatial["mean"]["flicker_psnr_db"] + 3.0


@pytest.mark.slow
def test_kill_9_during_a_sequence_then_resume_loses_nothing(tmp_path):
    import os
    import signal
    import subprocess
    import sys
    import time

    path = scene_file(tmp_path, 'kind = "orbit"\ndegrees = 10.0', spp=16)
    command = [sys.executable, "-m", "tracer", "sequence", str(path), "--frames", "6"]
    out = tmp_path / "killed"
    process = subprocess.Popen(command + ["--out", str(out)], stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                               start_new_session=True)
    deadline = time.time() + 120
    while time.time() < deadline and process.poll() is None and not (out / "frame0002.npz").exists():
        time.sleep(0.02)
    assert process.poll() is None, "the sequence finished before it could be killed"
    os.killpg(process.pid, signal.SIGKILL)
    process.wait()
    assert not (out / "frame0005.npz").exists()
    assert_user_error(invoke("sequence", path, "--frames", 6, "--out", out), "already holds", "--resume")
    resumed = subprocess.run(command + ["--out", str(out), "--resume"], capture_output=True, text=True)
    assert resumed.returncode == 0, resumed.stderr
    assert invoke("sequence", path, "--frames", 6, "--out", tmp_path / "whole", "--threads", 1).exit_code == 0
    for a, b in zip(frames(out, 6), frames(tmp_path / "whole", 6)):
        for key in a:
            if key != "meta":
                assert np.array_equal(a[key], b[key]), key          # and 2 threads against 1: the same bits
    assert not list(out.glob(".frame*"))


@pytest.mark.slow
def test_disocclusion_marks_exactly_the_band_an_occluder_uncovers(tmp_path):
    """A pillar in front of a wall, the camera sliding 16 mm sideways: the band of wall hidden behind the pillar from
    the first camera and seen from the second (and the strip at the image's edge the first camera did not see),
    from ray-box intersections and projections computed here."""
    from tests.reference.files import write_transfer, write_volume
    from tests.reference.media import Box

    spacing = 0.5
    xs, ys, zs = np.arange(-20, 20.01, spacing), np.arange(-2, 26.01, spacing), np.arange(-10, 10.01, spacing)
    x, y, z = np.meshgrid(xs, ys, zs, indexing="ij")
    pillar = Box((-2.25, -0.25, -10.25), (2.25, 4.25, 10.25))         # faces halfway between voxel centres
    wall = Box((-20.25, 19.75, -10.25), (20.25, 24.25, 10.25))
    inside = lambda box: np.all([(v >= lo) & (v <= hi) for v, lo, hi in zip((x, y, z), box.low, box.high)], axis=0)
    field = (inside(pillar) | inside(wall)).astype(np.float32)
    volume = write_volume(tmp_path / "scene.nrrd", field, np.eye(3) * spacing, (xs[0], ys[0], zs[0]))
    transfer = write_transfer(tmp_path / "solid.toml", [[0.0, 0.0], [0.45, 0.0], [0.55, 0.999], [1.0, 0.999]],
                              [[0.0, [0.6, 0.6, 0.6]], [1.0, [0.6, 0.6, 0.6]]])
    positions = [(0.0, -60.0, 0.0), (16.0, -60.0, 0.0)]
    targets = [(0.0, 20.0, 0.0), (16.0, 20.0, 0.0)]
    text = f"""[volume]
path = "{volume}"
[transfer_function]
path = "{transfer}"
[camera]
position = {list(positions[0])}
target = {list(targets[0])}
fov_deg = 20.0
width = 96
height = 48
[[lights]]
kind = "directional"
toward = [0.0, -1.0, 0.3]
irradiance = [1.0, 1.0, 1.0]
[render]
spp = 16
step_mm = 0.1
scattering = "interface"
[sequence]
{keys_table(list(zip(positions, targets)))}
"""
    path = tmp_path / "occluder.toml"
    path.write_text(text)
    result = invoke("sequence", path, "--out", tmp_path / "out", "--frames", 2)
    assert result.exit_code == 0, result.output
    second = frames(tmp_path / "out", 2)[1]

    cameras = [Pinhole(p, t, fov_deg=20.0, width=96, height=48) for p, t in zip(positions, targets)]
    from tests.reference import readme

    fraction, spacings = readme.disocclusion_tolerance()

    def first_hit(origin, d):
        entries = [box.chord(origin, d) for box in (pillar, wall)]
        hits = [t0 for t0, t1 in entries if t1 > t0]
        return min(hits) if hits else None

    def uncovered(row, col, jr, jc) -> bool:
        """The surface point this ray of the second camera sees was not what the first camera saw there: it falls
        off the first image, or something else lies in front of it."""
        d = cameras[1].rays(row, col, jr, jc)
        t = first_hit(cameras[1].position, d)
        if t is None:
            return False                                          # background: no event to test
        point = cameras[1].position + t * d
        r, c = cameras[0].project(point)
        if not (0 <= r < 48 and 0 <= c < 96):
            return True
        back = point - cameras[0].position
        seen = first_hit(cameras[0].position, back / np.linalg.norm(back))
        return abs(np.linalg.norm(back) - seen) > fraction * seen + spacings * spacing     # the README's tolerance

    band = np.zeros((48, 96), int)
    for row in range(48):
        for col in range(96):
            band[row, col] = sum(uncovered(row, col, jr, jc) for jr in (0.05, 0.95) for jc in (0.05, 0.95))
    whole = band == 4                                            # pixels wholly in the band
    # pixels wholly out of it, and not next to a pixel that is partly in it: the first frame's pixel a point next
    # to the band lands on straddled the pillar's silhouette, and its mean depth mixes both surfaces (README)
    touched = band > 0
    near = touched | np.roll(touched, 1, axis=1) | np.roll(touched, -1, axis=1)
    clear = (band == 0) & ~near
    assert whole.sum() >= 100 and clear.sum() > 3000             # a band several pixels wide
    disocclusion = second["disocclusion"]
    assert np.all(disocclusion[whole] > 0.5), disocclusion[whole].min()
    assert np.all(disocclusion[clear] <= 0.5), disocclusion[clear].max()
    assert (disocclusion[clear] == 0).mean() > 0.95                              # silhouettes aside, exactly 0
    assert (disocclusion[near & (band == 0)] > 0.5).sum() <= 2 * 48                # at most one pixel either side


def test_a_changing_volume_renders_each_time_step_with_its_own_samples(tmp_path):
    from tests.reference.files import write_volume

    rng = np.random.default_rng(5)
    steps = []
    for k in range(3):
        field = np.clip(rng.normal(0.3 + 0.1 * k, 0.2, (24, 24, 24)), 0, 1).astype(np.float32)
        steps.append(write_volume(tmp_path / f"step{k}.nrrd", field, np.eye(3) * 0.5, (-6.0, -6.0, -6.0)))
    odd = write_volume(tmp_path / "odd.nrrd", np.zeros((24, 24, 20), np.float32), np.eye(3) * 0.5, (-6.0, -6.0, -6.0))
    volumes = ", ".join(f'"{p}"' for p in steps)

    def scene(volume_list, name):
        text = f"""[volume]
path = "{steps[0]}"
[transfer_function]
path = "{ROOT}/transfer_functions/plume_smoke.toml"
[camera]
position = [0.0, -40.0, 10.0]
target = [0.0, 0.0, 0.0]
width = 24
height = 20
[[lights]]
kind = "directional"
toward = [0.3, -0.5, 1.0]
irradiance = [2.0, 2.0, 2.0]
[render]
spp = 3
[sequence]
kind = "still"
stride = 2
volumes = [{volume_list}]
"""
        path = tmp_path / name
        path.write_text(text)
        return path

    path = scene(volumes, "changing.toml")
    assert invoke("sequence", path, "--out", tmp_path / "out", "--frames", 5).exit_code == 0
    import dataclasses

    import tracer

    base = tracer.load_scene(path)
    for k, frame in enumerate(frames(tmp_path / "out", 5)):
        step = tracer.load_volume(steps[min(k // 2, 2)])              # stride 2: steps 0, 0, 1, 1, 2
        alone = tracer.render(dataclasses.replace(base, volume=step), spp=3, first_sample=3 * k)
        assert np.array_equal(frame["radiance"], alone["radiance"]), k
        assert np.all(frame["motion"] == 0)
    bad = scene(f'"{steps[0]}", "{odd}"', "mismatched.toml")
    out = tmp_path / "bad"
    assert_user_error(invoke("sequence", bad, "--out", out, "--frames", 4), "odd.nrrd", "[sequence] volumes",
                      "every time step must share one grid")
    assert not out.exists() or not any(out.iterdir())
