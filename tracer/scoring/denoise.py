"""A classical feature-guided baseline denoiser: the edge-avoiding a-trous wavelet filter.

Dammertz et al. (2010) filter with a hierarchy of sparse 5 x 5 kernels whose taps are cut at
edges found in the feature buffers; the luminance weight is scaled by the noise's standard
deviation and that variance is carried through the passes (Schied et al. 2017). Before
filtering, radiance is divided by the albedo blended with the hit fraction (albedo
demodulation, common practice), so texture is not blurred, and multiplied back afterwards.

With ``color_only`` the filter sees radiance and its variance only: the baseline for "what are
the feature buffers worth".
"""

from __future__ import annotations

import time
from dataclasses import dataclass

import numpy as np

from ..rendering.buffers import Frame


@dataclass(frozen=True)
class DenoiseSettings:
    iterations: int = 5
    sigma_luminance: float = 4.0
    sigma_normal: float = 0.35
    sigma_depth: float = 0.0              # 0: off; e.g. 2.0 cuts at depth steps beyond 2x the local gradient
    sigma_albedo: float = 0.1
    sigma_position_mm: float = 0.0        # 0: off (depth already carries it); set e.g. 1.0 to use positions
    sigma_hit: float = 0.0
    spread_factor: float = 16.0
    color_only: bool = False
    demodulate: bool = False


@dataclass(frozen=True)
class DenoiseResult:
    radiance: np.ndarray      # (H, W, 3) float32
    seconds: float            # the filtering alone
    variance_source: str      # "buffer" or "spatial" (1-spp input: estimated over a 5 x 5 window)
    compile_seconds: float = 0.0   # compiling (or loading) the filter's kernels, on a process's first call


def denoise(frame: Frame, settings: DenoiseSettings = DenoiseSettings(), threads: int | None = None) -> DenoiseResult:
    """Filter ``frame['radiance']`` guided by its feature buffers; see the module docstring.

    The first call in a process compiles (or loads) the kernels on a tiny frame first, so that
    ``seconds`` is the filtering alone and ``compile_seconds`` the rest.
    """
    from .._kernels.atrous import atrous_pass, feature_spread, spatial_variance

    compile_seconds = 0.0
    if not (atrous_pass.signatures and feature_spread.signatures and spatial_variance.signatures):
        started = time.perf_counter()
        for spp in (1, 2):         # the 1-spp path also compiles the spatial variance estimate
            _filter(_tiny_frame(), DenoiseSettings(iterations=1), threads, spp=spp)
        compile_seconds = time.perf_counter() - started
    start = time.perf_counter()
    result, source = _filter(frame, settings, threads, spp=frame.meta.get("spp", 1))
    return DenoiseResult(radiance=result, seconds=time.perf_counter() - start, variance_source=source,
                         compile_seconds=compile_seconds)


def _tiny_frame() -> Frame:
    from ..rendering.buffers import buffer_specs

    buffers = {spec.key: np.zeros((4, 4) + ((3,) if spec.channels == 3 else ()), np.float32) for spec in buffer_specs()}
    return Frame(buffers=buffers, meta={})


def _filter(frame: Frame, settings: DenoiseSettings, threads: int | None, *, spp: int):
    """The filter itself; returns the filtered radiance and where its noise estimate came from."""
    from .._kernels.atrous import atrous_pass, feature_spread, spatial_variance
    from ..config import num_threads

    radiance = np.ascontiguousarray(frame["radiance"], dtype=np.float32)
    height, width = radiance.shape[:2]
    hit = np.ascontiguousarray(frame["event1_hit"], dtype=np.float32)
    albedo = np.ascontiguousarray(frame["albedo"], dtype=np.float32)
    use_features = not settings.color_only
    if use_features and settings.demodulate:
        factor = hit[..., None] * np.maximum(albedo, 1e-3) + (1.0 - hit[..., None])
    else:
        factor = np.ones_like(radiance)
    color = np.ascontiguousarray(radiance / factor, dtype=np.float32)

    with num_threads(threads):
        variance_buffer = np.asarray(frame["radiance_variance"], dtype=np.float64)
        if spp >= 2:
            channel_variance = variance_buffer / np.maximum(factor, 1e-3) ** 2
            variance = (0.2126**2 * channel_variance[..., 0] + 0.7152**2 * channel_variance[..., 1]
                        + 0.0722**2 * channel_variance[..., 2]).astype(np.float32)
            source = "buffer"
        else:
            variance = np.empty((height, width), np.float32)
            spatial_variance(color, 2, variance)
            source = "spatial"
        depth = np.ascontiguousarray(frame["event1_depth"], dtype=np.float32)
        gradient = np.zeros_like(depth)
        if height > 2 and width > 2:
            gy, gx = np.gradient(depth.astype(np.float64))
            gradient = np.sqrt(gx * gx + gy * gy).astype(np.float32)
        normal = np.ascontiguousarray(frame["event1_normal"], dtype=np.float32)
        position = np.ascontiguousarray(frame["event1_position"], dtype=np.float32)
        sigmas = np.array([settings.sigma_luminance, settings.sigma_normal, settings.sigma_depth,
                           settings.sigma_albedo, settings.sigma_position_mm, settings.sigma_hit,
                           settings.spread_factor], dtype=np.float64)
        spread = np.zeros((height, width, 2), np.float32)
        if use_features:
            feature_spread(normal, albedo, spread)
        out_color = np.empty_like(color)
        out_variance = np.empty_like(variance)
        for iteration in range(settings.iterations):
            atrous_pass(color, variance, normal, depth, gradient, albedo, position, hit, spread, sigmas,
                        1 << iteration, use_features, out_color, out_variance)
            color, out_color = out_color, color
            variance, out_variance = out_variance, variance
    return (color * factor).astype(np.float32), source


