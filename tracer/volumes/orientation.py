"""Which way a volume's axes point: in world space, and anatomically where the file names a patient space.

World space is built from the header's direction vectors alone (README, "Conventions"); the
NRRD ``space`` field only says what the world axes *mean*. In a patient space the world axes
carry anatomical names: ``right-anterior-superior`` (RAS) has +x toward the patient's right,
+y anterior, +z superior; ``left-posterior-superior`` (LPS, the DICOM patient frame) has +x
toward the left, +y posterior, +z superior; ``left-anterior-superior`` (LAS) +x left, +y
anterior, +z superior. (NRRD file format specification, teem: the ``space`` field.)
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: NRRD ``space`` values and their abbreviations, by canonical name.
SPACE_ALIASES = {
    "ras": "right-anterior-superior", "las": "left-anterior-superior", "lps": "left-posterior-superior",
    "rast": "right-anterior-superior-time", "last": "left-anterior-superior-time",
    "lpst": "left-posterior-superior-time",
}
#: Anatomical direction of world +x, +y, +z in each patient space (the "-time" variants alike).
ANATOMY = {
    "right-anterior-superior": ("right", "anterior", "superior"),
    "left-anterior-superior": ("left", "anterior", "superior"),
    "left-posterior-superior": ("left", "posterior", "superior"),
}
OPPOSITE = {"right": "left", "left": "right", "anterior": "posterior", "posterior": "anterior",
            "superior": "inferior", "inferior": "superior"}
#: Spaces of medical scanners: a volume in one of these is treated as a medical scan.
PATIENT_SPACES = tuple(ANATOMY) + tuple(f"{name}-time" for name in ANATOMY) + ("scanner-xyz", "scanner-xyz-time")


def normalise_space(value) -> str | None:
    """The canonical NRRD space name (lower case, abbreviations expanded), or None."""
    if value is None:
        return None
    text = str(value).strip().lower()
    if text.startswith("3d-"):
        return "3D-" + text[3:]
    return SPACE_ALIASES.get(text, text) or None


def anatomical_names(space: str | None) -> tuple[str, str, str] | None:
    """What world +x, +y, +z point toward in ``space``, or None when it is not an anatomical space."""
    if space is None:
        return None
    return ANATOMY.get(space.removesuffix("-time"))


def toward(direction, space: str | None) -> str:
    """A world direction in words: its dominant world axis with sign, and the anatomical name if any,
    e.g. "+x (right)" or "-y (posterior), tilted 12 deg"."""
    direction = np.asarray(direction, dtype=np.float64)
    unit = direction / np.linalg.norm(direction)
    axis = int(np.argmax(np.abs(unit)))
    sign = "+" if unit[axis] > 0 else "-"
    text = f"{sign}{'xyz'[axis]}"
    names = anatomical_names(space)
    if names is not None:
        name = names[axis] if unit[axis] > 0 else OPPOSITE[names[axis]]
        text += f" ({name})"
    tilt = float(np.degrees(np.arccos(min(1.0, abs(unit[axis])))))
    if tilt >= 0.5:
        text += f", tilted {tilt:.0f} deg"
    return text


@dataclass(frozen=True)
class AxisDirection:
    """Index axis ``axis`` (0, 1, 2 = i, j, k) of a volume: its world step and where it points."""

    axis: int
    step_mm: tuple[float, float, float]
    spacing_mm: float
    toward: str


def axis_directions(volume) -> list[AxisDirection]:
    """Where each index axis of ``volume`` points, in world terms and anatomically when its space says."""
    out = []
    for axis in range(3):
        step = volume.directions[axis]
        out.append(AxisDirection(axis=axis, step_mm=tuple(float(v) for v in step),
                                 spacing_mm=float(np.linalg.norm(step)), toward=toward(step, volume.space)))
    return out
