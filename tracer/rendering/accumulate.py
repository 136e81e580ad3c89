"""Running sums per pixel, their conversion to buffers, and the exact pooling of disjoint sample ranges.

Sums are float64 and each pixel receives its samples in increasing sample index, so a
render split into passes, threads or resumed from a checkpoint adds the same numbers in the
same order: the bits do not change. Disjoint sample ranges of the same scene and seed pool
into the buffers of one render of their union (up to float32 rounding of the stored means),
using the pairwise update of means and squared deviations (Chan, Golub and LeVeque 1983).
"""

from __future__ import annotations

import numpy as np

from .buffers import Frame
from ..errors import UserError

N_BASE_CHANNELS = 10
BLOCK = 8
EVENT_PREFIXES = ("event1", "event2", "level1", "level2")
EVENT_FEATURES = ("value", "gradient", "extinction", "interface_weight", "light_transmittance")
EXTRA_CHANNELS = 2 * len(EVENT_FEATURES) + 7       # the kernel's layout, tracer._kernels.integrate


def n_channels(n_levels: int, extras: bool = False) -> int:
    return N_BASE_CHANNELS + BLOCK * (2 + n_levels) + (EXTRA_CHANNELS if extras else 0)


def extras_offset(n_levels: int, extras: bool) -> int:
    """Where the candidate features' channels start (the kernel's ``extras``), or -1 without them."""
    return n_channels(n_levels) if extras else -1


class Accumulator:
    """Float64 sums for an H x W frame over a contiguous range of sample indices.

    ``features``: the candidate features to report (README, "Candidate features"); when any is asked
    for, the kernel accumulates all of them and :meth:`to_buffers` returns those asked for.
    """

    def __init__(self, height: int, width: int, n_levels: int = 0, first_sample: int = 0, sums=None, n_samples=0,
                 features=()):
        self.n_levels = n_levels
        self.features = tuple(features)
        self.first_sample = int(first_sample)
        self.n_samples = int(n_samples)
        self.sums = np.zeros((height, width, n_channels(n_levels, bool(features)))) if sums is None else sums

    @property
    def next_sample(self) -> int:
        return self.first_sample + self.n_samples

    def to_buffers(self) -> dict[str, np.ndarray]:
        n = self.n_samples
        s = self.sums
        out: dict[str, np.ndarray] = {}
        with np.errstate(invalid="ignore", divide="ignore"):
            mean = s[..., 0:3] / max(n, 1)
            if n > 1:
                spread = s[..., 3:6] - s[..., 0:3] * mean
                # below the rounding bound of the two running sums (n ulps of the square sum: recursive
                # summation, Higham 2002) the difference is rounding, not noise (identical samples, e.g.
                # background pixels): report it as exactly zero
                spread[spread <= 2 * n * np.finfo(np.float64).eps * s[..., 3:6]] = 0.0
                variance = spread / (n - 1) / n
            else:
                variance = np.zeros_like(mean)
            out["radiance"] = mean
            out["radiance_variance"] = variance
            out["alpha"] = s[..., 6] / max(n, 1)
            count1 = s[..., N_BASE_CHANNELS]
            out["albedo"] = _safe_divide(s[..., 7:10], count1[..., None])
            for index, prefix in enumerate(EVENT_PREFIXES[: 2 + self.n_levels]):
                block = N_BASE_CHANNELS + BLOCK * index
                count = s[..., block]
                out[f"{prefix}_position"] = _safe_divide(s[..., block + 1:block + 4], count[..., None])
                out[f"{prefix}_normal"] = _safe_divide(s[..., block + 4:block + 7], count[..., None])
                out[f"{prefix}_depth"] = _safe_divide(s[..., block + 7], count)
                out[f"{prefix}_hit"] = count / max(n, 1)
            if self.features:
                out.update(_feature_buffers(s, self.n_levels, n, out))
        wanted = [key for key in out if not _is_feature(key) or key in self.features]
        return {key: np.ascontiguousarray(out[key], dtype=np.float32) for key in wanted}


def _is_feature(key: str) -> bool:
    from .buffers import FEATURE_NAMES

    return key in FEATURE_NAMES


def _feature_buffers(s, n_levels: int, n: int, base: dict) -> dict[str, np.ndarray]:
    """Every candidate feature from the sums (float64): event ones over the samples with the event, camera-ray
    ones over all samples, the expected depth as a ratio of its sums, the illumination demodulated."""
    from .buffers import demodulate

    at = extras_offset(n_levels, True)
    out = {}
    for index, prefix in enumerate(("event1", "event2")):
        count = s[..., N_BASE_CHANNELS + BLOCK * index]
        for k, name in enumerate(EVENT_FEATURES):
            out[f"{prefix}_{name}"] = _safe_divide(s[..., at + len(EVENT_FEATURES) * index + k], count)
    c = at + 2 * len(EVENT_FEATURES)
    out["opacity_before_event1"] = s[..., c] / max(n, 1)
    out["expected_depth"] = _safe_divide(s[..., c + 1], s[..., c + 2])
    out["optical_depth"] = s[..., c + 3] / max(n, 1)
    background = s[..., c + 4:c + 7] / max(n, 1)
    out["background_part"] = background
    out["illumination"] = demodulate(base["radiance"], background, base["albedo"])
    return out


def _safe_divide(numerator, denominator):
    return np.where(denominator > 0, numerator / np.where(denominator > 0, denominator, 1.0), 0.0)


