"""The baseline denoiser on the figurine demo view: 1-spp input, filtered with and without the
feature buffers, against the 4-spp render and a 1024-spp reference (independent seeds).

    python benchmarks/denoise_baseline.py [--size 256] [--reference-spp 1024]

Prints a table, writes benchmarks/results/denoise_baseline.json and docs/denoise_baseline.png
(the images and the PSNR-against-spp plot with the filtered results marked).
"""

from __future__ import annotations

import argparse
import json
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--size", type=int, default=256)
    parser.add_argument("--reference-spp", type=int, default=1024)
    args = parser.parse_args()

    from tracer import load_scene
    from tracer.scoring.denoise import DenoiseSettings, denoise
    from tracer.scoring.metrics import score
    from tracer.rendering import render
    from tracer.scoring.score import equal_quality_spp, plot_report, LadderPoint, ScoreReport

    scene = load_scene(ROOT / "examples" / "figurine.toml").with_overrides(width=args.size, height=args.size)
    started = time.perf_counter()
    reference = render(scene, spp=args.reference_spp, seed=1_000_003)
    reference_seconds = time.perf_counter() - started
    ladder = []
    frames = {}
    for k, spp in enumerate([1, 2, 4, 8, 16, 32]):
        frame = render(scene, spp=spp, seed=500 + k)
        frames[spp] = frame
        ladder.append(LadderPoint(spp, score(reference["radiance"], frame["radiance"]).psnr_db,
                                  frame.meta["render_seconds"]))
    one = frames[1]
    results = {}
    for label, settings in [("feature-guided", DenoiseSettings()), ("colour-only", DenoiseSettings(color_only=True))]:
        output = denoise(one, settings)
        scores = score(reference["radiance"], output.radiance)
        eq, extrapolated = equal_quality_spp([p.spp for p in ladder], [p.psnr_db for p in ladder], scores.psnr_db)
        results[label] = {"psnr_db": round(scores.psnr_db, 3), "ssim": round(scores.ssim, 4),
                          "relative_mse": scores.relative_mse, "denoise_seconds": round(output.seconds, 4),
                          "equal_quality_spp": round(eq, 2), "extrapolated": extrapolated, "image": output.radiance}
    four = score(reference["radiance"], frames[4]["radiance"])
    one_score = score(reference["radiance"], one["radiance"])
    rows = [("1 spp input", one_score.psnr_db, one_score.ssim), ("4 spp render", four.psnr_db, four.ssim)]
    rows += [(f"1 spp + {label} filter", r["psnr_db"], r["ssim"]) for label, r in results.items()]
    print(f"figurine {args.size}x{args.size}, reference {args.reference_spp} spp ({reference_seconds:.0f} s)")
    print(f"{'':<32}{'PSNR dB':>9}{'SSIM':>8}")
    for label, p, s in rows:
        print(f"{label:<32}{p:>9.2f}{s:>8.4f}")
    for label, r in results.items():
        print(f"{label}: as good as {r['equal_quality_spp']:.1f} spp, filter {r['denoise_seconds']:.3f} s")

    report = ScoreReport(scores=score(reference["radiance"], results["feature-guided"]["image"]), ladder=ladder,
                         equal_quality_spp=results["feature-guided"]["equal_quality_spp"],
                         extrapolated=results["feature-guided"]["extrapolated"],
                         seconds_per_spp=sum(p.seconds for p in ladder) / sum(p.spp for p in ladder),
                         candidate_seconds=one.meta["render_seconds"] + results["feature-guided"]["denoise_seconds"])
    extra = {"colour-only": (results["colour-only"]["equal_quality_spp"], results["colour-only"]["psnr_db"])}
    plot_report(report, reference["radiance"], results["feature-guided"]["image"], ROOT / "docs" / "denoise_baseline.png",
                title=f"figurine {args.size}x{args.size}: 1-spp input, feature-guided filter", extra_points=extra)
    out = {"size": args.size, "reference_spp": args.reference_spp,
           "ladder": [{"spp": p.spp, "psnr_db": round(p.psnr_db, 3)} for p in ladder],
           "one_spp": {"psnr_db": round(one_score.psnr_db, 3), "ssim": round(one_score.ssim, 4)},
           "four_spp": {"psnr_db": round(four.psnr_db, 3), "ssim": round(four.ssim, 4)},
           "filters": {k: {kk: vv for kk, vv in v.items() if kk != "image"} for k, v in results.items()}}
    (ROOT / "benchmarks" / "results").mkdir(parents=True, exist_ok=True)
    (ROOT / "benchmarks" / "results" / "denoise_baseline.json").write_text(json.dumps(out, indent=2))


if __name__ == "__main__":
    main()
