"""The renderer's speed, every figure measured in this run on this machine.

    python benchmarks/speed.py            # about 3 minutes on 2 cores

Prints a table and writes benchmarks/results/speed.json: the trilinear roofline (coherent rays,
same threads) and the renderer's effective field samples per second; paths per second and
seconds per spp of the three demos at 256x256 and 512x512; field samples per path with empty-
space skipping on and off; 1 -> 2 threads; cold and warm start of `tracer render`; the NumPy
oracle against the kernel; peak memory of 512x512 renders; the roofline for 128^3 and 256^3; and the
light transport options: paths per second and field samples per path for bounces 1, 4 and 16 under
both estimators on the four demos (``--only transport`` measures just these and keeps the rest of
the saved results).
"""

from __future__ import annotations

import json
import os
import platform
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "benchmarks"))


def timed(function, *args, repeat=3, **kwargs):
    best = np.inf
    result = None
    for _ in range(repeat):
        start = time.perf_counter()
        result = function(*args, **kwargs)
        best = min(best, time.perf_counter() - start)
    return best, result


def roofline(field: np.ndarray, threads: int | None = None) -> float:
    """Coherent trilinear samples per second."""
    from roofline import coherent_sampling

    from tracer.config import num_threads

    side, steps = 256, 512
    out = np.zeros(side)
    with num_threads(threads):
        coherent_sampling(field, 8, 8, np.zeros(8))
        seconds, _ = timed(coherent_sampling, field, side, steps, out)
    return side * side * steps / seconds


def march_rate(scene) -> float:
    """The renderer's march alone (no skipping, no shading) along coherent rays: samples per second."""
    from roofline import coherent_march

    from tracer.rendering.arguments import kernel_arguments

    arguments, _ = kernel_arguments(scene)
    volume, transfer, cells = arguments[0], arguments[1], arguments[2]
    side = 256
    counts = np.zeros((side, 2), np.int64)
    coherent_march(volume.field, volume.bricks, volume.shape, cells, volume.world_to_index, transfer.extinction,
                   transfer.lookup, 8, scene.settings.step_mm, np.zeros((8, 2), np.int64))
    seconds, _ = timed(coherent_march, volume.field, volume.bricks, volume.shape, cells, volume.world_to_index,
                       transfer.extinction,
                       transfer.lookup, side, scene.settings.step_mm, counts)
    return counts[:, 0].sum() / 3 / seconds


def render_rate(scene, spp, threads=None, skipping=True, repeat=2):
    from tracer.rendering import render

    render(scene.with_overrides(width=16, height=16), spp=1, threads=threads, skipping=skipping)
    seconds, frame = timed(render, scene, spp=spp, threads=threads, skipping=skipping, repeat=repeat)
    height, width = scene.camera.image_size
    paths = height * width * spp
    return {"seconds": seconds, "paths_per_second": paths / seconds, "seconds_per_spp": seconds / spp,
            "field_samples_per_path": frame.meta["field_samples"] / paths,
            "field_samples_in_nonempty_cells_per_path": frame.meta["field_samples_in_nonempty_cells"] / paths,
            "effective_samples_per_second": frame.meta["field_samples"] / seconds}


def smooth_volume(n: int) -> np.ndarray:
    axis = np.linspace(-1, 1, n, dtype=np.float32)
    x, y, z = np.meshgrid(axis, axis, axis, indexing="ij", sparse=True)
    field = np.exp(-4 * (x * x + y * y + z * z)) * (0.75 + 0.25 * np.sin(9 * x) * np.cos(7 * y) * np.sin(5 * z))
    return np.ascontiguousarray(field, dtype=np.float32)


