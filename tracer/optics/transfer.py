"""Transfer functions: scalar value -> albedo and opacity per reference length, and baking.

A transfer function is piecewise linear in the scalar value between its control points and
clamped outside them. Opacity ``a`` per reference length ``l`` becomes extinction
``sigma = -ln(1 - a) / l`` (opacity correction, so a render does not depend on the step size;
Engel et al., *Real-Time Volume Graphics*, 2006).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import NamedTuple

import numpy as np

from ..errors import UserError

#: Opacity is capped just below 1 so that extinction stays finite (13.8 per reference length).
MAX_OPACITY = 1.0 - 1e-6
#: Entries of a baked lookup table.
DEFAULT_TABLE_SIZE = 4096
SCALES = ("raw", "HU")


class TransferArrays(NamedTuple):
    """What kernels see of a transfer function.

    albedo : (n, 3) float32 linear RGB;  extinction : (n,) float32 per mm;
    lookup : (2,) float64 ``[low, entries per unit value]``; entry ``e`` holds value ``low + e / lookup[1]``;
    emission : (n, 3) float32 emitted radiance (linear RGB, scale applied); emitting : whether any entry is above 0.
    """

    albedo: np.ndarray
    extinction: np.ndarray
    lookup: np.ndarray
    emission: np.ndarray
    emitting: bool


@dataclass(frozen=True, eq=False)
class TransferFunction:
    """Control points of opacity and albedo over scalar values.

    Parameters
    ----------
    opacity_values, opacity : (n,) arrays
        Increasing scalar values and the opacity per ``reference_length_mm`` at each, in [0, 1].
    color_values : (m,) array; colors : (m, 3) array
        Increasing scalar values and linear albedo in [0, 1].
    reference_length_mm : float
        Length over which ``opacity`` is the fraction of light absorbed or scattered.
    name, scale, notes : str
        ``scale`` is ``"HU"`` for presets on the Hounsfield scale, ``"raw"`` otherwise.
    medical : bool
        Made for medical scans: renders with it carry the medical caution (README).
    emission_values, emissions : (k,) and (k, 3) arrays, optional
        Increasing scalar values and the emitted radiance (linear RGB, >= 0) at each, times ``emission_scale``;
        none: the medium does not glow.
    temperature_values, temperatures : (k,) arrays, optional
        Instead of emission points: increasing scalar values and a temperature (kelvin, >= 0) at each; the
        medium glows as a blackbody at the interpolated temperature (:func:`tracer.optics.blackbody.blackbody_rgb`,
        W m^-2 sr^-1), times ``emission_scale``.
    """

    opacity_values: np.ndarray
    opacity: np.ndarray
    color_values: np.ndarray
    colors: np.ndarray
    reference_length_mm: float = 1.0
    name: str = "unnamed"
    scale: str = "raw"
    notes: str = ""
    source: str = field(default="<inline>")
    medical: bool = False
    emission_values: np.ndarray | None = None
    emissions: np.ndarray | None = None
    emission_scale: float = 1.0
    temperature_values: np.ndarray | None = None
    temperatures: np.ndarray | None = None

    def opacity_at(self, values) -> np.ndarray:
        """Opacity per reference length at ``values`` (piecewise linear, clamped)."""
        return np.interp(np.asarray(values, dtype=np.float64), self.opacity_values, self.opacity)

    def albedo_at(self, values) -> np.ndarray:
        """(..., 3) linear albedo at ``values``."""
        values = np.asarray(values, dtype=np.float64)
        return np.stack([np.interp(values, self.color_values, self.colors[:, c]) for c in range(3)], axis=-1)

    def emission_at(self, values) -> np.ndarray:
        """(..., 3) emitted radiance at ``values`` (``emission_scale`` applied); zero without emission points."""
        values = np.asarray(values, dtype=np.float64)
        if self.temperature_values is not None:
            from .blackbody import blackbody_rgb

            return self.emission_scale * blackbody_rgb(np.interp(values, self.temperature_values, self.temperatures))
        if self.emission_values is None:
            return np.zeros(values.shape + (3,))
        return self.emission_scale * np.stack(
            [np.interp(values, self.emission_values, self.emissions[:, c]) for c in range(3)], axis=-1)

    def extinction_at(self, values) -> np.ndarray:
        """Extinction per mm at ``values``: ``-ln(1 - opacity) / reference_length_mm``."""
        return opacity_to_extinction(self.opacity_at(values), self.reference_length_mm)

    @property
    def span(self) -> tuple[float, float]:
        """The range of scalar values where the function has control points."""
        low = min(self.opacity_values[0], self.color_values[0])
        high = max(self.opacity_values[-1], self.color_values[-1])
        return float(low), float(high)

    def bake(self, low: float, high: float, n_entries: int = DEFAULT_TABLE_SIZE) -> TransferArrays:
        """Lookup tables over the data range [low, high], sampled at ``n_entries`` evenly spaced values.

        Kernels interpolate linearly between entries. Extinction is tabulated (not opacity),
        so the table is exact at every entry and the step size never enters.
        """
        if not high > low:
            high = low + 1.0
        values = np.linspace(low, high, n_entries)
        emission = np.ascontiguousarray(self.emission_at(values), dtype=np.float32)
        return TransferArrays(
            albedo=np.ascontiguousarray(self.albedo_at(values), dtype=np.float32),
            extinction=np.ascontiguousarray(self.extinction_at(values), dtype=np.float32),
            lookup=np.array([low, (n_entries - 1) / (high - low)], dtype=np.float64),
            emission=emission, emitting=bool(emission.max() > 0),
        )

    def to_dict(self) -> dict:
        return {
            "name": self.name,
            "reference_length_mm": self.reference_length_mm,
            "scale": self.scale,
            **({"medical": True} if self.medical else {}),
            "opacity": [[float(v), float(a)] for v, a in zip(self.opacity_values, self.opacity)],
            "color": [[float(v), [float(x) for x in c]] for v, c in zip(self.color_values, self.colors)],
            **({"emission": [[float(v), [float(x) for x in c]] for v, c in zip(self.emission_values, self.emissions)],
                "emission_scale": self.emission_scale} if self.emission_values is not None else {}),
            **({"temperature": [[float(v), float(k)] for v, k in zip(self.temperature_values, self.temperatures)],
                "emission_scale": self.emission_scale} if self.temperature_values is not None else {}),
        }


def opacity_to_extinction(opacity, reference_length_mm: float = 1.0) -> np.ndarray:
    """``sigma = -ln(1 - a) / l`` with ``a`` capped at :data:`MAX_OPACITY` (Engel et al. 2006)."""
    opacity = np.minimum(np.asarray(opacity, dtype=np.float64), MAX_OPACITY)
    return -np.log1p(-opacity) / reference_length_mm


#: Presets of an earlier release and what they are called now.
FORMER_PRESETS = {"ct_bone.toml": "hu_mineral.toml", "ct_soft_tissue.toml": "hu_translucent_tissue.toml"}


def load_transfer_function(path) -> TransferFunction:
    """Read and validate a transfer-function TOML file (format in the README)."""
    from ..io.tomlfile import read_toml

    path = Path(path)
    if not path.exists() and path.name in FORMER_PRESETS:
        raise UserError(f"{path}: file not found; the preset {path.name} is now {FORMER_PRESETS[path.name]} "
                        "(same folder, new colours)")
    return parse_transfer_function(read_toml(path), path)


def parse_transfer_function(data: dict, source="<inline>") -> TransferFunction:
    """Validate a parsed transfer-function table; errors name the file, the key and the entry."""
    from ..io.tomlfile import Table, check_vector

    table = Table(data, source)
    name = table.string("name", "unnamed")
    reference = table.number("reference_length_mm", 1.0, low=0.0, low_open=True)
    scale = table.string("scale", "raw", choices=SCALES)
    notes = table.string("notes", "")
    medical = table.boolean("medical", False)
    opacity_points = table.raw("opacity")
    color_points = table.raw("color")
    emission_points = table.raw("emission", None)
    temperature_points = table.raw("temperature", None)
    if emission_points is not None and temperature_points is not None:
        raise table.error("temperature", "give either emission or temperature points, not both")
    emission_scale = table.number("emission_scale", 1.0, low=0.0)
    table.finish()

    def points(key, entries, parse):
        if not isinstance(entries, list) or len(entries) < 1:
            raise table.error(key, "expected a list of [value, ...] control points")
        values, payload = [], []
        for index, entry in enumerate(entries):
            where = f"{table.where(key)}[{index}]"
            if not isinstance(entry, list) or len(entry) != 2:
                second = {"opacity": "opacity", "temperature": "kelvin"}.get(key, "[r, g, b]")
                raise UserError(f"{where}: expected [value, {second}], got {entry!r}")
            value = check_vector([entry[0]], where, length=1)[0]
            if values and value <= values[-1]:
                raise UserError(f"{where}: values must increase, but {value!r} follows {values[-1]!r}")
            values.append(value)
            payload.append(parse(entry[1], where))
        return np.array(values), np.array(payload)

    def parse_opacity(item, where):
        return check_vector([item], f"{where} opacity", length=1, low=0.0, high=1.0)[0]

    def parse_color(item, where):
        return check_vector(item, f"{where} colour", length=3, low=0.0, high=1.0)

    def parse_emission(item, where):
        return check_vector(item, f"{where} emission", length=3, low=0.0)

    def parse_kelvin(item, where):
        return check_vector([item], f"{where} temperature (kelvin)", length=1, low=0.0, high=1e5)[0]

    opacity_values, opacity = points("opacity", opacity_points, parse_opacity)
    color_values, colors = points("color", color_points, parse_color)
    emission_values = emissions = None
    if emission_points is not None:
        emission_values, emissions = points("emission", emission_points, parse_emission)
        emissions = emissions.reshape(-1, 3)
    temperature_values = temperatures = None
    if temperature_points is not None:
        temperature_values, temperatures = points("temperature", temperature_points, parse_kelvin)
    return TransferFunction(
        opacity_values=opacity_values, opacity=opacity, color_values=color_values, colors=colors.reshape(-1, 3),
        reference_length_mm=reference, name=name, scale=scale, notes=notes, source=str(source), medical=medical,
        emission_values=emission_values, emissions=emissions, emission_scale=float(emission_scale),
        temperature_values=temperature_values, temperatures=temperatures,
    )