#: Guide buffers are scaled to about [0, 1] by their 1st and 99th percentiles, and cut at edges of
#: GUIDE_SIGMA on that scale (feature normalisation as in learned denoisers, e.g. Bako et al. 2017).
GUIDE_SIGMA = 0.1


def denoise_guided(frame: Frame, guides, settings: DenoiseSettings = DenoiseSettings(),
                   threads: int | None = None) -> np.ndarray:
    """The a-trous baseline guided by any list of buffer keys of ``frame`` (the feature study's filter).

    With no guides it is exactly :func:`denoise` with ``color_only``. Otherwise each guide buffer is
    scaled by its 1st-99th percentile range, has edge scale GUIDE_SIGMA, and is softened by its own
    local noise (3 x 3 spread x ``settings.spread_factor``), so the same rule serves normals, depths,
    scalar values or any candidate feature. Returns the filtered radiance (H, W, 3) float32.
    """
    import dataclasses

    from .._kernels.atrous import guided_pass, spatial_variance
    from ..config import num_threads

    if not guides:
        return denoise(frame, dataclasses.replace(settings, color_only=True), threads).radiance
    color = np.array(frame["radiance"], dtype=np.float32, order="C")      # a copy: the passes write into it
    height, width = color.shape[:2]
    stack, group, spreads = [], [], []
    for index, key in enumerate(guides):
        array = np.asarray(frame[key], dtype=np.float64)
        array = array[..., None] if array.ndim == 2 else array
        low, high = np.percentile(array, [1.0, 99.0])
        scaled = (array - low) / (high - low if high > low else 1.0)
        stack.append(scaled)
        group += [index] * scaled.shape[-1]
        spreads.append(_local_spread(scaled))
    guide_stack = np.ascontiguousarray(np.concatenate(stack, axis=-1), dtype=np.float32)
    spread = np.ascontiguousarray(np.stack(spreads, axis=-1), dtype=np.float32)
    group_sigma2 = np.full(len(guides), GUIDE_SIGMA ** 2)
    with num_threads(threads):
        if frame.meta.get("spp", 1) >= 2:
            v = np.asarray(frame["radiance_variance"], dtype=np.float64)
            variance = (0.2126**2 * v[..., 0] + 0.7152**2 * v[..., 1] + 0.0722**2 * v[..., 2]).astype(np.float32)
        else:
            variance = np.empty((height, width), np.float32)
            spatial_variance(color, 2, variance)
        out_color = np.empty_like(color)
        out_variance = np.empty_like(variance)
        for iteration in range(settings.iterations):
            guided_pass(color, variance, guide_stack, np.asarray(group, np.int64), group_sigma2, spread,
                        settings.sigma_luminance, settings.spread_factor, 1 << iteration, out_color, out_variance)
            color, out_color = out_color, color
            variance, out_variance = out_variance, variance
    return color.astype(np.float32)


def _local_spread(scaled: np.ndarray) -> np.ndarray:
    """The 3 x 3 variance of a guide (edge-replicated), summed over its channels: (H, W) float64."""
    padded = np.pad(scaled, ((1, 1), (1, 1), (0, 0)), mode="edge")
    height, width = scaled.shape[:2]
    windows = [padded[r:r + height, c:c + width] for r in range(3) for c in range(3)]
    mean = sum(windows) / 9.0
    return (sum(w * w for w in windows) / 9.0 - mean * mean).clip(min=0.0).sum(axis=-1)
