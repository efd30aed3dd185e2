"""``nbledger ledger`` as a user meets it: totals, warnings, bad input, interruptions."""

from __future__ import annotations

import gzip
import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from clirun import nbledger

ROOT = Path(__file__).resolve().parent.parent
CORPUS = ROOT / "demo_corpus" / "messages.csv"


@pytest.fixture(scope="module")
def model(tmp_path_factory):
    from explain.cli import run

    folder = tmp_path_factory.mktemp("model")
    assert run(["train", str(CORPUS), "--text-col", "text", "--label-col", "label",
                "--normal-class", "ok", "--out", str(folder / "tideway.skops")]) == 0
    return folder / "tideway.skops"


@pytest.fixture(scope="module")
def frame():
    return pd.read_csv(CORPUS, dtype=str, keep_default_na=False)


def leftovers(folder: Path, name: str) -> list:
    """The target, any temporary file beside it, and any staging folder of the output transaction."""
    return [
        p.name for p in folder.iterdir()
        if p.name == name or p.name.startswith(f".{name}.") or p.name.startswith(".nbledger-")
    ]


def staged_size(folder: Path, name: str) -> int:
    """Bytes written so far to the staged copy of output ``name``, or to its temporary file (0 before either exists).

    Staged names are a number and the target's suffixes (``3.parquet``), never the target's own name.
    """
    sizes = []
    for stage in folder.glob(".nbledger-*"):
        for where, _, files in os.walk(stage):
            for file in files:
                try:
                    sizes.append(os.stat(os.path.join(where, file)).st_size if file.endswith(Path(name).suffix) else 0)
                except OSError:  # renamed or removed while we looked
                    pass
    return max(sizes, default=0)


def test_totals_line_and_drivers_json(capsys, model, frame, tmp_path):
    frame.iloc[:500].to_csv(tmp_path / "in.csv", index=False)
    r = nbledger(capsys, "ledger", model, tmp_path / "in.csv", "--text-col", "text", "--id-col", "id",
                 "--out", tmp_path / "l.parquet", "--summary", tmp_path / "d.json")
    assert r.code == 0, r.err
    table = pq.read_table(tmp_path / "l.parquet")
    flagged = table.filter(table.column("flagged")).column("decided").to_pylist()
    line = r.out.strip()
    assert line.startswith("ledger: 500 messages in ") and "0 empty texts" in line
    for c in ("scam", "advert"):
        assert f"{c} {flagged.count(c):,}" in line
    doc = json.loads((tmp_path / "d.json").read_text())
    assert doc["schema"] == "nbledger.drivers/1" and doc["normal_class"] == "ok"
    assert doc["messages"] == 500 and doc["flagged"] == {"advert": flagged.count("advert"), "scam": flagged.count("scam")}
    assert {d["flagged_class"] for d in doc["drivers"]} <= {"scam", "advert"}


def test_plain_progress_lines_when_not_on_a_terminal(capsys, model, frame, tmp_path, monkeypatch):
    import explain.cli.ledger as ledger_cli

    monkeypatch.setattr(ledger_cli, "PLAIN_EVERY_SECONDS", 0.0)
    frame.iloc[:100].to_csv(tmp_path / "in.csv", index=False)
    r = nbledger(capsys, "ledger", model, tmp_path / "in.csv", "--text-col", "text", "--out", tmp_path / "l.csv", "--chunk-rows", "40")
    assert r.code == 0
    progress = [l for l in r.err.splitlines() if l.startswith("ledger: ")]
    counts = [int(l.split(" messages")[0].removeprefix("ledger: ")) for l in progress]
    # one line per chunk, or per piece of a chunk when the reading helper reads (never more than a chunk apart)
    assert counts[-1] == 100 and len(counts) >= 3
    assert all(0 < b - a <= 40 for a, b in zip([0, *counts], counts))


def test_only_flagged_writes_flagged_rows(capsys, model, frame, tmp_path):
    frame.iloc[:300].to_csv(tmp_path / "in.csv", index=False)
    nbledger(capsys, "ledger", model, tmp_path / "in.csv", "--text-col", "text", "--out", tmp_path / "all.parquet")
    r = nbledger(capsys, "ledger", model, tmp_path / "in.csv", "--text-col", "text", "--out", tmp_path / "f.parquet", "--only-flagged")
    assert r.code == 0
    every = pq.read_table(tmp_path / "all.parquet")
    assert pq.read_table(tmp_path / "f.parquet").equals(every.filter(every.column("flagged")))


