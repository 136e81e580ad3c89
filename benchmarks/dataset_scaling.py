"""Dataset throughput: items per second serially and with 1 and 2 Dask workers, in one run.

    python benchmarks/dataset_scaling.py [--items 24] [--size 64]

Every figure comes from this run on this machine; the kernels are compiled before timing; the
cluster modes include starting and stopping their local cluster (about a second).
Results go to benchmarks/results/dataset_scaling.json.
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import shutil
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def plan_text(items: int, size: int) -> str:
    return f"""name = "bench"
seed = 1
[[volumes]]
path = "{ROOT}/sample_volumes/figurine.nrrd"
transfer_functions = ["{ROOT}/transfer_functions/figurine_clay.toml"]
[views]
per_volume = {items}
[[environments]]
kind = "sky"
[image]
width = {size}
height = {size}
[render]
input_spp = [1, 2, 4]
reference_spp = 32
[splits]
train = 1.0
"""


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--items", type=int, default=24)
    parser.add_argument("--size", type=int, default=64)
    args = parser.parse_args()

    from tracer.dataset.run import build_dataset

    work = Path(tempfile.mkdtemp(prefix="tracer-bench-"))
    plan = work / "plan.toml"
    plan.write_text(plan_text(args.items, args.size))
    build_dataset(plan, work / "warm", limit=1)          # compile once (workers load from the cache)
    results = {}
    modes = [("serial, 2 numba threads", {}),
             ("1 worker x 1 thread", {"workers": 1, "numba_threads": 1}),
             ("2 workers x 1 thread", {"workers": 2, "numba_threads": 1}),
             ("1 worker x 2 threads", {"workers": 1})]
    for label, options in modes:
        out = work / label.replace(" ", "_").replace(",", "")
        started = time.perf_counter()
        summary = build_dataset(plan, out, **options)
        seconds = time.perf_counter() - started
        results[label] = {"items": summary.n_items, "seconds": round(seconds, 3),
                          "items_per_second": round(summary.n_items / seconds, 3)}
    ratio = results["2 workers x 1 thread"]["items_per_second"] / results["1 worker x 1 thread"]["items_per_second"]
    report = {"machine": {"cpus": os.cpu_count(), "platform": platform.platform(), "python": platform.python_version()},
              "items": args.items, "size": args.size, "results": results, "speedup_2_over_1_workers": round(ratio, 3)}
    print(f"{'mode':<28}{'items':>6}{'seconds':>10}{'items/s':>10}")
    for label, row in results.items():
        print(f"{label:<28}{row['items']:>6}{row['seconds']:>10.2f}{row['items_per_second']:>10.3f}")
    print(f"2 workers / 1 worker (1 numba thread each): {ratio:.2f}x (target >= 1.7x on 2 cores)")
    out_dir = ROOT / "benchmarks" / "results"
    out_dir.mkdir(parents=True, exist_ok=True)
    (out_dir / "dataset_scaling.json").write_text(json.dumps(report, indent=2))
    shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    main()
