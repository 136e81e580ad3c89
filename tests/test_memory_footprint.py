"""The memory check counts what a render really holds (README, "Bringing your own volume").

Peak resident memory (the operating system's VmHWM) of two renders of smooth uint8 volumes, 320^3 and 400^3 voxels, in
fresh processes: their difference over the difference in voxels is the per-voxel footprint, free of the
runtime's fixed share. Expected from the layout: 8-bit data is kept as it is (1 byte) beside its bricks (9^3
samples per 8^3 voxels, 1.42 bytes); the budget counts ``bytes_per_voxel`` and so must not count less.
"""

import subprocess
import sys
import textwrap

import pytest

import numpy as np

from tracer.volumes.volume import bytes_per_voxel

SCRIPT = textwrap.dedent('''
    import sys, numpy as np
    n = int(sys.argv[1]); folder = sys.argv[2]
    x = np.linspace(-1, 1, n, dtype=np.float32)
    field = np.lib.format.open_memmap(f"{folder}/v{n}.npy", mode="w+", dtype=np.uint8, shape=(n, n, n))
    for k in range(n):           # plane by plane: no full-size float temporary sets the peak
        field[:, :, k] = (np.exp(-4 * (x[:, None] ** 2 + x[None, :] ** 2 + x[k] ** 2)) * 200).astype(np.uint8)
    field.flush()
    del field, x
    import tracer
    with open(f"{folder}/s{n}.toml", "w") as handle:
        handle.write(f'[volume]\\npath = "{folder}/v{n}.npy"\\n[transfer_function]\\nopacity = [[0.0, 0.0], [255.0, 0.5]]\\n'
                     'color = [[0.0, [0.8, 0.8, 0.8]]]\\n[camera]\\nwidth = 32\\nheight = 32\\n[render]\\nspp = 1\\n')
    tracer.render(tracer.load_scene(f"{folder}/s{n}.toml"))
    print([int(line.split()[1]) for line in open("/proc/self/status") if line.startswith("VmHWM")][0] * 1024)
''')


def peak_bytes(n, folder) -> int:
    result = subprocess.run([sys.executable, "-c", SCRIPT, str(n), str(folder)], capture_output=True, text=True,
                            check=True)
    return int(result.stdout.strip().splitlines()[-1])


@pytest.mark.slow
@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="reads /proc/self/status")
def test_per_voxel_footprint_is_what_the_budget_counts(tmp_path):
    small, large = 320, 400
    peak_bytes(16, tmp_path)                     # fills the kernel cache: compiling's memory must not count below
    small_peak = peak_bytes(small, tmp_path)
    per_voxel = (peak_bytes(large, tmp_path) - small_peak) / (large ** 3 - small ** 3)
    bricks = (-(-(large - 1) // 8)) ** 3 * 9 ** 3 / large ** 3
    expected = 1 + bricks                                               # 2.42 bytes per voxel
    assert 0.8 * expected < per_voxel < 1.1 * expected, per_voxel
    assert bytes_per_voxel(np.uint8) >= per_voxel                      # the budget never counts less


@pytest.mark.parametrize("dtype, side, megabytes", [("uint8", 1500, None), ("int16", 1190, None), ("float32", 845, None),
                                                   ("uint8", 2030, 20000), ("int16", 1610, 20000)])
def test_the_largest_volumes_the_readme_names_pass_the_check(dtype, side, megabytes, monkeypatch):
    """README, "Bringing your own volume": by default 1500^3 uint8, 1190^3 int16, 845^3 float32 load, and with
    TRACER_MEMORY_BUDGET_MB=20000 2030^3 uint8 and 1610^3 int16; 2% more per axis does not."""
    from tracer.config import memory_budget
    from tracer.errors import UserError
    from tracer.volumes.volume import check_budget

    if megabytes is None:
        monkeypatch.delenv("TRACER_MEMORY_BUDGET_MB", raising=False)
    else:
        monkeypatch.setenv("TRACER_MEMORY_BUDGET_MB", str(megabytes))
    check_budget("v", (side,) * 3, dtype, memory_budget())
    with pytest.raises(UserError, match="over the memory budget"):
        check_budget("v", (int(side * 1.02),) * 3, dtype, memory_budget())
