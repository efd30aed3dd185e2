"""Speed and memory of ``nbledger ledger``, measured side by side in one run.

1. Ledger (local engine, Parquet out) divided by the pipeline's own
   ``predict_proba`` over the same synthetic messages, both including
   reading the CSV file. Target: <= 1.3. Also the ledger without its
   tokenising helper process (one core).
2. Peak resident memory of the ledger at 500,000 messages divided by that at
   50,000 (each run in its own child process; ``ru_maxrss`` from
   ``os.wait4``). Target: <= 1.15.
3. Dask with two local worker processes against the local engine in one
   process (and, beside it, with its tokenising helper) on 400,000 messages (a Parquet data set of 50,000-row row groups): the speed-up
   (target >= 1.4) and messages per second of each; Dask both with its
   cluster start-up included and on a cluster started beforehand.

Data: the synthetic Tideway Commons stream (``benchmarks/synthetic_stream.py``),
a filter trained on the demo corpus. Times are the best of ``--repeats``
(``time.perf_counter``); files are written once into ``--work`` and reused.

Run: ``python -m benchmarks.bench_ledger [--n 200000] [--dask-n 400000] [--repeats 2]``
"""

from __future__ import annotations

import argparse
import os
import platform
import subprocess
import sys
import time
from pathlib import Path

from benchmarks.synthetic_stream import write_stream

ROOT = Path(__file__).resolve().parent.parent


def best_of(repeats, fn):
    """Best wall-clock seconds over ``repeats`` runs (CPU seconds of that run in ``best_of.cpu``)."""
    best = float("inf")
    for _ in range(repeats):
        start, cpu = time.perf_counter(), time.process_time()
        fn()
        if time.perf_counter() - start < best:
            best, best_of.cpu = time.perf_counter() - start, time.process_time() - cpu
    return best


def data(work: Path, n: int, suffix: str) -> Path:
    path = work / f"stream-{n}{suffix}"
    if not path.exists():
        partial = path.with_name(".partial-" + path.name)  # same suffix: it picks the format
        write_stream(partial, n, rows_per_group=50_000)
        partial.rename(path)
    return path


def trained_model(work: Path) -> Path:
    from explain.cli import run

    path = work / "tideway.skops"
    if not path.exists():
        code = run(["train", str(ROOT / "demo_corpus" / "messages.csv"), "--text-col", "text", "--label-col", "label",
                    "--normal-class", "ok", "--out", str(path)])
        assert code == 0
    return path


