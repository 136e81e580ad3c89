"""Temporal scores, the temporal baseline and the animated preview (README, "Sequences").

Images are compared display-referred, as ``tracer score`` does (radiance x 2^exposure, clamped, sRGB curve).
For frame t >= 1, with r the reference frames and c the candidate's, over the pixels where the reference's
``disocclusion`` is 0 (and, for the second figure, whose warped position falls inside the previous image):

- temporal PSNR: ``10 log10(1 / mean(((c_t - c_t-1) - (r_t - r_t-1))^2))``, the error of frame-to-frame
  differences, as in video and temporal-denoising work;
- reprojected flicker PSNR: the same with the previous frames warped by the reference's ``motion`` first,
  ``W(x)`` bilinear at pixel + motion: ``(c_t - W(c_t-1)) - (r_t - W(r_t-1))``, flicker that motion compensation
  does not explain.

The temporal baseline blends the reprojected previous output into the spatially filtered frame where the
input's ``disocclusion`` is 0: ``out_t = alpha f_t + (1 - alpha) W(out_t-1)`` (an exponential moving average as in
the reprojection filters, Schied et al. 2017, whose colour alpha is 0.2), ``f_t`` elsewhere.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from ..errors import UserError

#: The temporal baseline's default blend weight of the current frame (Schied et al. 2017).
TEMPORAL_ALPHA = 0.2


def warp(previous: np.ndarray, motion: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``previous`` sampled bilinearly at each pixel centre plus its motion; (warped, inside-the-image mask)."""
    height, width = previous.shape[:2]
    rows, cols = np.mgrid[0:height, 0:width].astype(np.float64)
    x = cols + motion[..., 0]
    y = rows + motion[..., 1]
    inside = (x >= 0) & (x <= width - 1) & (y >= 0) & (y <= height - 1)
    x = np.clip(x, 0, width - 1)
    y = np.clip(y, 0, height - 1)
    x0 = np.minimum(np.floor(x).astype(int), width - 2) if width > 1 else np.zeros_like(x, int)
    y0 = np.minimum(np.floor(y).astype(int), height - 2) if height > 1 else np.zeros_like(y, int)
    fx, fy = (x - x0)[..., None], (y - y0)[..., None]
    image = previous if previous.ndim == 3 else previous[..., None]
    x1, y1 = np.minimum(x0 + 1, width - 1), np.minimum(y0 + 1, height - 1)
    out = ((1 - fx) * (1 - fy) * image[y0, x0] + fx * (1 - fy) * image[y0, x1]
           + (1 - fx) * fy * image[y1, x0] + fx * fy * image[y1, x1])
    return (out if previous.ndim == 3 else out[..., 0]), inside


def frame_paths(folder) -> list[Path]:
    folder = Path(folder)
    if not folder.is_dir():
        raise UserError(f"{folder}: folder not found")
    paths = sorted(folder.glob("frame[0-9][0-9][0-9][0-9].npz"))
    if len(paths) < 2:
        raise UserError(f"{folder}: a sequence needs frame0000.npz and at least one more frame, found {len(paths)}")
    return paths


def _psnr(mse: float) -> float:
    return float("inf") if mse <= 0 else 10.0 * math.log10(1.0 / mse)


