"""Small dataset plans for the tests, written with absolute paths into a temporary folder."""

from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def write_plan(folder: Path, *, views=2, variants=0, width=24, height=24, input_spp=(1, 2), reference_spp=16,
               extra_render="", splits='train = 0.5\nvalidation = 0.25\ntest = 0.25\nby = "view"', volumes=("plume", "figurine"),
               extra="") -> Path:
    tfs = {"figurine": "figurine_clay", "lattice": "lattice_metal", "plume": "plume_smoke", "flame": "flame_soot"}
    volume_tables = "".join(
        f'[[volumes]]\npath = "{ROOT}/sample_volumes/{name}.nrrd"\n'
        f'transfer_functions = ["{ROOT}/transfer_functions/{tfs[name]}.toml"]\n\n' for name in volumes)
    text = f"""name = "test"
seed = 3
{extra}
{volume_tables}
[transfer_jitter]
variants = {variants}
value = 0.02
opacity = 0.2

[views]
per_volume = {views}
distance = [2.0, 2.4]

[[environments]]
kind = "sky"

[[environments]]
kind = "constant"
radiance = [0.2, 0.2, 0.2]

[image]
width = {width}
height = {height}

[render]
input_spp = [{", ".join(map(str, input_spp))}]
reference_spp = {reference_spp}
{extra_render}

[splits]
{splits}
"""
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / "plan.toml"
    path.write_text(text)
    return path
