"""Edge-avoiding a-trous wavelet filtering (Dammertz et al. 2010, "Edge-avoiding A-Trous wavelet
transform for fast global illumination filtering", HPG), with the variance-guided luminance weight
of Schied et al. (2017, "Spatiotemporal variance-guided filtering", HPG).

Each pass is a 5 x 5 B3-spline kernel [1, 4, 6, 4, 1] / 16 (outer product) with holes of
``step`` pixels; every tap is weighted by edge-stopping functions of luminance (scaled by the
standard deviation of the noise), normals, depth, albedo, positions and the hit fraction.
"""

import math

import numpy as np
from numba import njit, prange

from ..config import JIT, JIT_PARALLEL

B3 = np.array([1.0 / 16, 1.0 / 4, 3.0 / 8, 1.0 / 4, 1.0 / 16])


@njit(**JIT)
def luminance(r, g, b):
    """Rec. 709 luma weights on linear RGB."""
    return 0.2126 * r + 0.7152 * g + 0.0722 * b


@njit(**JIT_PARALLEL)
def spatial_variance(color, radius, out):
    """Variance of luminance over a (2 radius + 1)^2 window: the noise estimate when spp = 1.

    color : (H, W, 3) float32; out : (H, W) float32.
    """
    height, width = out.shape
    for row in prange(height):
        for col in range(width):
            total = 0.0
            total_sq = 0.0
            count = 0
            for dr in range(-radius, radius + 1):
                r = row + dr
                if r < 0 or r >= height:
                    continue
                for dc in range(-radius, radius + 1):
                    c = col + dc
                    if c < 0 or c >= width:
                        continue
                    value = luminance(color[r, c, 0], color[r, c, 1], color[r, c, 2])
                    total += value
                    total_sq += value * value
                    count += 1
            mean = total / count
            out[row, col] = max(total_sq / count - mean * mean, 0.0)


@njit(**JIT_PARALLEL)
def feature_spread(normal, albedo, out):
    """Local noise of the guides: mean squared deviation of normal and albedo over a 3 x 3 window.

    At 1 spp the guides are noisy too (coverage is 0 or 1 at a silhouette); the feature terms of
    :func:`atrous_pass` are softened by this spread so they cut only where the guides are sure.
    normal, albedo : (H, W, 3) float32; out : (H, W, 2) float32 (normal, albedo).
    """
    height, width = out.shape[0], out.shape[1]
    for row in prange(height):
        for col in range(width):
            for f in range(2):
                guide = normal if f == 0 else albedo
                m0 = 0.0
                m1 = 0.0
                m2 = 0.0
                q = 0.0
                count = 0
                for r in range(max(row - 1, 0), min(row + 2, height)):
                    for c in range(max(col - 1, 0), min(col + 2, width)):
                        m0 += guide[r, c, 0]
                        m1 += guide[r, c, 1]
                        m2 += guide[r, c, 2]
                        q += guide[r, c, 0] ** 2 + guide[r, c, 1] ** 2 + guide[r, c, 2] ** 2
                        count += 1
                m0 /= count
                m1 /= count
                m2 /= count
                out[row, col, f] = max(q / count - (m0 * m0 + m1 * m1 + m2 * m2), 0.0)


