"""The README's demo pictures: docs/demo_renders.png (the four demo scenes) and docs/transport_renders.png
(the plume with one bounce and with sixteen, the flame), each 256 x 256 at 64 spp, seed 0.

    python benchmarks/pictures.py          # about two minutes on 2 cores
"""

from __future__ import annotations

import argparse
import time
from pathlib import Path

import numpy as np

import tracer
from tracer.outputs.png import to_display, to_uint8, write_png

ROOT = Path(__file__).resolve().parents[1]


def render(name: str, size: int, spp: int) -> np.ndarray:
    scene = tracer.load_scene(ROOT / "examples" / f"{name}.toml").with_overrides(width=size, height=size, spp=spp)
    start = time.perf_counter()
    frame = tracer.render(scene)
    print(f"{name:16s} {time.perf_counter() - start:6.1f} s")
    return to_uint8(to_display(frame["radiance"]))


def strip(names, size, spp) -> np.ndarray:
    return np.concatenate([render(name, size, spp) for name in names], axis=1)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--size", type=int, default=256)
    parser.add_argument("--spp", type=int, default=64)
    args = parser.parse_args()
    write_png(ROOT / "docs" / "demo_renders.png", strip(["figurine", "lattice", "plume", "flame"], args.size, args.spp))
    write_png(ROOT / "docs" / "transport_renders.png", strip(["plume", "plume_multiple", "flame"], args.size, args.spp))
    print("wrote docs/demo_renders.png and docs/transport_renders.png")


if __name__ == "__main__":
    main()
