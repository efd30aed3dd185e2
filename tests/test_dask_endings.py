"""Endings of a ledger run on a local Dask cluster: interrupts and lost workers, each one line.

Common practice, no source: whatever stops the run (SIGINT or SIGTERM at any
moment, workers killed once or twice), it ends with exactly one ``error:`` line
and exit 130 / 143 / 2, no traceback or cluster record on the terminal, no
output, no staging or temporary folder, and no process of the run left alive.
"""

from __future__ import annotations

import os
import random
import signal
import subprocess
import sys
import time
import uuid
from pathlib import Path

import pandas as pd
import pytest

pytest.importorskip("distributed", reason="the dask extra is not installed")

import skops.io as sio  # noqa: E402
from corpora import make_pipeline  # noqa: E402

ROOT = Path(__file__).resolve().parent.parent
CORPUS = ROOT / "demo_corpus" / "messages.csv"
#: Signals sent, one in each equal part of a full run.
MOMENTS = 3


@pytest.fixture(scope="module")
def setup(tmp_path_factory):
    frame = pd.read_csv(CORPUS, dtype=str, keep_default_na=False)
    folder = tmp_path_factory.mktemp("dask-endings")
    sio.dump(make_pipeline("counts", "multinomial").fit(frame.text, frame.label), folder / "m.skops")
    frame.to_parquet(folder / "in.parquet", row_group_size=1000)  # six pieces for two workers
    return folder


def _run(folder: Path, tmp: Path, out: Path):
    """The ledger on a local cluster of two workers, marked so that every process it starts can be found."""
    mark = uuid.uuid4().hex
    env = dict(os.environ, PYTHONPATH=str(ROOT), XDG_CACHE_HOME=str(folder / "cache"), TMPDIR=str(tmp),
               NBLEDGER_TEST_RUN=mark)
    args = [sys.executable, "-m", "explain", "ledger", str(folder / "m.skops"), str(folder / "in.parquet"),
            "--text-col", "text", "--engine", "dask", "--workers", "2", "--out", str(out)]
    return subprocess.Popen(args, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True), mark


def _marked(mark: str) -> list:
    """Live processes (zombies excluded) whose environment carries ``mark``."""
    found = []
    for entry in Path("/proc").iterdir():
        if not entry.name.isdigit():
            continue
        try:
            marked = f"NBLEDGER_TEST_RUN={mark}".encode() in (entry / "environ").read_bytes()
            state = (entry / "stat").read_text().rsplit(")", 1)[1].split()[0]
        except OSError:
            continue
        if marked and state != "Z":
            found.append(int(entry.name))
    return found


def _workers(pid: int) -> list:
    """The cluster's worker processes: children of the run started by multiprocessing's spawn."""
    found = []
    for entry in Path("/proc").iterdir():
        try:
            parent = int((entry / "stat").read_text().rsplit(")", 1)[1].split()[1])
            spawned = b"spawn_main" in (entry / "cmdline").read_bytes()
        except (OSError, ValueError, IndexError):
            continue
        if parent == pid and spawned:
            found.append(int(entry.name))
    return found


def _ended_cleanly(proc, mark, tmp, out, codes, expected=None) -> int:
    err = proc.stderr.read()
    code = proc.wait(timeout=180)
    assert code in codes, (code, err)
    assert "Traceback" not in err and "leaked" not in err and "distributed" not in err, err
    if code > 0:
        # Off a terminal the run says how far it got in plain periodic lines ("ledger: N messages ..."), by design.
        lines = [line for line in err.splitlines() if line.strip() and not line.startswith("ledger: ")]
        assert len(lines) == 1 and lines[0].startswith("error: "), err
        assert expected is None or any(e in lines[0] for e in expected), lines[0]
        assert not out.exists()
    assert list(tmp.iterdir()) == [], list(tmp.rglob("*"))[:5]
    assert [p for p in out.parent.iterdir() if p.name.startswith(".nbledger-")] == []
    deadline = time.monotonic() + 10
    while _marked(mark) and time.monotonic() < deadline:
        time.sleep(0.1)
    assert _marked(mark) == []
    return code


def test_sigint_and_sigterm_at_random_moments_end_in_one_line_and_leave_nothing(setup, tmp_path):
    tmp = tmp_path / "tmp"
    tmp.mkdir()
    started = time.monotonic()
    proc, mark = _run(setup, tmp, tmp_path / "full")
    _ended_cleanly(proc, mark, tmp, tmp_path / "full", (0,))
    full = time.monotonic() - started
    rng = random.Random(22)
    for part in range(MOMENTS):
        out = tmp_path / f"set{part}"
        which = rng.choice([signal.SIGINT, signal.SIGTERM])
        proc, mark = _run(setup, tmp, out)
        time.sleep(full * (part + rng.random()) / MOMENTS)
        proc.send_signal(which)
        # -signal: it came before the interpreter set up its handlers, so before any work.
        code = _ended_cleanly(proc, mark, tmp, out, (0, 128 + which, -which), ["interrupted"])
        print(f"\n{which.name} at part {part} of a {full:.1f} s run: exit {code}")


def test_workers_killed_twice_end_in_one_line(setup, tmp_path):
    tmp = tmp_path / "tmp"
    tmp.mkdir()
    out = tmp_path / "set"
    proc, mark = _run(setup, tmp, out)
    killed = 0
    for _ in range(2):  # the nanny restarts its worker once; kill both generations
        deadline = time.monotonic() + 120
        while len(_workers(proc.pid)) < 2 and proc.poll() is None and time.monotonic() < deadline:
            time.sleep(0.1)
        time.sleep(1.0)
        for pid in _workers(proc.pid):
            os.kill(pid, signal.SIGKILL)
            killed += 1
    assert killed >= 2
    _ended_cleanly(proc, mark, tmp, out, (2,), ["the Dask cluster failed during the run",
                                               "could not start its workers"])
