"""Loads a `twinaudit pairs` folder with Hugging Face `datasets` and checks it against its own
metadata.jsonl files: the splits, the row counts, the columns and every value of every row.

    .venv-datasets/bin/python tools/check_pairs_dataset.py OUT

Reference: `datasets.load_dataset("imagefolder", data_dir=OUT)` (version pinned in
tools/requirements-datasets.txt), which reads one folder per split with a metadata.jsonl whose
`file_name` column names each image. Offline: no hub access, a throw-away cache. Prints one `ok`
line and exits 0, or prints every problem and exits 1. Run by tests/pairs_datasets.rs.
"""
from __future__ import annotations

import json
import os
import sys
import tempfile
from pathlib import Path

os.environ["HF_HUB_OFFLINE"] = "1"
os.environ["HF_DATASETS_OFFLINE"] = "1"
os.environ.setdefault("HF_HUB_DISABLE_PROGRESS_BARS", "1")


def main() -> int:
    if len(sys.argv) != 2:
        print(__doc__, file=sys.stderr)
        return 2
    root = Path(sys.argv[1])
    expected = {}
    for split in ("train", "validation", "test"):
        meta = root / split / "metadata.jsonl"
        if meta.is_file():
            expected[split] = [json.loads(line) for line in meta.read_text().splitlines() if line.strip()]
    if not expected:
        print(f"{root}: no split folder with a metadata.jsonl", file=sys.stderr)
        return 1

    import datasets
    from datasets.utils.logging import disable_progress_bar

    disable_progress_bar()
    problems = []
    with tempfile.TemporaryDirectory() as cache:
        loaded = datasets.load_dataset("imagefolder", data_dir=str(root), cache_dir=cache)
        if sorted(loaded.keys()) != sorted(expected):
            problems.append(f"splits: datasets found {sorted(loaded.keys())}, folders hold {sorted(expected)}")
        for split, rows in expected.items():
            if split not in loaded:
                continue
            ds = loaded[split]
            if ds.num_rows != len(rows):
                problems.append(f"{split}: {ds.num_rows} rows loaded, metadata.jsonl has {len(rows)}")
            columns = ["image"] + [k for k in rows[0] if k != "file_name"]
            if ds.column_names != columns:
                problems.append(f"{split}: columns {ds.column_names}, expected {columns}")
                continue
            by_name = {r["file_name"]: r for r in rows}
            # The loader silently drops an image that metadata.jsonl does not list.
            on_disk = {f.name for f in (root / split).iterdir() if f.name != "metadata.jsonl"}
            if on_disk != set(by_name):
                problems.append(f"{split}: files not listed in metadata.jsonl: {sorted(on_disk - set(by_name))[:3]}, "
                                f"listed but missing: {sorted(set(by_name) - on_disk)[:3]}")
            raw = ds.cast_column("image", datasets.Image(decode=False))
            seen = set()
            for i, row in enumerate(raw):
                name = Path(row["image"]["path"]).name
                want = by_name.get(name)
                if want is None:
                    problems.append(f"{split} row {i}: image {name} is not in metadata.jsonl")
                    continue
                seen.add(name)
                for key in columns[1:]:
                    if row[key] != want[key]:
                        problems.append(f"{split}/{name}: {key} loaded as {row[key]!r}, metadata has {want[key]!r}")
                image = ds[i]["image"]
                if image.mode != "RGB":
                    problems.append(f"{split}/{name}: mode {image.mode}, expected RGB")
            missing = set(by_name) - seen
            if missing:
                problems.append(f"{split}: {len(missing)} metadata rows not loaded, e.g. {sorted(missing)[0]}")
    if problems:
        for p in problems:
            print(p, file=sys.stderr)
        return 1
    counts = ", ".join(f"{split} {len(rows)} rows" for split, rows in expected.items())
    print(f"ok: datasets {datasets.__version__} loaded {root} ({counts}, {len(columns)} columns)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
