"""The review desk: a served ledger against one ``nbledger why`` command, and reviews posted by 20 clients.

Trains the Tideway Commons filter on the demo corpus (``CountVectorizer`` -> ``MultinomialNB``, three
classes), writes a 2,000-character message made of demo messages, and times in one run:

- one ``nbledger why MODEL --file message.txt --format json`` command in a fresh process (the model
  cache warm, as an analyst's second command would find it), median of ``--repeat`` runs;
- the same message's ledger served by a running desk, ``POST /api/ledger`` with its text (explained
  afresh on each request: the desk keeps ledgers of queued messages, not of posted texts), median of
  50 requests over one kept connection; target: at most 0.05 x the command;
- 20 concurrent clients (threads, one connection each) posting 25 reviews each to a desk on a fresh
  SQLite database (WAL, full sync): reviews per second and the 99th-percentile latency; each review
  explains the message again and is committed before its 201. With ``--postgres URL`` the same on
  PostgreSQL.

Run: ``python -m benchmarks.bench_desk [--repeat R] [--postgres URL|start]``.
"""

from __future__ import annotations

import argparse
import csv
import statistics
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

import httpx
import numpy as np

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT / "tests"))

from desk_support import start_server, stop  # noqa: E402

CLIENTS, EACH = 20, 25


def setup(folder: Path) -> tuple[Path, Path, str]:
    import pandas as pd
    import skops.io as sio
    from sklearn.feature_extraction.text import CountVectorizer
    from sklearn.naive_bayes import MultinomialNB
    from sklearn.pipeline import make_pipeline

    frame = pd.read_csv(ROOT / "demo_corpus" / "messages.csv")
    model = folder / "tideway.skops"
    sio.dump(make_pipeline(CountVectorizer(), MultinomialNB()).fit(frame["text"], frame["label"]), model)
    long_text = ""
    for text in frame["text"]:
        long_text += text + " "
        if len(long_text) >= 2000:
            break
    long_text = long_text[:2000]
    (folder / "message.txt").write_text(long_text, encoding="utf-8")
    queue = folder / "queue.csv"
    with open(queue, "w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(["id", "text"])
        writer.writerow(["long-2000", long_text])
        writer.writerows([(r.id, r.text) for r in frame.head(200).itertuples()])
    return model, queue, long_text


def time_command(model: Path, message: Path, repeat: int) -> float:
    command = [sys.executable, "-m", "explain", "why", str(model), "--file", str(message), "--format", "json", "--normal-class", "ok"]
    subprocess.run(command, check=True, capture_output=True)  # fills the model cache
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        subprocess.run(command, check=True, capture_output=True)
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def time_served(base: str, text: str, n: int = 50) -> float:
    times = []
    with httpx.Client(timeout=30) as client:
        client.post(f"{base}/api/ledger", json={"text": text}).raise_for_status()
        for _ in range(n):
            start = time.perf_counter()
            client.post(f"{base}/api/ledger", json={"text": text}).raise_for_status()
            times.append(time.perf_counter() - start)
    return statistics.median(times)


def post_reviews(base: str, ids: list[str]) -> tuple[float, np.ndarray]:
    latencies: list[float] = []
    lock = threading.Lock()

    def client_run(c: int):
        mine = []
        with httpx.Client(timeout=60) as client:
            for k in range(EACH):
                body = {"outcome": "upheld", "reason": f"client {c}", "review_key": f"bench-{c}-{k:03d}"}
                start = time.perf_counter()
                client.post(f"{base}/api/messages/{ids[(c * EACH + k) % len(ids)]}/reviews", json=body).raise_for_status()
                mine.append(time.perf_counter() - start)
        with lock:
            latencies.extend(mine)

    threads = [threading.Thread(target=client_run, args=(c,)) for c in range(CLIENTS)]
    start = time.perf_counter()
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    return (CLIENTS * EACH) / (time.perf_counter() - start), np.array(latencies)


def reviews_on(model: Path, queue: Path, db: str, label: str) -> None:
    process, base = start_server(model, "--queue", queue, "--db", db, "--normal-class", "ok")
    try:
        ids = [m["id"] for m in httpx.get(f"{base}/api/queue").json()["messages"] if m["id"] != "long-2000"]
        rate, latencies = post_reviews(base, ids)
    finally:
        stop(process)
    print(f"{label}: {CLIENTS} clients x {EACH} reviews: {rate:,.0f} reviews/s, "
          f"median {np.median(latencies) * 1000:.0f} ms, p99 {np.percentile(latencies, 99) * 1000:.0f} ms")


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--repeat", type=int, default=5)
    parser.add_argument("--postgres", default=None,
                        help="postgresql:// URL of an empty database, or 'start' for a server of its own (tests/pg_server.py)")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        model, queue, text = setup(folder)
        command = time_command(model, folder / "message.txt", args.repeat)
        process, base = start_server(model, "--queue", queue, "--db", folder / "speed.sqlite", "--normal-class", "ok")
        try:
            served = time_served(base, text)
        finally:
            stop(process)
        print(f"message of {len(text):,} characters")
        print(f"nbledger why (one command, cache warm), median of {args.repeat}: {command * 1000:.0f} ms")
        print(f"served ledger, median of 50: {served * 1000:.1f} ms = {served / command:.4f} x the command "
              f"(target <= 0.05)")
        reviews_on(model, queue, str(folder / "reviews.sqlite"), "SQLite")
        if args.postgres == "start":
            from pg_server import postgres_server

            with postgres_server() as url:
                reviews_on(model, queue, url, "PostgreSQL")
        elif args.postgres:
            reviews_on(model, queue, args.postgres, "PostgreSQL")


if __name__ == "__main__":
    main()
