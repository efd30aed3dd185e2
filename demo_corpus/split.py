"""Split the demo corpus by time, as a filter is deployed: train on the past, assess on what came after.

Messages sent before 1 October 2026 go to ``train.csv``, the rest to ``test.csv``.

Run: ``python demo_corpus/split.py --out demo_out``
"""

from __future__ import annotations

import argparse
import csv
import os
import tempfile
from pathlib import Path

HERE = Path(__file__).resolve().parent
CUTOFF = "2026-10-01"


def write_csv(path: Path, header: list[str], rows: list[dict]) -> None:
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", dir=path.parent)
    with os.fdopen(fd, "w", newline="", encoding="utf-8") as handle:
        writer = csv.DictWriter(handle, fieldnames=header)
        writer.writeheader()
        writer.writerows(rows)
    os.replace(tmp, path)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, required=True)
    args = parser.parse_args()
    with open(HERE / "messages.csv", newline="", encoding="utf-8") as handle:
        reader = csv.DictReader(handle)
        header, rows = reader.fieldnames, list(reader)
    args.out.mkdir(parents=True, exist_ok=True)
    train = [r for r in rows if r["sent_at"] < CUTOFF]
    test = [r for r in rows if r["sent_at"] >= CUTOFF]
    write_csv(args.out / "train.csv", header, train)
    write_csv(args.out / "test.csv", header, test)
    print(f"split at {CUTOFF}: {len(train)} messages to train.csv, {len(test)} to test.csv in {args.out}/")


if __name__ == "__main__":
    main()