def test_missing_texts_are_counted_and_explained_as_empty(capsys, model, tmp_path):
    pq.write_table(pa.table({"text": ["pay the fee", None, "", None]}), tmp_path / "in.parquet")
    r = nbledger(capsys, "ledger", model, tmp_path / "in.parquet", "--text-col", "text", "--out", tmp_path / "l.jsonl")
    assert r.code == 0
    assert "warning: 2 messages had no text (null)" in r.err
    assert "3 empty texts" in r.out
    rows = [json.loads(l) for l in (tmp_path / "l.jsonl").read_text().splitlines()]
    assert len(rows) == 4 and rows[1]["top_for"] == [] and rows[1]["flip_size"] is None


def test_a_five_megabyte_text_is_explained_and_counted(capsys, model, tmp_path):
    big = "Can I borrow your ladder on Saturday? " * (5 * 1024 * 1024 // 38 + 1)
    pd.DataFrame({"text": ["hello neighbour", big, "pay the parcel fee"]}).to_csv(tmp_path / "in.csv", index=False)
    r = nbledger(capsys, "ledger", model, tmp_path / "in.csv", "--text-col", "text", "--out", tmp_path / "l.parquet")
    assert r.code == 0, r.err
    assert "1 texts over 1 MiB (explained)" in r.out
    row = pq.read_table(tmp_path / "l.parquet").to_pylist()[1]
    assert "ladder" in row["top_for"] + row["top_against"]


def test_duplicate_ids_are_warned_with_their_count(capsys, model, tmp_path):
    pd.DataFrame({"id": ["a", "b", "a", "c", "a", "b"], "text": ["hi"] * 6}).to_csv(tmp_path / "in.csv", index=False)
    r = nbledger(capsys, "ledger", model, tmp_path / "in.csv", "--text-col", "text", "--id-col", "id", "--out", tmp_path / "l.parquet")
    assert r.code == 0
    assert "warning: 3 rows repeat an id that an earlier row has" in r.err


def test_a_truncated_gzip_names_the_last_row_read_and_writes_nothing(capsys, model, frame, tmp_path):
    packed = gzip.compress(frame.to_csv(index=False).encode())
    (tmp_path / "cut.csv.gz").write_bytes(packed[: len(packed) * 2 // 3])
    r = nbledger(capsys, "ledger", model, tmp_path / "cut.csv.gz", "--text-col", "text", "--out", tmp_path / "l.parquet", "--chunk-rows", "500")
    line = r.one_error_line()
    assert "cut.csv.gz: could not read past data row" in line and "nothing was written to" in line
    assert leftovers(tmp_path, "l.parquet") == []


@pytest.mark.parametrize("suffix", [".csv", ".jsonl"])
def test_a_bad_row_late_in_the_file_leaves_nothing(capsys, model, frame, tmp_path, suffix):
    part = frame.iloc[:3000]
    path = tmp_path / f"in{suffix}"
    if suffix == ".csv":
        body = part.to_csv(index=False).splitlines()
        body.insert(2900, 'tc-x,2026-01-01T00:00:00Z,"private words",ok,surplus')
    else:
        body = part.to_json(orient="records", lines=True).splitlines()
        body.insert(2900, '{"text": "private words"')
    path.write_text("\n".join(body) + "\n")
    r = nbledger(capsys, "ledger", model, path, "--text-col", "text", "--out", tmp_path / "l.parquet", "--chunk-rows", "100")
    line = r.one_error_line()
    # The CSV reader parses 16 MiB blocks: the whole file fails at once; JSON Lines is read line by line.
    where = "in.csv: data row 2,900 has 5 fields, the header has 4" if suffix == ".csv" else "in.jsonl: could not read past data row 2,900"
    assert where in line and "private words" not in line
    if suffix == ".jsonl":
        assert "stopped after " in line and "messages (last read: in.jsonl data row " in line
    assert leftovers(tmp_path, "l.parquet") == []


@pytest.mark.parametrize(
    "args, message",
    [
        (["--out", "l.xlsx"], "l.xlsx: unknown ledger format"),
        (["--out", "l.parquet", "--summary", "d.txt"], "d.txt: unknown flag-driver format"),
        (["--out", "l.parquet", "--text-col", "body"], "has no column 'body'; columns found: id, sent_at, text, label"),
        (["--out", "l.parquet", "--engine", "spark"], "--engine must be local or dask"),
        (["--out", "l.parquet", "--workers", "2"], "--scheduler and --workers need --engine dask"),
    ],
)
def test_bad_options_end_in_one_line(capsys, model, frame, tmp_path, monkeypatch, args, message):
    frame.iloc[:10].to_csv(tmp_path / "in.csv", index=False)
    monkeypatch.chdir(tmp_path)
    base = ["ledger", model, tmp_path / "in.csv"]
    if "--text-col" not in args:
        base += ["--text-col", "text"]
    r = nbledger(capsys, *base, *args)
    assert message in r.one_error_line()
    assert leftovers(tmp_path, "l.parquet") == [] and leftovers(tmp_path, "l.xlsx") == []


@pytest.mark.parametrize("signum", [signal.SIGINT, signal.SIGTERM])
def test_an_interrupted_run_leaves_nothing_and_says_how_far_it_got(model, frame, tmp_path, signum):
    pd.concat([frame] * 25).to_csv(tmp_path / "in.csv", index=False)
    out = tmp_path / "l.parquet"
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    proc = subprocess.Popen(
        [sys.executable, "-m", "explain", "ledger", str(model), str(tmp_path / "in.csv"), "--text-col", "text",
         "--out", str(out), "--chunk-rows", "200"],
        stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env,
    )
    deadline = time.monotonic() + 60
    while staged_size(tmp_path, "l.parquet") <= 100_000:
        assert proc.poll() is None and time.monotonic() < deadline, proc.communicate()
        time.sleep(0.05)
    proc.send_signal(signum)
    _, err = proc.communicate(timeout=60)
    assert proc.returncode == 128 + signum, err
    assert "Traceback" not in err and err.count("\n") == 1, err
    assert f"error: interrupted by {signal.Signals(signum).name} after " in err and "messages (last read: in.csv data row " in err
    assert f"nothing was written to {out}" in err
    assert leftovers(tmp_path, "l.parquet") == []
    # The tokenising helper (a fork, so it has the run's command line) ended with the run.
    deadline = time.monotonic() + 5
    while _processes_running(str(tmp_path / "in.csv")) and time.monotonic() < deadline:
        time.sleep(0.05)
    assert _processes_running(str(tmp_path / "in.csv")) == []


def _processes_running(argument: str) -> list:
    """Process ids whose command line holds ``argument`` (zombies excluded)."""
    found = []
    for entry in Path("/proc").iterdir():
        if not entry.name.isdigit():
            continue
        try:
            line = (entry / "cmdline").read_bytes().split(b"\0")
            state = (entry / "stat").read_text().rsplit(")", 1)[1].split()[0]
        except OSError:
            continue
        if argument.encode() in line and state != "Z":
            found.append(int(entry.name))
    return found


def test_without_a_normal_class_flags_are_not_known(capsys, model, frame, tmp_path):
    bare = tmp_path / "bare.skops"  # no model card beside it: no normal class
    bare.write_bytes(model.read_bytes())
    frame.iloc[:20].to_csv(tmp_path / "in.csv", index=False)
    r = nbledger(capsys, "ledger", bare, tmp_path / "in.csv", "--text-col", "text", "--out", tmp_path / "l.parquet")
    assert r.code == 0
    assert "flagged: not known (the model has no normal class" in r.out
    table = pq.read_table(tmp_path / "l.parquet")
    assert table.column("flagged").null_count == 20 and table.column("margin").null_count == 20
    r = nbledger(capsys, "ledger", bare, tmp_path / "in.csv", "--text-col", "text", "--out", tmp_path / "m.parquet",
                 "--summary", tmp_path / "d.csv")
    assert "flagging needs a normal class" in r.one_error_line()
    assert leftovers(tmp_path, "m.parquet") == [] and leftovers(tmp_path, "d.csv") == []
