"""The memory check counts what a render really holds (README, "Bringing your own volume").

Peak resident memory (the operating system's VmHWM) of two renders of smooth uint8 volumes, 320^3 and 400^3 voxels, in
fresh processes: their difference over the difference in voxels is the per-voxel footprint, free of the
runtime's fixed share. Expected from the layout: a loaded volume holds only its bricks (9^3 samples per 8^3
voxels, 1.42 bytes for 8-bit data); a reader that reads planes (``.npy``) needs nothing more, one that reads
the whole array (TIFF) holds that array (1 byte) too while bricking. The budget counts ``bytes_per_voxel``
and so must not count less.
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
    suffix = sys.argv[3]
    field = np.lib.format.open_memmap(f"{folder}/v{n}.npy", mode="w+", dtype=np.uint8, shape=(n, n, n))
    for k in range(n):           # plane by plane: no full-size float temporary sets the peak
        field[:, :, k] = (np.exp(-4 * (x[:, None] ** 2 + x[None, :] ** 2 + x[k] ** 2)) * 200).astype(np.uint8)
    field.flush()
    del field, x
    if suffix == "tif":          # pages are z planes (the TIFF reader's order); written page by page
        import tifffile
        field = np.load(f"{folder}/v{n}.npy", mmap_mode="r")
        with tifffile.TiffWriter(f"{folder}/v{n}.tif") as writer:
            for k in range(n):
                writer.write(np.ascontiguousarray(field[:, :, k].T), contiguous=True)
        del field
    import tracer
    if suffix == "tif":
        # a whole array and its bricks are held together only while the array is bricked; in a process that
        # has already rendered (a dataset build, a notebook) the runtime is loaded by then, and that is the peak
        # the budget counts (a fresh process loads numba's runtime only after the array is dropped, a lower peak)
        np.save(f"{folder}/warm.npy", np.zeros((4, 4, 4), np.uint8))
        with open(f"{folder}/warm.toml", "w") as handle:
            handle.write(f'[volume]\\npath = "{folder}/warm.npy"\\n[transfer_function]\\nopacity = [[0.0, 0.0], [255.0, 0.5]]\\n'
                         'color = [[0.0, [0.8, 0.8, 0.8]]]\\n[camera]\\nwidth = 4\\nheight = 4\\n[render]\\nspp = 1\\n')
        tracer.render(tracer.load_scene(f"{folder}/warm.toml"))
    with open(f"{folder}/s{n}.toml", "w") as handle:
        handle.write(f'[volume]\\npath = "{folder}/v{n}.{suffix}"\\n[transfer_function]\\nopacity = [[0.0, 0.0], [255.0, 0.5]]\\n'
                     'color = [[0.0, [0.8, 0.8, 0.8]]]\\n[camera]\\nwidth = 32\\nheight = 32\\n[render]\\nspp = 1\\n')
    tracer.render(tracer.load_scene(f"{folder}/s{n}.toml"))
    print([int(line.split()[1]) for line in open("/proc/self/status") if line.startswith("VmHWM")][0] * 1024)
''')


def peak_bytes(n, folder, suffix="npy") -> int:
    result = subprocess.run([sys.executable, "-c", SCRIPT, str(n), str(folder), suffix], capture_output=True, text=True,
                            check=True)
    return int(result.stdout.strip().splitlines()[-1])


@pytest.mark.slow
@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="reads /proc/self/status")
@pytest.mark.parametrize("suffix, streamed", [("npy", True), ("tif", False)])
def test_per_voxel_footprint_is_what_the_budget_counts(tmp_path, suffix, streamed):
    small, large = 320, 400
    peak_bytes(16, tmp_path, suffix)             # fills the kernel cache: compiling's memory must not count below
    small_peak = peak_bytes(small, tmp_path, suffix)
    per_voxel = (peak_bytes(large, tmp_path, suffix) - small_peak) / (large ** 3 - small ** 3)
    bricks = (-(-(large - 1) // 8)) ** 3 * 9 ** 3 / large ** 3           # 1.42 bytes per voxel
    expected = bricks if streamed else 1 + bricks
    assert 0.8 * expected < per_voxel < 1.1 * expected, per_voxel
    assert bytes_per_voxel(np.uint8, streamed) >= per_voxel            # the budget never counts less


@pytest.mark.parametrize("dtype, side, megabytes, streamed", [
    ("uint8", 1780, None, True), ("int16", 1410, None, True), ("float32", 1120, None, True),
    ("uint8", 2400, 20000, True), ("int16", 1900, 20000, True), ("uint8", 2048, 12300, True),
    ("uint8", 1500, None, False), ("int16", 1190, None, False), ("float32", 950, None, False),
    ("uint8", 2030, 20000, False), ("int16", 1610, 20000, False)])
def test_the_largest_volumes_the_readme_names_pass_the_check(dtype, side, megabytes, streamed, monkeypatch):
    """README, "Bringing your own volume": read plane by plane (.npy, raw or gzip NRRD, zarr, HDF5), by default
    1780^3 uint8, 1410^3 int16, 1120^3 float32 load, with TRACER_MEMORY_BUDGET_MB=20000 2400^3 uint8 and 1900^3
    int16, and a 2048^3 uint8 with 12300; read whole (NIfTI, DICOM, TIFF, other NRRD encodings) 1500^3 uint8,
    1190^3 int16, 950^3 float32, and 2030^3 / 1610^3 with 20000; 2% more per axis does not."""
    from tracer.config import memory_budget
    from tracer.errors import UserError
    from tracer.volumes.volume import check_budget

    if megabytes is None:
        monkeypatch.delenv("TRACER_MEMORY_BUDGET_MB", raising=False)
    else:
        monkeypatch.setenv("TRACER_MEMORY_BUDGET_MB", str(megabytes))
    check_budget("v", (side,) * 3, dtype, memory_budget(), streamed)
    with pytest.raises(UserError, match="over the memory budget"):
        check_budget("v", (int(side * 1.02),) * 3, dtype, memory_budget(), streamed)
