"""Print the README's performance tables from benchmarks/results/*.json (Markdown).

    python benchmarks/report.py
"""

from __future__ import annotations

import json
from pathlib import Path

RESULTS = Path(__file__).resolve().parent / "results"


def main() -> None:
    r = json.loads((RESULTS / "speed.json").read_text())
    ds = json.loads((RESULTS / "dataset_scaling.json").read_text())
    m = 1e6
    print(f"Latest run: {r['machine']['cpus']} CPUs (one thread per core), {r['machine']['numba_threads']} numba threads, "
          f"{r['machine']['platform']}, numba {r['machine']['numba']}.\n")
    print("| demo | size | M paths/s | s per spp | field samples per path |\n|---|---|---|---|---|")
    for name, sizes in r["demos"].items():
        for size, row in sizes.items():
            print(f"| {name} | {size} x {size} | {row['paths_per_second'] / m:.2f} | {row['seconds_per_spp']:.3f} | "
                  f"{row['field_samples_per_path']:.0f} |")
    s, v = r["skipping"], r["volume_size"]
    rows = [
        ("figurine 512 x 512 at 1 spp (2 events, one light, sky)", f"{r['figurine_512_1spp_seconds']:.2f} s", "<= 0.75 s"),
        ("empty-space skipping, figurine 256 x 256",
         f"{s['wall_time_ratio_off_over_on']:.2f}x faster; {s['samples_per_path_on']:.0f} samples per path instead of "
         f"{s['samples_per_path_off']:.0f}, {s['on_over_nonempty']:.2f}x those in non-empty cells", ">= 2x; <= 1.3x"),
        ("1 -> 2 threads, figurine 256 x 256, 8 spp", f"{r['threads']['speedup']:.2f}x", ">= 1.8x"),
        ("start of `tracer render` (empty cache / warm cache)",
         f"{r['cold_start_seconds']:.1f} s / {r['warm_start_seconds']:.2f} s", "warm <= 2 s"),
        ("trilinear roofline, coherent rays, same threads", f"{r['roofline_samples_per_second'] / m:.0f} M samples/s", ""),
        ("renderer's effective field samples/s (figurine)",
         f"{r['renderer_effective_samples_per_second'] / m:.0f} M samples/s = {100 * r['renderer_over_roofline']:.0f}% "
         "of the roofline", ">= 50%"),
        ("the renderer's march alone along coherent rays (no shading)",
         f"{r['march_only_samples_per_second'] / m:.0f} M samples/s = "
         f"{100 * r['march_only_samples_per_second'] / r['roofline_samples_per_second']:.0f}% of the roofline", ""),
        ("128^3 / 256^3 smooth volume: roofline; renderer",
         f"{v['128']['roofline_samples_per_second'] / m:.0f} / {v['256']['roofline_samples_per_second'] / m:.0f} M/s; "
         f"{v['128']['renderer_effective_samples_per_second'] / m:.0f} / {v['256']['renderer_effective_samples_per_second'] / m:.0f} M/s "
         f"(ratio {v['renderer_256_over_128']:.2f})", "256^3 >= half of 128^3"),
        ("NumPy oracle against the kernel, same tiny scene", f"{r['oracle']['speed_ratio']:.0f}x slower", ""),
        ("peak memory of a 512 x 512 render (figurine, lattice, plume), warm kernel cache; on a first run (compiling)",
         ", ".join(f"{x['warm']:.0f}" for x in r["peak_memory_mib_512"].values()) + " MiB; "
         + ", ".join(f"{x['compiling']:.0f}" for x in r["peak_memory_mib_512"].values()) + " MiB", ""),
        ("dataset items/s, 2 workers over 1 (one numba thread each; 24 items of 64 x 64, cluster start included)", f"{ds['speedup_2_over_1_workers']:.2f}x", ">= 1.7x"),
    ]
    print("\n| measure | figure | target |\n|---|---|---|")
    for row in rows:
        print("| " + " | ".join(row) + " |")
    if "transport" in r:
        print("\n| demo, 128 x 128 | estimator | M paths/s at 1 / 4 / 16 bounces | field samples per path |\n|---|---|---|---|")
        for name, rows_ in r["transport"].items():
            for estimator in ("march", "track"):
                cells = [rows_[f"{estimator} {b}"] for b in (1, 4, 16)]
                print(f"| {name} | {estimator} | " + " / ".join(f"{c['paths_per_second'] / m:.3f}" for c in cells) + " | "
                      + " / ".join(f"{c['field_samples_per_path']:.0f}" for c in cells) + " |")


if __name__ == "__main__":
    main()
