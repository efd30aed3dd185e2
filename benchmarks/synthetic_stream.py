"""A synthetic stream of Tideway Commons messages, as long as asked, never held whole.

A thin adapter over the demo corpus generator (``demo_corpus/generate.py``):
its ``make_message(rng, label)`` writes one invented message of a class, and
its class counts give the class mix. Messages are yielded one by one from one
seeded ``random.Random``, so a stream is reproducible and memory stays flat
however many messages it yields; :func:`write_stream` writes it to CSV
(optionally .gz) or Parquet in row groups.

Run: ``python -m benchmarks.synthetic_stream OUT N`` (e.g. ``day.parquet 1000000``).
"""

from __future__ import annotations

import argparse
import importlib.util
import random
from functools import lru_cache
from pathlib import Path
from typing import Iterator

ROOT = Path(__file__).resolve().parent.parent


@lru_cache(maxsize=1)
def generator():
    """The demo corpus generator module (a script, not a package: loaded from its path)."""
    spec = importlib.util.spec_from_file_location("tideway_generate", ROOT / "demo_corpus" / "generate.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def messages(n: int, seed: int = 20261202) -> Iterator[tuple[str, str, str]]:
    """Yield ``n`` (id, text, label) triples; labels in the demo corpus's proportions."""
    g = generator()
    rng = random.Random(seed)
    labels = ["scam", "advert", "ok"]
    weights = [g.N_SCAM, g.N_ADVERT, g.N_MESSAGES - g.N_SCAM - g.N_ADVERT]
    for i in range(n):
        label = rng.choices(labels, weights)[0]
        text, _ = g.make_message(rng, label)
        yield f"s-{i + 1:08d}", text, label


def write_stream(path, n: int, seed: int = 20261202, rows_per_group: int = 50_000) -> Path:
    """Write ``n`` synthetic messages to ``path`` (.csv, .csv.gz or .parquet), ``rows_per_group`` at a time."""
    import pyarrow as pa
    import pyarrow.csv as pcsv
    import pyarrow.parquet as pq

    path = Path(path)
    schema = pa.schema([("id", pa.string()), ("text", pa.string()), ("label", pa.string())])
    parquet = path.suffix == ".parquet"
    sink = pq.ParquetWriter(path, schema) if parquet else pcsv.CSVWriter(
        pa.output_stream(path, compression="gzip" if path.suffix == ".gz" else None), schema
    )
    with sink:
        batch = []
        for row in messages(n, seed):
            batch.append(row)
            if len(batch) == rows_per_group:
                sink.write_table(pa.Table.from_arrays([pa.array(c) for c in zip(*batch)], schema=schema))
                batch = []
        if batch:
            sink.write_table(pa.Table.from_arrays([pa.array(c) for c in zip(*batch)], schema=schema))
    return path


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("out", type=Path)
    ap.add_argument("n", type=int)
    ap.add_argument("--seed", type=int, default=20261202)
    args = ap.parse_args()
    write_stream(args.out, args.n, args.seed)


if __name__ == "__main__":
    main()
