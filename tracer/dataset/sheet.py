"""A contact sheet of a dataset: one row per item, the buffers a person checks first."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..errors import UserError
from ..outputs.npz import read_npz
from ..outputs.sheet import draw_buffer
from .manifest import npz_entries, read_manifest, refuse_sequences


def write_dataset_sheet(folder, path, n_items: int = 4, exposure: float = 0.0) -> Path:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from ..io.atomic import atomic_path

    folder = Path(folder)
    records = read_manifest(folder)
    if not records:
        raise UserError(f"{folder}: no finished items (manifest.jsonl is missing or empty)")
    refuse_sequences(folder, records, "dataset-sheet")
    chosen = [records[int(i)] for i in np.linspace(0, len(records) - 1, min(n_items, len(records))).round()]
    columns = ["lowest-spp input", "highest-spp input", "reference", "albedo", "event1 normal", "event1 depth"]
    figure, axes = plt.subplots(len(chosen), len(columns), figsize=(2.4 * len(columns), 2.5 * len(chosen) + 0.4),
                                squeeze=False)
    for row, record in zip(axes, chosen):
        inputs = npz_entries(record, "input")
        reference_entry = npz_entries(record, "reference")[0]
        low, high, reference = (read_npz(folder / entry["path"]) for entry in (inputs[0], inputs[-1], reference_entry))
        titles = [f"{inputs[0]['spp']} spp", f"{inputs[-1]['spp']} spp", f"reference {reference_entry['spp']} spp",
                  "albedo", "event1 normal", "event1 depth (mm)"]
        sources = [(low, "radiance"), (high, "radiance"), (reference, "radiance"), (reference, "albedo"),
                   (reference, "event1_normal"), (reference, "event1_depth")]
        for axis, (frame, key), title in zip(row, sources, titles):
            draw_buffer(figure, axis, frame, key, exposure)
            axis.set_title(title, fontsize=8)
            axis.set_xticks([])
            axis.set_yticks([])
        row[0].set_ylabel(f"{record['id']}\n({record['split']})", fontsize=7)
    figure.suptitle(f"{folder.name}: {len(records)} items", fontsize=10)
    figure.tight_layout()
    path = Path(path)
    with atomic_path(path) as temporary:
        figure.savefig(temporary, dpi=90, format="png")
    plt.close(figure)
    return path
