"""Reading a data file whole (``read_messages``): two versions of the code side by side, alternating.

The data: the public mail corpus (:mod:`benchmarks.mailcorpus`, 6046 messages, body
view, labels and ids) written once as CSV, JSON Lines and Parquet (``--repeat``
copies of it, under new ids). Each measurement is a fresh process that imports
``explain`` from one source tree and times one ``read_messages`` of one file
(CPU time of the process and wall time, read only: explain, pandas and pyarrow are imported
before the clock starts); the two
trees take turns, round after round, so that the load of a shared machine falls
on both alike. Reported: the median per tree and format, and their ratio.

Usage::

    python -m benchmarks.bench_read --before /work/main --after . --rounds 5
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
from pathlib import Path

CHILD = r"""
import json, sys, time
import pandas, pyarrow, pyarrow.compute, pyarrow.csv, pyarrow.parquet  # imported by either version: not timed
from explain.model.data_io import read_messages
path, longest = sys.argv[1], (None if sys.argv[2] == "none" else int(sys.argv[2]))
cpu, wall = time.process_time(), time.perf_counter()
messages = read_messages(path, "text", "label", "id", max_message_bytes=longest)
cpu, wall = time.process_time() - cpu, time.perf_counter() - wall
print(json.dumps({"cpu": cpu, "wall": wall, "n": len(messages), "chars": sum(map(len, messages.texts))}))
"""


def write_files(folder: Path, repeat: int) -> dict:
    """The corpus as .csv, .jsonl and .parquet in ``folder``; returns {format: path}."""
    import pandas as pd

    from benchmarks import mailcorpus

    corpus = mailcorpus.load(view="body")
    frame = pd.DataFrame({
        "id": [f"{i}-{r}" for r in range(repeat) for i in corpus.ids],
        "text": list(corpus.texts) * repeat,
        "label": list(corpus.labels) * repeat,
    })
    files = {"csv": folder / "corpus.csv", "jsonl": folder / "corpus.jsonl", "parquet": folder / "corpus.parquet"}
    frame.to_csv(files["csv"], index=False)
    # ASCII escapes: the earlier reader split lines at U+2028 and other Unicode line breaks inside strings.
    frame.to_json(files["jsonl"], orient="records", lines=True)
    frame.to_parquet(files["parquet"], index=False)
    return files


#: read_messages as a library call (no message limit) and as the commands call it (--max-bytes 1 MiB by default)
LIMITS = {"library": None, "cli": 1 << 20}


def measure(tree: Path, path: Path, longest: int | None) -> dict:
    done = subprocess.run(
        [sys.executable, "-c", CHILD, str(path), str(longest).lower()], cwd=tree, env={**os.environ, "PYTHONPATH": str(tree)},
        capture_output=True, text=True,
    )
    if done.returncode != 0:
        raise SystemExit(f"{tree} could not read {path.name}: {done.stderr.strip().splitlines()[-1]}")
    return json.loads(done.stdout)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--before", type=Path, required=True, help="source tree of the earlier code")
    parser.add_argument("--after", type=Path, required=True, help="source tree of the later code")
    parser.add_argument("--rounds", type=int, default=5)
    parser.add_argument("--repeat", type=int, default=1, help="copies of the corpus in each file")
    args = parser.parse_args()
    trees = {"before": args.before.resolve(), "after": args.after.resolve()}
    with tempfile.TemporaryDirectory() as work:
        files = write_files(Path(work), args.repeat)
        sizes = {fmt: path.stat().st_size for fmt, path in files.items()}
        times = {(name, fmt, lim): [] for name in trees for fmt in files for lim in LIMITS}
        for round_ in range(args.rounds):
            order = list(trees) if round_ % 2 == 0 else list(trees)[::-1]
            for fmt, path in files.items():
                for lim, longest in LIMITS.items():
                    for name in order:
                        got = measure(trees[name], path, longest)
                        times[name, fmt, lim].append(got)
        print(f"rounds: {args.rounds}, alternating; messages per file: {got['n']:,}")
        print("| file | MB | limit | before cpu s | after cpu s | after / before (cpu) | before wall s | after wall s "
              "| after / before (wall) |")
        print("| --- | --- | --- | --- | --- | --- | --- | --- | --- |")
        for fmt, lim in ((f, lim) for f in files for lim in LIMITS):
            cpu = {n: statistics.median(t["cpu"] for t in times[n, fmt, lim]) for n in trees}
            wall = {n: statistics.median(t["wall"] for t in times[n, fmt, lim]) for n in trees}
            same = {json.dumps({k: t[k] for k in ("n", "chars")}) for n in trees for t in times[n, fmt, lim]}
            assert len(same) == 1, (fmt, same)  # both trees read the same messages
            print(f"| {fmt} | {sizes[fmt] / 1e6:.1f} | {lim} | {cpu['before']:.3f} | {cpu['after']:.3f} | "
                  f"{cpu['after'] / cpu['before']:.2f} | {wall['before']:.3f} | {wall['after']:.3f} | "
                  f"{wall['after'] / wall['before']:.2f} |")


if __name__ == "__main__":
    main()