def merge_frames(frames: list[Frame]) -> Frame:
    """Combine renders of one scene and seed with disjoint sample ranges.

    Raises
    ------
    UserError
        If the scenes, seeds or sizes differ, or sample ranges overlap.
    """
    if len(frames) < 2:
        raise UserError("pool: give at least two renders")
    first = frames[0]
    names = [frame.meta.get("source_file", f"input {i + 1}") for i, frame in enumerate(frames)]
    reference_scene = _scene_key(first.meta)
    for name, frame in zip(names[1:], frames[1:]):
        if frame.meta.get("seed") != first.meta.get("seed"):
            raise UserError(f"{name}: seed {frame.meta.get('seed')} differs from {names[0]}'s {first.meta.get('seed')}; "
                            "only renders with the same seed and disjoint sample ranges can be pooled")
        if _scene_key(frame.meta) != reference_scene:
            raise UserError(f"{name}: scene differs from {names[0]}'s; only renders of the same scene can be pooled")
        if set(frame.buffers) != set(first.buffers):
            raise UserError(f"{name}: buffers differ from {names[0]}'s")
    ranges = sorted((int(f.meta["first_sample"]), int(f.meta["first_sample"]) + int(f.meta["spp"]), name)
                    for f, name in zip(frames, names))
    for (a0, a1, a_name), (b0, b1, b_name) in zip(ranges, ranges[1:]):
        if b0 < a1:
            raise UserError(f"{b_name}: samples [{b0}, {b1}) overlap {a_name}'s [{a0}, {a1}); "
                            "pooled renders must cover disjoint sample ranges")

    n_total = 0
    mean = None
    m2 = None
    alpha = 0.0
    events: dict[str, list] = {}
    features = first.features
    feature_sums: dict[str, np.ndarray] = {}
    feature_weights: dict[str, np.ndarray] = {}
    for frame in frames:
        n = int(frame.meta["spp"])
        b = {k: v.astype(np.float64) for k, v in frame.buffers.items()}
        frame_m2 = b["radiance_variance"] * n * (n - 1)
        if mean is None:
            mean, m2 = b["radiance"], frame_m2
        else:
            delta = b["radiance"] - mean
            total = n_total + n
            mean = mean + delta * (n / total)
            m2 = m2 + frame_m2 + delta * delta * (n_total * n / total)
        alpha = alpha + b["alpha"] * n
        n_total += n
        for prefix in [p for p in EVENT_PREFIXES if f"{p}_hit" in b]:
            count = np.rint(b[f"{prefix}_hit"] * n)
            sums = events.setdefault(prefix, [0.0, 0.0, 0.0, 0.0, 0.0])
            sums[0] = sums[0] + count
            sums[1] = sums[1] + b[f"{prefix}_position"] * count[..., None]
            sums[2] = sums[2] + b[f"{prefix}_normal"] * count[..., None]
            sums[3] = sums[3] + b[f"{prefix}_depth"] * count
            if prefix == "event1":
                sums[4] = sums[4] + b["albedo"] * count[..., None]
        if "illumination" in features and "background_part" not in features:
            from .buffers import ILLUMINATION_EPSILON

            b["background_part"] = b["radiance"] - (b["albedo"] + ILLUMINATION_EPSILON) * b["illumination"]   # demodulate undone
        pooled = [key for key in features if key != "illumination"]
        if "illumination" in features and "background_part" not in pooled:
            pooled.append("background_part")
        for key in pooled:
            if key.startswith("event"):
                weight = np.rint(b[f"{key[:6]}_hit"] * n)        # over the samples with the event
            elif key == "expected_depth":
                weight = b["alpha"] * n          # its denominator, int T sigma dt, is alpha (to 1e-5: early termination)
            else:
                weight = np.full(b["alpha"].shape, float(n))
            value = b[key] * (weight[..., None] if b[key].ndim == 3 else weight)
            feature_sums[key] = feature_sums.get(key, 0.0) + value
            feature_weights[key] = feature_weights.get(key, 0.0) + weight
    out = {
        "radiance": mean,
        "radiance_variance": m2 / (n_total - 1) / n_total if n_total > 1 else np.zeros_like(mean),
        "alpha": alpha / n_total,
    }
    for prefix, (count, position, normal, depth, albedo) in events.items():
        out[f"{prefix}_position"] = _safe_divide(position, count[..., None])
        out[f"{prefix}_normal"] = _safe_divide(normal, count[..., None])
        out[f"{prefix}_depth"] = _safe_divide(depth, count)
        out[f"{prefix}_hit"] = count / n_total
        if prefix == "event1":
            out["albedo"] = _safe_divide(albedo, count[..., None])
    for key, total in feature_sums.items():
        weight = feature_weights[key]
        out[key] = _safe_divide(total, weight[..., None] if np.ndim(total) == 3 else weight)
    if "illumination" in features:
        from .buffers import demodulate

        out["illumination"] = demodulate(out["radiance"], out["background_part"], out["albedo"])
    meta = dict(first.meta)
    meta.pop("source_file", None)
    meta.pop("compile_seconds", None)
    meta.update(spp=n_total, first_sample=ranges[0][0],
                render_seconds=sum(float(f.meta.get("render_seconds", 0.0)) for f in frames),
                merged_from=[[a, b] for a, b, _ in ranges])
    if ranges[-1][1] - ranges[0][0] != n_total:
        meta["sample_ranges"] = [[a, b] for a, b, _ in ranges]
    buffers = {key: np.ascontiguousarray(out[key], dtype=np.float32) for key in first.buffers}
    return Frame(buffers=buffers, meta=meta)


def _scene_key(meta: dict) -> str:
    import json

    scene = json.loads(json.dumps(meta.get("scene", {})))
    scene.get("render", {}).pop("spp", None)
    scene.get("render", {}).pop("seed", None)
    return json.dumps(scene, sort_keys=True)
