"""The manifest: one JSON record per finished item, in ``DIR/manifest.jsonl``.

Rewritten whole under a temporary name and renamed after every item, so a kill at any moment
leaves either the old or the new manifest, never a torn line. Records carry the sha256 of
every file they list; a resume trusts a record only when every checksum matches.
"""

from __future__ import annotations

import hashlib
import json
from pathlib import Path

from ..errors import UserError
from ..io.atomic import atomic_path

MANIFEST = "manifest.jsonl"
PLAN_RECORD = "dataset.json"


def sha256_file(path) -> str:
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for block in iter(lambda: handle.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def read_manifest(folder) -> list[dict]:
    path = Path(folder) / MANIFEST
    if not path.exists():
        return []
    records = []
    for number, line in enumerate(path.read_text().splitlines(), 1):
        if not line.strip():
            continue
        try:
            records.append(json.loads(line))
        except json.JSONDecodeError:
            raise UserError(f"{path}: line {number}: not valid JSON; the manifest is damaged")
    return records


def write_manifest(folder, records: list[dict]) -> None:
    path = Path(folder) / MANIFEST
    text = "".join(json.dumps(record, sort_keys=True) + "\n" for record in sorted(records, key=lambda r: r["index"]))
    with atomic_path(path) as temporary:
        temporary.write_text(text)


def npz_entries(record: dict, role: str) -> list[dict]:
    """A record's NPZ files of one role ("input", "reference", ...), lowest spp first."""
    return sorted((e for e in record["files"].values() if e["role"] == role and e["path"].endswith(".npz")),
                  key=lambda e: e["spp"])


def record_is_intact(folder, record: dict) -> bool:
    """Every file the record lists exists and matches its sha256."""
    folder = Path(folder)
    for entry in record.get("files", {}).values():
        path = folder / entry["path"]
        if not path.is_file() or sha256_file(path) != entry["sha256"]:
            return False
    return True


def refuse_sequences(folder, records: list[dict], command: str) -> None:
    """A sequence dataset's items hold frames; the single-view commands refuse them in one line."""
    frames = next((record["frames"] for record in records if "frames" in record), None)
    if frames is not None:
        raise UserError(f"{folder}: a sequence dataset ({frames} frames per item); {command} takes single views "
                        "(score a sequence's frames with tracer score-sequence)")