def synthetic_scene(n: int):
    from tracer.scene.camera import Camera
    from tracer.scene import Environment, Light, RenderSettings, Scene
    from tracer.optics.transfer import TransferFunction
    from tracer.volumes import Volume

    volume = Volume(smooth_volume(n), directions=np.eye(3) * (64.0 / (n - 1)), origin=(-32.0, -32.0, -32.0))
    tf = TransferFunction(np.array([0.0, 0.3, 1.0]), np.array([0.0, 0.05, 0.3]), np.array([0.0, 1.0]),
                          np.array([[0.8, 0.7, 0.6], [0.9, 0.9, 0.9]]))
    camera = Camera(position=(90.0, -120.0, 60.0), target=(0.0, 0.0, 0.0), fov_deg=30.0, width=128, height=128)
    light = Light("directional", (0.0, -0.6, 0.8), (2.0, 2.0, 2.0))
    return Scene(volume, tf, camera, (light,), Environment("constant", ((0.2, 0.2, 0.2),) * 3),
                 RenderSettings(spp=4, step_mm=64.0 / (n - 1) / 2, scattering="medium"))


def start_times() -> dict:
    scene = ROOT / "examples" / "figurine.toml"
    command = [sys.executable, "-m", "tracer", "render", str(scene), "--spp", "1", "--width", "32", "--height", "32"]
    out = {}
    with tempfile.TemporaryDirectory() as cache, tempfile.TemporaryDirectory() as folder:
        env = dict(os.environ, NUMBA_CACHE_DIR=cache)
        for label in ("cold", "warm"):
            start = time.perf_counter()
            subprocess.run(command + ["--out", folder], env=env, check=True, capture_output=True)
            out[f"{label}_start_seconds"] = time.perf_counter() - start
    return out


def peak_memory(name: str) -> dict:
    """Peak resident memory (MiB) of a process rendering the demo at 512 x 512, 1 spp: with an empty kernel cache
    (the first run compiles: LLVM's memory counts) and with a warm one."""
    # VmHWM, not getrusage's ru_maxrss: a child started by a large parent reports at least the parent's peak there
    code = (f"import tracer; s = tracer.load_scene({str(ROOT / 'examples' / (name + '.toml'))!r}); "
            "tracer.render(s, spp=1); "
            "print([line.split()[1] for line in open('/proc/self/status') if line.startswith('VmHWM')][0])")
    out = {}
    with tempfile.TemporaryDirectory() as cache:
        env = dict(os.environ, NUMBA_CACHE_DIR=cache)
        for label in ("compiling", "warm"):
            result = subprocess.run([sys.executable, "-c", code], check=True, capture_output=True, text=True, env=env)
            out[label] = int(result.stdout.strip().splitlines()[-1]) / 1024.0
    return out


def transport_rates(size: int = 128, spp: int = 16) -> dict:
    """M paths/s and field samples per path for bounces 1, 4, 16, march and track, on each demo scene."""
    import dataclasses

    from tracer import load_scene

    out: dict = {}
    for name in ("figurine", "lattice", "plume", "flame"):
        base = load_scene(ROOT / "examples" / f"{name}.toml").with_overrides(width=size, height=size)
        out[name] = {}
        for estimator in ("march", "track"):
            for bounces in (1, 4, 16):
                settings = dataclasses.replace(base.settings, bounces=bounces, estimator=estimator)
                rate = render_rate(dataclasses.replace(base, settings=settings), spp=spp, repeat=3)
                out[name][f"{estimator} {bounces}"] = {"paths_per_second": rate["paths_per_second"],
                                                       "field_samples_per_path": rate["field_samples_per_path"]}
                print(f"{name:10s} {estimator:6s} {bounces:3d} bounces: {rate['paths_per_second'] / 1e6:6.3f} M paths/s, "
                      f"{rate['field_samples_per_path']:7.0f} field samples per path", flush=True)
    return out


def cluster_speedup(size: int = 256, spp: int = 256) -> dict:
    """One figurine render of size^2 at spp on a local cluster of 1 and of 2 workers (one numba thread each),
    cluster start included (README, "One render on a cluster")."""
    from tracer.distributed.render import default_chunk_spp, render_chunked

    out = {"size": size, "spp": spp}
    for workers in (1, 2):
        start = time.perf_counter()
        render_chunked(ROOT / "examples" / "figurine.toml", overrides={"spp": spp, "width": size, "height": size},
                       chunk_spp=default_chunk_spp(spp, workers), workers=workers, numba_threads=1)
        out[f"seconds_{workers}_worker{'s' if workers > 1 else ''}"] = time.perf_counter() - start
    out["speedup"] = out["seconds_1_worker"] / out["seconds_2_workers"]
    return out