@njit(**JIT_PARALLEL)
def atrous_pass(color, variance, normal, depth, depth_gradient, albedo, position, hit, spread, sigmas, step,
                use_features, out_color, out_variance):
    """One a-trous pass with holes of ``step`` pixels.

    color (H, W, 3), variance (H, W) luminance variance, normal (H, W, 3), depth (H, W),
    depth_gradient (H, W) depth change per pixel, albedo (H, W, 3), position (H, W, 3) mm,
    hit (H, W), spread (H, W, 2) from :func:`feature_spread`: float32 inputs. sigmas (7,) float64:
    luminance, normal, depth, albedo, position (mm), hit (a sigma <= 0 disables that term), and the
    factor on the guides' local spread that softens the normal and albedo terms. out_color (H, W, 3), out_variance (H, W) float32.
    """
    height, width = hit.shape
    for row in prange(height):
        for col in range(width):
            lp = luminance(color[row, col, 0], color[row, col, 1], color[row, col, 2])
            sd = math.sqrt(max(variance[row, col], 0.0))
            s0 = 0.0
            s1 = 0.0
            s2 = 0.0
            weight_sum = 0.0
            variance_sum = 0.0
            for i in range(5):
                r = row + (i - 2) * step
                if r < 0 or r >= height:
                    continue
                for j in range(5):
                    c = col + (j - 2) * step
                    if c < 0 or c >= width:
                        continue
                    w = B3[i] * B3[j]
                    if r != row or c != col:
                        exponent = 0.0
                        if sigmas[0] > 0:
                            lq = luminance(color[r, c, 0], color[r, c, 1], color[r, c, 2])
                            exponent += abs(lp - lq) / (sigmas[0] * sd + 1e-6)
                        if use_features:
                            if sigmas[1] > 0:
                                d0 = normal[row, col, 0] - normal[r, c, 0]
                                d1 = normal[row, col, 1] - normal[r, c, 1]
                                d2 = normal[row, col, 2] - normal[r, c, 2]
                                exponent += (d0 * d0 + d1 * d1 + d2 * d2) / (
                                    sigmas[1] * sigmas[1] + sigmas[6] * (spread[row, col, 0] + spread[r, c, 0]))
                            if sigmas[2] > 0:
                                distance = math.sqrt(float((r - row) ** 2 + (c - col) ** 2))
                                exponent += abs(depth[row, col] - depth[r, c]) / (
                                    sigmas[2] * depth_gradient[row, col] * distance + 1e-3)
                            if sigmas[3] > 0:
                                d0 = albedo[row, col, 0] - albedo[r, c, 0]
                                d1 = albedo[row, col, 1] - albedo[r, c, 1]
                                d2 = albedo[row, col, 2] - albedo[r, c, 2]
                                exponent += (d0 * d0 + d1 * d1 + d2 * d2) / (
                                    sigmas[3] * sigmas[3] + sigmas[6] * (spread[row, col, 1] + spread[r, c, 1]))
                            if sigmas[4] > 0:
                                d0 = position[row, col, 0] - position[r, c, 0]
                                d1 = position[row, col, 1] - position[r, c, 1]
                                d2 = position[row, col, 2] - position[r, c, 2]
                                exponent += (d0 * d0 + d1 * d1 + d2 * d2) / (sigmas[4] * sigmas[4])
                            if sigmas[5] > 0:
                                d0 = hit[row, col] - hit[r, c]
                                exponent += d0 * d0 / (sigmas[5] * sigmas[5])
                        w *= math.exp(-exponent)
                    s0 += w * color[r, c, 0]
                    s1 += w * color[r, c, 1]
                    s2 += w * color[r, c, 2]
                    weight_sum += w
                    variance_sum += w * w * variance[r, c]
            out_color[row, col, 0] = s0 / weight_sum
            out_color[row, col, 1] = s1 / weight_sum
            out_color[row, col, 2] = s2 / weight_sum
            out_variance[row, col] = variance_sum / (weight_sum * weight_sum)


@njit(**JIT_PARALLEL)
def guided_pass(color, variance, guides, group, group_sigma2, spread, sigma_luminance, spread_factor, step,
                out_color, out_variance):
    """One a-trous pass like :func:`atrous_pass`, guided by any stack of buffers.

    guides (H, W, G) float32, each channel scaled to about [0, 1]; group (G,) int64: the guide buffer each
    channel belongs to; group_sigma2 (B,) float64: that buffer's squared edge scale; spread (H, W, B) float32:
    each buffer's local spread (its 3 x 3 variance, summed over its channels), which softens its term by
    ``spread_factor`` so a noisy guide cuts only where it is sure. A tap's weight is the B3 kernel times
    exp(-(luminance term + sum over buffers of |g_p - g_q|^2 / (sigma^2 + spread_factor (s_p + s_q)))).
    """
    height, width = variance.shape
    n_channels = guides.shape[2]
    n_groups = group_sigma2.shape[0]
    for row in prange(height):
        distance2 = np.zeros(n_groups)
        for col in range(width):
            lp = luminance(color[row, col, 0], color[row, col, 1], color[row, col, 2])
            sd = math.sqrt(max(variance[row, col], 0.0))
            s0 = 0.0
            s1 = 0.0
            s2 = 0.0
            weight_sum = 0.0
            variance_sum = 0.0
            for i in range(5):
                r = row + (i - 2) * step
                if r < 0 or r >= height:
                    continue
                for j in range(5):
                    c = col + (j - 2) * step
                    if c < 0 or c >= width:
                        continue
                    w = B3[i] * B3[j]
                    if r != row or c != col:
                        exponent = 0.0
                        if sigma_luminance > 0:
                            lq = luminance(color[r, c, 0], color[r, c, 1], color[r, c, 2])
                            exponent += abs(lp - lq) / (sigma_luminance * sd + 1e-6)
                        for b in range(n_groups):
                            distance2[b] = 0.0
                        for k in range(n_channels):
                            d = guides[row, col, k] - guides[r, c, k]
                            distance2[group[k]] += d * d
                        for b in range(n_groups):
                            exponent += distance2[b] / (group_sigma2[b] + spread_factor * (spread[row, col, b] + spread[r, c, b]))
                        w *= math.exp(-exponent)
                    s0 += w * color[r, c, 0]
                    s1 += w * color[r, c, 1]
                    s2 += w * color[r, c, 2]
                    weight_sum += w
                    variance_sum += w * w * variance[r, c]
            out_color[row, col, 0] = s0 / weight_sum
            out_color[row, col, 1] = s1 / weight_sum
            out_color[row, col, 2] = s2 / weight_sum
            out_variance[row, col] = variance_sum / (weight_sum * weight_sum)