def score_sequence(reference_dir, candidate_dir, *, exposure: float = 0.0) -> dict:
    """Per-frame PSNR/SSIM and the two temporal figures of the module docstring; JSON-ready."""
    from ..outputs.png import to_display
    from ..scoring.metrics import score
    from ..scoring.score import read_radiance

    references = frame_paths(reference_dir)
    candidates = [Path(candidate_dir) / path.name for path in references]
    missing = [path for path in candidates if not path.is_file()]
    if missing:
        raise UserError(f"{missing[0]}: frame missing (the candidate needs every frame of the reference)")
    frames, previous = [], None
    for index, (reference_path, candidate_path) in enumerate(zip(references, candidates)):
        (reference_radiance, reference, _), (candidate_radiance, _, _) = read_radiance(reference_path), read_radiance(candidate_path)
        if candidate_radiance.shape != reference_radiance.shape:
            raise UserError(f"{candidate_path}: shape {candidate_radiance.shape} differs from the reference's")
        for key in ("motion", "disocclusion"):
            if key not in reference:
                raise UserError(f"{reference_path}: {key}: missing; render the reference with tracer sequence")
        r, c = to_display(reference_radiance, exposure), to_display(candidate_radiance, exposure)
        scores = score(reference_radiance, candidate_radiance, exposure=exposure)
        row = {"frame": index, "psnr_db": scores.psnr_db, "ssim": scores.ssim,
               "temporal_psnr_db": None, "flicker_psnr_db": None, "valid_pixels": None}
        if previous is not None:
            r0, c0 = previous
            valid = reference["disocclusion"] == 0
            difference = (c - c0) - (r - r0)
            row["temporal_psnr_db"] = _psnr(float(np.mean(difference[valid] ** 2))) if valid.any() else None
            wr, inside = warp(r0, reference["motion"].astype(np.float64))
            wc, _ = warp(c0, reference["motion"].astype(np.float64))
            keep = valid & inside
            flicker = (c - wc) - (r - wr)
            row["flicker_psnr_db"] = _psnr(float(np.mean(flicker[keep] ** 2))) if keep.any() else None
            row["valid_pixels"] = int(keep.sum())
        frames.append(row)
        previous = (r, c)

    def mean(key):
        values = [f[key] for f in frames if f[key] is not None and math.isfinite(f[key])]
        return float(np.mean(values)) if values else None
    return {"written_by": "tracer score-sequence", "reference": str(reference_dir), "candidate": str(candidate_dir),
            "exposure": exposure, "frames": frames,
            "mean": {key: mean(key) for key in ("psnr_db", "ssim", "temporal_psnr_db", "flicker_psnr_db")}}


def denoise_sequence(input_dir, out_dir, *, alpha: float | None = None, settings=None, threads=None,
                     on_frame=None) -> list[Path]:
    """The spatial baseline on every frame, and with ``alpha`` the temporal blend of the module docstring."""
    from ..outputs.npz import read_npz, write_npz
    from ..rendering.buffers import Frame
    from ..scoring.denoise import DenoiseSettings, denoise

    if alpha is not None and not 0.0 < alpha <= 1.0:
        raise UserError(f"--temporal-alpha: must lie in (0, 1], got {alpha}")
    settings = settings or DenoiseSettings()
    paths = frame_paths(input_dir)
    written, previous = [], None
    for index, path in enumerate(paths):
        frame = read_npz(path)
        for key in ("motion", "disocclusion"):
            if key not in frame.buffers:
                raise UserError(f"{path}: {key}: missing; render the sequence with tracer sequence")
        filtered = denoise(frame, settings, threads=threads).radiance.astype(np.float64)
        if alpha is not None and previous is not None:
            warped, inside = warp(previous, frame["motion"].astype(np.float64))
            blend = ((frame["disocclusion"] == 0) & inside)[..., None]
            filtered = np.where(blend, alpha * filtered + (1.0 - alpha) * warped, filtered)
        previous = filtered
        buffers = dict(frame.buffers)
        buffers["radiance"] = filtered.astype(np.float32)
        meta = {k: v for k, v in frame.meta.items() if k != "source_file"}
        meta["denoised"] = {"method": "a-trous (Dammertz et al. 2010)" + (
            f", temporal blend alpha {alpha} (Schied et al. 2017)" if alpha is not None else ""),
            "settings": settings.__dict__}
        written.append(write_npz(Path(out_dir) / path.name, Frame(buffers=buffers, meta=meta)))
        if on_frame is not None:
            on_frame(index + 1, len(paths))
    return written


def write_preview_gif(path, columns: list[tuple[str, object]], *, exposure: float = 0.0, seconds_per_frame=0.15) -> Path:
    """An animated GIF of sequences side by side (``(label, folder)`` pairs), 8-bit sRGB; GIF rather than MP4:
    Pillow, which imageio already brings, writes it, with no video codec to download or install."""
    import imageio.v3 as iio

    from ..io.atomic import atomic_path
    from ..outputs.png import to_display, to_uint8
    from ..scoring.score import read_radiance

    folders = [(label, frame_paths(folder)) for label, folder in columns]
    count = min(len(paths) for _, paths in folders)
    images = []
    for k in range(count):
        tiles = [to_uint8(to_display(read_radiance(paths[k])[0], exposure)) for _, paths in folders]
        gap = np.full((tiles[0].shape[0], 4, 3), 24, np.uint8)
        row = [tiles[0]]
        for tile in tiles[1:]:
            row += [gap, tile]
        images.append(np.concatenate(row, axis=1))
    with atomic_path(Path(path)) as temporary:
        iio.imwrite(temporary, np.stack(images), extension=".gif", duration=int(seconds_per_frame * 1000), loop=0)
    return Path(path)
