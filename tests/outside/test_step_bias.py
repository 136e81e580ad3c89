"""The march's step bias, and its absence under the "track" estimator.

Sources: delta tracking (Woodcock et al. 1965) and ratio tracking (Novak, Selle and Jarosz 2014) are unbiased
for any majorant that bounds the extinction, so a tracked render cannot depend on ``step_mm``; a midpoint march
converges to the same image as its step shrinks. Transmittance of a homogeneous box: Beer-Lambert, exp(-sigma d)
along the exact chord (``tests/reference/media.py``). Per-pixel z uses the green channel only (channels of one
sample are correlated, so a sum of per-channel variances would not be the luminance's).
"""

import re
from pathlib import Path

import numpy as np
import pytest

import tracer

ROOT = Path(__file__).resolve().parents[2]


def lattice(tmp_path, estimator, step_mm, spp, seed):
    text = (ROOT / "examples" / "lattice.toml").read_text().replace("../", f"{ROOT.as_posix()}/")
    text = re.sub(r"step_mm = .*", f'step_mm = {step_mm!r}\nestimator = "{estimator}"', text)
    text = text.replace("width = 512", "width = 16").replace("height = 512", "height = 16")
    text = text.replace("fov_deg = 30.0", "fov_deg = 12.0")
    path = tmp_path / f"lattice_{estimator}_{step_mm}.toml"
    path.write_text(text)
    return tracer.render(path, spp=spp, seed=seed)


def green(frame):
    return frame["radiance"][..., 1].astype(float), frame["radiance_variance"][..., 1].astype(float)


@pytest.mark.slow
def test_track_has_no_step_bias_on_the_lattice(tmp_path):
    voxel = 0.1
    fine = green(lattice(tmp_path, "march", voxel / 16, 1024, 1))
    coarse = green(lattice(tmp_path, "march", voxel, 1024, 2))
    z_march = (coarse[0] - fine[0]) / np.sqrt(coarse[1] + fine[1])
    assert np.abs(z_march).max() > 4                      # the march at one voxel is measurably biased
    assert coarse[0].mean() > 1.05 * fine[0].mean()        # (about 10% too bright, measured)
    frame = lattice(tmp_path, "track", voxel, 4096, 3)
    tracked = green(frame)
    z = (tracked[0] - fine[0]) / np.sqrt(tracked[1] + fine[1])
    assert np.abs(z).max() < 4, np.abs(z).max()
    assert abs(tracked[0].mean() / fine[0].mean() - 1) < 0.005
    # under "track" the step only places the feature events: the radiance is the same, bit for bit
    other = lattice(tmp_path, "track", 4 * voxel, 64, 3)
    np.testing.assert_array_equal(lattice(tmp_path, "track", voxel, 64, 3)["radiance"], other["radiance"])
    assert not np.array_equal(lattice(tmp_path, "march", voxel, 64, 3)["event1_depth"], other["event1_depth"])