def main() -> None:
    import argparse

    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--only", choices=["transport", "cluster"], help="measure only this part; keep the rest of speed.json")
    args = parser.parse_args()
    results = ROOT / "benchmarks" / "results" / "speed.json"
    if args.only is not None:
        report = json.loads(results.read_text())
        report[args.only] = transport_rates() if args.only == "transport" else cluster_speedup()
        results.write_text(json.dumps(report, indent=2))
        print(json.dumps(report[args.only], indent=1))
        return

    import numba

    from tests.outside.scenes import camera_table
    from tests.outside.scenes import scene as scene_file
    from tests.outside.test_oracle_agreement import LIGHTS, SKY, blob_files
    from tests.reference.oracle import Oracle
    from tracer import load_scene
    from tracer.rendering import render

    report: dict = {"machine": {"cpus": os.cpu_count(), "numba_threads": numba.get_num_threads(),
                                "platform": platform.platform(), "processor": platform.processor(),
                                "python": platform.python_version(), "numba": numba.__version__}}
    figurine = load_scene(ROOT / "examples" / "figurine.toml")

    # roofline against the renderer on the figurine volume, same threads
    report["roofline_samples_per_second"] = roofline(figurine.volume.data)
    rate = render_rate(figurine.with_overrides(width=256, height=256), spp=4)
    report["renderer_effective_samples_per_second"] = rate["effective_samples_per_second"]
    report["renderer_over_roofline"] = rate["effective_samples_per_second"] / report["roofline_samples_per_second"]
    report["march_only_samples_per_second"] = march_rate(figurine)

    # the demos
    report["demos"] = {}
    for name in ("figurine", "lattice", "plume"):
        scene = load_scene(ROOT / "examples" / f"{name}.toml")
        report["demos"][name] = {str(size): render_rate(scene.with_overrides(width=size, height=size), spp=2)
                                 for size in (256, 512)}
    report["figurine_512_1spp_seconds"] = timed(render, figurine, spp=1)[0]

    # skipping on and off
    small = figurine.with_overrides(width=256, height=256)
    on, off = render_rate(small, spp=4), render_rate(small, spp=4, skipping=False)
    report["skipping"] = {"samples_per_path_on": on["field_samples_per_path"],
                          "samples_per_path_off": off["field_samples_per_path"],
                          "samples_in_nonempty_cells_per_path": off["field_samples_in_nonempty_cells_per_path"],
                          "on_over_nonempty": on["field_samples_per_path"] / off["field_samples_in_nonempty_cells_per_path"],
                          "wall_time_ratio_off_over_on": off["seconds"] / on["seconds"]}

    # threads
    one, two = render_rate(small, spp=8, threads=1), render_rate(small, spp=8, threads=2)
    report["threads"] = {"seconds_1": one["seconds"], "seconds_2": two["seconds"], "speedup": one["seconds"] / two["seconds"]}

    report.update(start_times())

    # oracle against kernel, same tiny scene
    folder = Path(tempfile.mkdtemp(prefix="tracer-oracle-"))
    volume, transfer = blob_files(folder)
    tiny_camera = camera_table((20.0, -25.0, 8.0), (0.0, 0.0, 0.0), 22.0, 4, 4)
    tiny_path = scene_file(folder, volume, transfer, tiny_camera, LIGHTS, SKY, spp=16, scattering="graded", phase_g=0.4,
                           step_mm=0.4, interface_gradient=0.15)
    tiny = load_scene(tiny_path)
    kernel_seconds, _ = timed(render, tiny, repeat=3)
    start = time.perf_counter()
    Oracle(tiny_path).render(16)
    oracle_seconds = time.perf_counter() - start
    report["oracle"] = {"kernel_seconds": kernel_seconds, "oracle_seconds": oracle_seconds,
                        "speed_ratio": oracle_seconds / kernel_seconds}

    report["peak_memory_mib_512"] = {name: peak_memory(name) for name in ("figurine", "lattice", "plume")}

    # volume size: roofline and renderer on 128^3 and 256^3
    sizes = {}
    for n in (128, 256):
        scene = synthetic_scene(n)
        sizes[str(n)] = {"roofline_samples_per_second": roofline(scene.volume.data),
                         "renderer_effective_samples_per_second": render_rate(scene, spp=4)["effective_samples_per_second"]}
    sizes["renderer_256_over_128"] = (sizes["256"]["renderer_effective_samples_per_second"]
                                      / sizes["128"]["renderer_effective_samples_per_second"])
    report["volume_size"] = sizes
    report["transport"] = transport_rates()
    report["cluster"] = cluster_speedup()

    (ROOT / "benchmarks" / "results").mkdir(parents=True, exist_ok=True)
    (ROOT / "benchmarks" / "results" / "speed.json").write_text(json.dumps(report, indent=2))
    print_table(report)


