"""Shared set-up of the review desk's tests: a filter trained with scikit-learn itself, a queue, servers."""

from __future__ import annotations

import csv
import os
import socket
import subprocess
import sys
import time
from pathlib import Path

import httpx
import pandas as pd
from sklearn.feature_extraction.text import CountVectorizer
from sklearn.naive_bayes import MultinomialNB
from sklearn.pipeline import make_pipeline

ROOT = Path(__file__).resolve().parent.parent
CORPUS = ROOT / "demo_corpus" / "messages.csv"
#: A message that would run script, restyle the page and fetch a remote image if it were not shown as text.
HOSTILE_ID = "tc-hostile"


def hostile_text(port: int) -> str:
    return (
        f'<script>fetch("http://127.0.0.1:{port}/script-ran")</script>'
        f'<style>body {{ background: url("http://127.0.0.1:{port}/style-ran") }}</style>'
        f'<img src="http://127.0.0.1:{port}/image-fetched" onerror="fetch(\'http://127.0.0.1:{port}/handler-ran\')">'
        " win a prize, pay the fee now"
    )


def train_filter(folder: Path, classes=("ok", "scam"), rows: int = 1500):
    """A CountVectorizer + MultinomialNB pipeline fitted on the demo corpus, saved with skops; (pipeline, path)."""
    import skops.io as sio

    frame = pd.read_csv(CORPUS)
    frame = frame[frame["label"].isin(classes)].head(rows)
    pipeline = make_pipeline(CountVectorizer(), MultinomialNB()).fit(frame["text"], frame["label"])
    path = folder / "filter.skops"
    sio.dump(pipeline, path)
    return pipeline, path


def write_queue(folder: Path, n: int = 120, hostile_port: int | None = None) -> Path:
    frame = pd.read_csv(CORPUS).tail(n)
    rows = [(r.id, r.text) for r in frame.itertuples()]
    if hostile_port is not None:
        rows.append((HOSTILE_ID, hostile_text(hostile_port)))
    path = folder / "queue.csv"
    with open(path, "w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(["id", "text"])
        writer.writerows(rows)
    return path


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def start_server(model: Path, *args, port: int | None = None, env=None) -> tuple[subprocess.Popen, str]:
    """``nbledger serve`` in a process of its own; returns once /healthz answers."""
    port = port or free_port()
    command = [sys.executable, "-m", "explain", "serve", str(model), "--port", str(port), *map(str, args)]
    process = subprocess.Popen(command, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                               env={**os.environ, **(env or {})})
    base = f"http://127.0.0.1:{port}"
    deadline = time.monotonic() + 120
    while time.monotonic() < deadline:
        if process.poll() is not None:
            raise AssertionError(f"the desk ended: {process.stderr.read()}")
        try:
            if httpx.get(base + "/healthz", timeout=2).status_code == 200:
                return process, base
        except httpx.HTTPError:
            time.sleep(0.2)
    process.kill()
    raise AssertionError("the desk did not answer within 120 s")


def stop(process: subprocess.Popen) -> None:
    if process.poll() is None:
        process.terminate()
        try:
            process.wait(20)
        except subprocess.TimeoutExpired:
            process.kill()
            process.wait()
