"""Constants the README defines, read from the README's own words (not copied from the package).

Each pattern quotes the sentence it reads, so a change of the documented value changes what the references
use, and a change of the wording fails loudly here instead of silently keeping an old number.
"""

from __future__ import annotations

import functools
import re
from pathlib import Path

README = Path(__file__).resolve().parents[2] / "README.md"


@functools.lru_cache(maxsize=None)
def text() -> str:
    return README.read_text(encoding="utf-8")


def number(pattern: str) -> float:
    """The number captured by ``pattern`` (one group) in the README; exactly one match is required."""
    found = re.findall(pattern, text())
    if len(found) != 1:
        raise AssertionError(f"README: expected one match of {pattern!r}, found {len(found)}")
    return float(found[0])


# "Opacity 1 is capped at 1 - 1e-6."
def opacity_cap() -> float:
    return 1.0 - number(r"Opacity 1 is capped at 1 - ([0-9.e-]+)\.")


# "once its transmittance falls below 0.02, one Russian-roulette decision ends it or, with probability 0.25,
#  lets it go on with weight 4"
def roulette_below() -> float:
    return number(r"once its transmittance falls below ([0-9.]+), one Russian-roulette decision")


def roulette_survival() -> float:
    return number(r"with probability ([0-9.]+), lets it go on with weight")


# "horizon to ground linearly below it, reaching the ground colour at z = -0.125"
def sky_ground_z() -> float:
    return number(r"reaching the ground colour at z = (-[0-9]+\.[0-9]+)")


# "Camera rays stop once all their events are found and the transmittance is below 1e-5 (alpha is then exact to 1e-5)"
def alpha_exactness() -> float:
    return number(r"alpha is then exact to ([0-9.e-]+)\)")


# "`(radiance - background_part) / (albedo + 0.001)`"
def illumination_epsilon() -> float:
    return number(r"`\(radiance - background_part\) / \(albedo \+ ([0-9.e-]+)\)`")


# "differs from that pixel's event-1 depth by more than 5% of it plus 2 mean voxel spacings"
def disocclusion_tolerance() -> tuple[float, float]:
    fraction = number(r"differs from that pixel's event-1 depth by more than ([0-9.]+)% of it plus [0-9.]+ mean voxel")
    spacings = number(r"differs from that pixel's event-1 depth by more than [0-9.]+% of it plus ([0-9.]+) mean voxel")
    return fraction / 100.0, spacings
