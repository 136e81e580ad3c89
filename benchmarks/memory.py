"""Peak memory of a render of a large uint8 volume (default 1024^3 voxels, 1 GiB), in a fresh process.

    python benchmarks/memory.py [--size 1024]     # about a minute; needs about 3 GB free and 1 GB of disk

Writes a smooth uint8 field as .npy in a temporary folder, renders it at 64 x 64, 1 spp, and prints the
process's peak resident memory (VmHWM), the load and render times, and the footprint the memory check predicts (results in
benchmarks/results/memory_SIZE.json).
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]

CHILD = '''
import sys, time, numpy as np
n, folder = int(sys.argv[1]), sys.argv[2]
field = np.lib.format.open_memmap(f"{folder}/v.npy", mode="w+", dtype=np.uint8, shape=(n, n, n))
x = np.linspace(-1, 1, n, dtype=np.float32)
for k in range(n):                       # plane by plane, so writing the file needs no full-size temporary
    field[:, :, k] = (np.exp(-4 * (x[:, None] ** 2 + x[None, :] ** 2 + x[k] ** 2)) * 200).astype(np.uint8)
field.flush(); del field
import tracer
with open(f"{folder}/s.toml", "w") as handle:
    handle.write(f'[volume]\\npath = "{folder}/v.npy"\\n[transfer_function]\\nopacity = [[0.0, 0.0], [255.0, 0.5]]\\n'
                 'color = [[0.0, [0.8, 0.8, 0.8]]]\\n[camera]\\nwidth = 64\\nheight = 64\\n[render]\\nspp = 1\\n')
start = time.perf_counter()
scene = tracer.load_scene(f"{folder}/s.toml")
loaded = time.perf_counter()
frame = tracer.render(scene)
seconds = time.perf_counter() - loaded
peak = [int(line.split()[1]) for line in open("/proc/self/status") if line.startswith("VmHWM")][0] * 1024
print(peak, loaded - start, seconds, float(frame["alpha"].mean()))
'''


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--size", type=int, default=1024)
    parser.add_argument("--budget-mb", type=int, help="TRACER_MEMORY_BUDGET_MB for the render (sizes past 1780)")
    args = parser.parse_args()
    from tracer.volumes.volume import bytes_per_voxel

    with tempfile.TemporaryDirectory() as folder:
        env = dict(os.environ, **({"TRACER_MEMORY_BUDGET_MB": str(args.budget_mb)} if args.budget_mb else {}))
        result = subprocess.run([sys.executable, "-c", CHILD, str(args.size), folder], check=True, capture_output=True,
                                text=True, env=env)
    peak, load_seconds, seconds, alpha = result.stdout.split()
    report = {"size": args.size, "peak_bytes": int(peak), "seconds_load": float(load_seconds),
              "seconds_render": float(seconds), "predicted_bytes": args.size ** 3 * bytes_per_voxel("uint8", True),
              "mean_alpha": float(alpha)}
    (ROOT / "benchmarks" / "results").mkdir(parents=True, exist_ok=True)
    (ROOT / "benchmarks" / "results" / f"memory_{args.size}.json").write_text(json.dumps(report, indent=2))
    print(f"{args.size}^3 uint8: peak {int(peak) / 2**30:.2f} GiB ({int(peak) / 1e9:.2f} GB), "
          f"the memory check counts {report['predicted_bytes'] / 2**30:.2f} GiB; load {float(load_seconds):.1f} s, "
          f"render (64 x 64, 1 spp, compile included on a cold cache) {float(seconds):.1f} s")


if __name__ == "__main__":
    main()