def print_table(r: dict) -> None:
    m = 1e6
    print(f"machine: {r['machine']['cpus']} CPUs, {r['machine']['numba_threads']} numba threads, {r['machine']['platform']}")
    print(f"roofline (coherent trilinear)          {r['roofline_samples_per_second'] / m:8.1f} M samples/s")
    print(f"renderer effective (figurine 256^2)    {r['renderer_effective_samples_per_second'] / m:8.1f} M samples/s "
          f"= {100 * r['renderer_over_roofline']:.0f}% of the roofline (target >= 50%)")
    print(f"its march alone, coherent rays          {r['march_only_samples_per_second'] / m:8.1f} M samples/s")
    print("demo       size   paths/s (M)   s/spp   samples/path")
    for name, sizes in r["demos"].items():
        for size, row in sizes.items():
            print(f"{name:<10} {size:>4}   {row['paths_per_second'] / m:9.3f}   {row['seconds_per_spp']:7.3f}   "
                  f"{row['field_samples_per_path']:8.0f}")
    print(f"figurine 512^2 at 1 spp                {r['figurine_512_1spp_seconds']:8.3f} s (target <= 0.75 s)")
    s = r["skipping"]
    print(f"skipping: samples/path {s['samples_per_path_on']:.0f} on, {s['samples_per_path_off']:.0f} off, "
          f"{s['samples_in_nonempty_cells_per_path']:.0f} in non-empty cells (on/non-empty {s['on_over_nonempty']:.2f}, "
          f"target <= 1.3); wall time off/on {s['wall_time_ratio_off_over_on']:.2f}x (target >= 2)")
    print(f"threads: 1 -> 2 speedup {r['threads']['speedup']:.2f}x (target >= 1.8)")
    print(f"start: cold {r['cold_start_seconds']:.2f} s, warm {r['warm_start_seconds']:.2f} s (target <= 2 s)")
    o = r["oracle"]
    print(f"oracle {o['oracle_seconds']:.2f} s vs kernel {o['kernel_seconds'] * 1e3:.1f} ms: {o['speed_ratio']:.0f}x")
    print("peak memory 512^2 (warm cache / compiling): " + ", ".join(
        f"{k} {v['warm']:.0f} / {v['compiling']:.0f} MiB" for k, v in r["peak_memory_mib_512"].items()))
    v = r["volume_size"]
    for n in ("128", "256"):
        print(f"{n}^3: roofline {v[n]['roofline_samples_per_second'] / m:.1f} M/s, renderer "
              f"{v[n]['renderer_effective_samples_per_second'] / m:.1f} M/s")
    print(f"renderer 256^3 / 128^3 rate: {v['renderer_256_over_128']:.2f}")


if __name__ == "__main__":
    main()