def peak_rss_mb(model: Path, source: Path, out: Path) -> float:
    """Peak resident memory (MB) of a child process writing the ledger of ``source``."""
    code = (
        "from explain.model.loading import load_model; from explain.runs.ledger_local import write_ledger; "
        f"write_ledger(load_model({str(model)!r}), [{str(source)!r}], 'text', {str(out)!r}, id_col='id')"
    )
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    child = subprocess.Popen([sys.executable, "-c", code], env=env)
    _, status, usage = os.wait4(child.pid, 0)
    assert status == 0, status
    return usage.ru_maxrss / 1024  # Linux reports KiB


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--n", type=int, default=200_000)
    ap.add_argument("--rss-small", type=int, default=50_000)
    ap.add_argument("--rss-large", type=int, default=500_000)
    ap.add_argument("--dask-n", type=int, default=400_000)
    ap.add_argument("--repeats", type=int, default=2)
    ap.add_argument("--work", type=Path, default=ROOT / ".cache" / "bench_ledger")
    args = ap.parse_args()
    args.work.mkdir(parents=True, exist_ok=True)

    import pyarrow.csv as pcsv
    import skops.io as sio

    from explain.model.loading import load_model
    from explain.runs.ledger_dask import dask_client, write_ledger_dask
    from explain.runs.ledger_local import write_ledger

    model_path = trained_model(args.work)
    model = load_model(model_path)
    pipeline = sio.load(model_path, trusted=sio.get_untrusted_types(file=model_path))
    print(f"machine: {platform.node()} {platform.machine()}, {os.cpu_count()} cores, Python {platform.python_version()}")
    print(f"date: {time.strftime('%Y-%m-%d %H:%M UTC', time.gmtime())}, load average {os.getloadavg()[0]:.1f}")

    # 1. ledger vs predict_proba
    csv = data(args.work, args.n, ".csv")
    out = args.work / "ledger.parquet"

    def scores():
        texts = pcsv.read_csv(csv).column("text").to_pylist()
        pipeline.predict_proba(texts)

    t_proba = best_of(args.repeats, scores)
    cpu_proba = best_of.cpu
    t_ledger = best_of(args.repeats, lambda: write_ledger(model, [csv], "text", out, id_col="id"))
    cpu_ledger = best_of.cpu
    t_alone = best_of(args.repeats, lambda: write_ledger(model, [csv], "text", out, id_col="id", helper=False))
    print(f"\n1. {args.n:,} messages from CSV: predict_proba {t_proba:.2f} s ({args.n / t_proba:,.0f}/s), "
          f"ledger {t_ledger:.2f} s ({args.n / t_ledger:,.0f}/s); ratio {t_ledger / t_proba:.2f} (target <= 1.3); "
          f"CPU seconds of this process {cpu_proba:.2f} and {cpu_ledger:.2f} (the ledger's helper process reads and tokenises "
          f"on the second core); ledger in one process {t_alone:.2f} s, ratio {t_alone / t_proba:.2f}")

    # 2. peak memory, each size in a child process
    small, large = data(args.work, args.rss_small, ".csv"), data(args.work, args.rss_large, ".csv")
    rss_small = peak_rss_mb(model_path, small, args.work / "small.parquet")
    rss_large = peak_rss_mb(model_path, large, args.work / "large.parquet")
    print(f"\n2. peak RSS: {args.rss_small:,} messages {rss_small:.0f} MB, {args.rss_large:,} messages {rss_large:.0f} MB; "
          f"ratio {rss_large / rss_small:.3f} (target <= 1.15)")

    # 3. Dask with two local worker processes vs the local engine
    folder = args.work / f"dataset-{args.dask_n}"
    if not folder.exists():
        folder.mkdir()
        data(args.work, args.dask_n, ".parquet").rename(folder / "part.0.parquet")
    t_local = best_of(args.repeats, lambda: write_ledger(model, [folder], "text", args.work / "local.parquet", id_col="id"))
    t_single = best_of(args.repeats, lambda: write_ledger(model, [folder], "text", args.work / "local.parquet",
                                                         id_col="id", helper=False))
    t_dask_cold = best_of(1, lambda: write_ledger_dask(model, [folder], "text", args.work / "dask-out", workers=2, id_col="id"))
    with dask_client(None, 2, 10.0) as client:
        address = client.scheduler.address
        t_dask = best_of(args.repeats, lambda: write_ledger_dask(model, [folder], "text", args.work / "dask-out",
                                                                 scheduler=address, id_col="id"))
    n = args.dask_n
    print(f"\n3. {n:,} messages (Parquet, 50,000-row groups): local, one process {t_single:.2f} s "
          f"({n / t_single:,.0f}/s); local with its tokenising helper {t_local:.2f} s ({n / t_local:,.0f}/s); "
          f"Dask 2 workers {t_dask:.2f} s ({n / t_dask:,.0f}/s) on a running cluster, "
          f"{t_dask_cold:.2f} s ({n / t_dask_cold:,.0f}/s) with cluster start-up; "
          f"speed-up over one process {t_single / t_dask:.2f} (with start-up {t_single / t_dask_cold:.2f}; target >= 1.4), "
          f"over the local engine with its helper {t_local / t_dask:.2f}")
    print(f"load average at the end {os.getloadavg()[0]:.1f}")


if __name__ == "__main__":
    main()
