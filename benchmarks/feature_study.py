"""The demo feature study of the README ("Feature study"): for each demo volume, a small dataset with every
candidate feature, and ``tracer feature-study`` on its 1-spp inputs.

    python benchmarks/feature_study.py            # about 10 minutes on 2 cores

Writes ``benchmarks/results/feature_study.json`` (each demo's study) and ``docs/feature_study.png`` (the gain of
each guide set over colour only, per demo).
"""

from __future__ import annotations

import json
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

DEMOS = {   # volume, transfer function, render keys of its example scene
    "figurine": ("figurine.nrrd", "figurine_clay.toml", 'scattering = "graded"'),
    "lattice": ("lattice.nrrd", "lattice_metal.toml", 'scattering = "graded"'),
    "plume": ("plume.nrrd", "plume_smoke.toml", 'scattering = "medium"'),
    "flame": ("flame.nrrd", "flame_soot.toml", 'scattering = "medium"\nphase_g = 0.3\nbounces = 8\nestimator = "track"'),
}


def plan_text(name: str) -> str:
    volume, transfer, render = DEMOS[name]
    return f"""name = "study-{name}"
seed = 11
[[volumes]]
path = "{ROOT}/sample_volumes/{volume}"
transfer_functions = ["{ROOT}/transfer_functions/{transfer}"]
[views]
per_volume = 6
distance = [2.0, 2.6]
elevation_deg = [-10.0, 55.0]
[lights]
toward = [0.3, -0.6, 1.0]
cone_deg = 40.0
irradiance = [1.5, 3.0]
[[environments]]
kind = "sky"
[image]
width = 96
height = 96
[render]
input_spp = [1, 2, 4, 8]
reference_spp = 256
events = 2
features = ["all"]
{render}
[splits]
train = 0.5
test = 0.5
by = "view"
"""


def main() -> None:
    from tracer.dataset.run import build_dataset
    from tracer.scoring.study import run_study

    results = {}
    with tempfile.TemporaryDirectory() as tmp:
        for name in DEMOS:
            started = time.perf_counter()
            plan = Path(tmp) / f"{name}.toml"
            plan.write_text(plan_text(name))
            build_dataset(plan, Path(tmp) / name)
            built = time.perf_counter() - started
            study = run_study(Path(tmp) / name, spp=1)
            results[name] = {"build_seconds": round(built, 1), "study_seconds": round(time.perf_counter() - started - built, 1),
                             **study.as_dict()}
            best = max(study.summary, key=lambda e: e["all"]["psnr_db"])
            print(f"{name}: built in {built:.0f} s; best set {best['set']} {best['all']['psnr_db']:.2f} dB", flush=True)
    out = ROOT / "benchmarks" / "results" / "feature_study.json"
    out.write_text(json.dumps(results, indent=1) + "\n")
    plot(results, ROOT / "docs" / "feature_study.png")
    print(table(results))


def table(results: dict) -> str:
    names = list(results)
    sets = [s["name"] for s in results[names[0]]["sets"]]
    lines = ["| guide set | " + " | ".join(names) + " |", "|---|" + "---|" * len(names)]
    for set_name in sets:
        cells = []
        for name in names:
            summary = {e["set"]: e["all"]["psnr_db"] for e in results[name]["summary"]}
            cells.append(f"{summary[set_name]:.2f}" if set_name == "colour only"
                         else f"{summary[set_name] - summary['colour only']:+.2f}")
        lines.append(f"| {set_name} | " + " | ".join(cells) + " |")
    return "\n".join(lines)


def plot(results: dict, path: Path) -> None:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    import numpy as np

    names = list(results)
    sets = [s["name"] for s in results[names[0]]["sets"] if s["name"] != "colour only"]
    gains = np.array([[{e["set"]: e["all"]["psnr_db"] for e in results[n]["summary"]}[s]
                       - {e["set"]: e["all"]["psnr_db"] for e in results[n]["summary"]}["colour only"]
                       for n in names] for s in sets])
    figure, axis = plt.subplots(figsize=(10, 0.34 * len(sets) + 1.8))
    height = 0.8 / len(names)
    colours = ["#c9822f", "#2f7f8a", "#8a5a9e", "#b8473a"]
    for k, name in enumerate(names):
        axis.barh(np.arange(len(sets)) + (k - (len(names) - 1) / 2) * height, gains[:, k], height=height,
                  color=colours[k % len(colours)], label=name)
    axis.set_yticks(np.arange(len(sets)), sets)
    axis.invert_yaxis()
    axis.axvline(0, color="#333333", linewidth=0.8)
    axis.set_xlabel("mean PSNR gain over colour only (dB), baseline filter on 1-spp inputs")
    axis.legend(loc="upper right")
    figure.tight_layout()
    figure.savefig(path, dpi=100)
    plt.close(figure)


if __name__ == "__main__":
    main()
