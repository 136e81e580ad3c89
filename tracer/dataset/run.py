"""Building a dataset: render every item of a plan, serially or on a Dask cluster, resumably.

Per item (one view): the reference over sample indices [0, R) and each input of the spp
ladder over its own range above ``INPUT_SAMPLE_BASE``, all with the item's seed. Since the
generator is a pure function of (seed, pixel, sample, dimension), disjoint sample ranges give
independent noise: an input's error is independent of the reference's.

Files go to ``DIR/items/ITEM_ID/`` (``spp0001.npz``, ..., ``reference.npz``), each written
under a temporary name and renamed; the manifest gains the item's record after all its files
are in place. A resume verifies every record's checksums, removes stray temporary files and
renders what is missing. The files themselves hold no timings (``render_seconds`` is null in
their meta; the manifest has them), so the same plan gives bit-identical files serially and on
a cluster.
"""

from __future__ import annotations

import json
import time
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

from .. import __version__
from ..errors import UserError
from .manifest import (PLAN_RECORD, read_manifest, record_is_intact, write_manifest)
from .items import finish_chunked_reference, finish_record, render_item_inputs, render_reference_chunk
from .plan import DatasetPlan, load_plan


@dataclass
class DatasetSummary:
    n_items: int
    n_done_before: int
    per_split: dict[str, int]
    total_samples: int
    seconds: float
    worst_reference_error: float
    worst_reference_psnr_db: float | None
    uncertified: list[str]


def build_dataset(plan_path, out_dir, *, resume: bool = False, workers: int | None = None,
                  scheduler: str | None = None, dashboard: bool = False,
                  on_progress: Callable[[int, int], None] | None = None, limit: int | None = None,
                  numba_threads: int | None = None) -> DatasetSummary:
    """Render every item of the plan into ``out_dir``; see the module docstring.

    ``workers`` starts a local Dask cluster (processes, one thread each, numba threads so that the
    total matches the cores, bound to 127.0.0.1); ``scheduler`` uses an existing one. Neither: serial
    in this process (numba threads in the kernel). ``limit`` stops after that many new items (for tests);
    ``numba_threads`` sets the numba threads of this process when serial, or of each local worker
    (the files do not depend on it).
    """
    plan = load_plan(plan_path)
    out_dir = Path(out_dir)
    from ..outputs.save import check_output_folder

    check_output_folder(out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    _check_or_write_plan_record(plan, out_dir, resume)
    _remove_partials(out_dir)

    items = plan.items()
    records = {}
    if resume:
        for record in read_manifest(out_dir):
            if record["index"] in records:
                continue
            if record_is_intact(out_dir, record):
                records[record["index"]] = record
        write_manifest(out_dir, list(records.values()))
    elif read_manifest(out_dir):
        raise UserError(f"{out_dir}: already holds a dataset; use --resume to continue it or choose another --out")
    done_before = len(records)
    todo = [item for item in items if item.index not in records]
    if limit is not None:
        todo = todo[:limit]
    started = time.perf_counter()
    if on_progress:
        on_progress(len(records), len(items))

    def finished(record):
        records[record["index"]] = record
        write_manifest(out_dir, list(records.values()))
        if on_progress:
            on_progress(len(records), len(items))

    plan_arguments = (str(Path(plan_path).resolve()), plan.fingerprint)
    if workers is None and scheduler is None:
        from ..config import num_threads

        with num_threads(numba_threads):
            for item in todo:
                finished(_run_item_serially(plan, item, plan_arguments, out_dir))
    else:
        from .cluster import run_on_cluster

        run_on_cluster(plan, todo, plan_arguments, out_dir, finished, workers=workers, scheduler=scheduler,
                       dashboard=dashboard, numba_threads=numba_threads)
        # a worker killed while writing leaves its temporary file; Dask reran the task under another name
        _remove_partials(out_dir)
    seconds = time.perf_counter() - started
    return summarize(plan, list(records.values()), done_before, seconds)


def _run_item_serially(plan, item, plan_arguments, out_dir) -> dict:
    chunked = plan.reference_chunks > 1
    partial = render_item_inputs(*plan_arguments, item.index, str(out_dir), not chunked)
    if chunked:
        parts = [render_reference_chunk(*plan_arguments, item.index, chunk) for chunk in range(plan.reference_chunks)]
        partial["reference"] = finish_chunked_reference(plan, item, parts, out_dir, partial["files"])
    return finish_record(plan, item, partial, out_dir)


def summarize(plan, records, done_before, seconds) -> DatasetSummary:
    per_split: dict[str, int] = {name: 0 for name, _ in plan.splits}
    total_samples = 0
    worst_error = 0.0
    worst_psnr = None
    uncertified = []
    for record in records:
        per_split[record["split"]] = per_split.get(record["split"], 0) + 1
        pixels = plan.height * plan.width if plan.crop is None else plan.crop[0] * plan.crop[1]
        total_samples += pixels * (sum(plan.input_spp) * (2 if plan.noisy_pairs else 1)
                                   + record["reference"]["spp"]) * record.get("frames", 1)
        worst_error = max(worst_error, record["reference"]["mean_relative_error"])
        psnr = record["reference"]["psnr_vs_converged_db"]
        if psnr is not None:
            worst_psnr = psnr if worst_psnr is None else min(worst_psnr, psnr)
        if not record["reference"]["certified"]:
            uncertified.append(record["id"])
    return DatasetSummary(len(records), done_before, per_split, total_samples, seconds, worst_error, worst_psnr,
                          uncertified)


def _check_or_write_plan_record(plan: DatasetPlan, out_dir: Path, resume: bool) -> None:
    from ..io.atomic import atomic_path

    path = out_dir / PLAN_RECORD
    if path.exists():
        try:
            stored = json.loads(path.read_text())
        except json.JSONDecodeError:
            raise UserError(f"{path}: not valid JSON; the dataset folder is damaged")
        if stored.get("plan_sha256") != plan.fingerprint:
            raise UserError(f"{out_dir}: was built from a different plan; choose another --out")
        if not resume:
            raise UserError(f"{out_dir}: already holds this dataset; use --resume to continue it")
        return
    record = {"tool": "tracer", "version": __version__, "plan": str(plan.source), "plan_sha256": plan.fingerprint,
              "plan_as_parsed": plan.raw, "items": len(plan.items()),
              "input_sample_base": 2**40}
    with atomic_path(path) as temporary:
        temporary.write_text(json.dumps(record, indent=2, sort_keys=True, default=str))


def _remove_partials(out_dir: Path) -> None:
    for path in out_dir.rglob("*.partial-*"):
        if path.is_file():
            path.unlink()
