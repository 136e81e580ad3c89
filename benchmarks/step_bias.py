"""How much the march's step biases radiance near a surface, against quadrature.

    python benchmarks/step_bias.py [--seeds 8] [--plot-only]

The ball of tests/outside/test_single_scattering.py (extinction 0.36 / mm, radius 4 mm on a 161^3 grid, a point
light 2.7 mm from its surface) rendered at several ``step_mm``, each against ``scipy.integrate.quad`` of the
single-scattering integral (tests/reference/media.py), and the thick slab of tests/outside/test_half_space.py
(homogeneous up to the box faces) against the Lommel-Seeliger law. Writes benchmarks/results/step_bias.json and
docs/step_bias.png (relative error against step, with 2-standard-error bars over the seeds).
"""

from __future__ import annotations

import argparse
import json
import math
import sys
import tempfile
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

STEPS = (0.5, 0.25, 0.1, 0.05, 0.02)


def measure(render_at, reference, seeds):
    errors = [render_at(seed) / reference - 1 for seed in range(seeds)]
    return float(np.mean(errors)), float(np.std(errors, ddof=1) / math.sqrt(seeds))


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seeds", type=int, default=8)
    parser.add_argument("--plot-only", action="store_true", help="redraw docs/step_bias.png from the saved results")
    args = parser.parse_args()
    out = ROOT / "benchmarks" / "results" / "step_bias.json"
    if args.plot_only:
        saved = json.loads(out.read_text())
        plot({key: {float(s): tuple(v) for s, v in r.items()} for key, r in saved.items()})
        return

    import tracer
    from tests.outside import test_half_space as slab
    from tests.outside import test_single_scattering as ball
    from tests.outside.scenes import ball_transfer, ball_volume, camera_table, scene
    from tests.reference.media import Sphere, henyey_greenstein

    folder = Path(tempfile.mkdtemp(prefix="tracer-step-bias-"))
    volume = ball_volume(folder, n=ball.FINE)
    transfer = ball_transfer(folder, ball.OPACITY, ball.ALBEDO, radius=4.0, edge=0.001)
    table = ball.BALL_LIGHTS["point near the ball"]
    light, colour = ball.reference_light(table)
    ball_reference = ball.reference_image(Sphere((0, 0, 0), 4.0), ball.BALL_CAMERA, light).mean() * ball.ALBEDO[0] * colour[0]
    results = {"ball": {}, "slab": {}}
    for step in STEPS:
        path = scene(folder, volume, transfer, camera_table(**ball.BALL_CAMERA, width=8, height=8), [table],
                     name=f"ball{step:g}.toml", spp=4096, phase_g=ball.G, step_mm=step)
        results["ball"][step] = measure(lambda seed: float(tracer.render(path, seed=seed)["radiance"][..., 0].mean()),
                                        ball_reference, args.seeds)
        print(f"ball  step {step:5.2f} mm: {100 * results['ball'][step][0]:+.3f}% +- {100 * results['ball'][step][1]:.3f}%")
    for step in STEPS:
        def slab_render(seed, step=step):
            slab_folder = Path(tempfile.mkdtemp(dir=folder))
            frame, d, toward = slab.slab(slab_folder, "medium", 0.6, step_mm=step, seed=seed)
            return float(frame["radiance"][..., 0].mean())
        d = np.array([math.sin(slab.VIEW_POLAR), 0.0, -math.cos(slab.VIEW_POLAR)])
        toward = np.array([math.sin(slab.LIGHT_POLAR), 0.0, math.cos(slab.LIGHT_POLAR)])
        law = slab.ALBEDO[0] * henyey_greenstein(float(d @ toward), 0.6) * toward[2] / (toward[2] - d[2])
        results["slab"][step] = measure(slab_render, law, min(args.seeds, 4))
        print(f"slab  step {step:5.2f} mm: {100 * results['slab'][step][0]:+.3f}% +- {100 * results['slab'][step][1]:.3f}%")

    out.write_text(json.dumps({k: {str(s): v for s, v in r.items()} for k, r in results.items()}, indent=1))
    plot(results)
    print(f"wrote {out} and docs/step_bias.png")


def plot(results) -> None:
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    figure, axis = plt.subplots(figsize=(6.4, 3.6), dpi=120)
    for key, label, marker in (("ball", "ball, point light 2.7 mm from its surface (vs quadrature)", "o"),
                               ("slab", "slab filling the volume's box (vs Lommel-Seeliger)", "s")):
        mean = np.array([results[key][s][0] for s in STEPS]) * 100
        error = np.array([results[key][s][1] for s in STEPS]) * 200
        axis.errorbar(STEPS, mean, yerr=error, marker=marker, capsize=3, label=label)
    axis.axhline(0.0, color="0.5", lw=0.8)
    axis.set_xscale("log")
    axis.minorticks_off()
    axis.set_xticks(STEPS, [f"{s:g}" for s in STEPS])
    axis.set_xlabel("step_mm")
    axis.set_ylabel("radiance error (%)")
    axis.set_title("Step bias of the march near a surface (bars: 2 standard errors)")
    axis.legend(fontsize=8)
    figure.tight_layout()
    figure.savefig(ROOT / "docs" / "step_bias.png")


if __name__ == "__main__":
    main()
