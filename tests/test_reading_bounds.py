"""Bounded reading for the batch ledger: every row and line is bounded by --max-bytes before it is held whole.

Peak memory is read with ``resource.getrusage(RUSAGE_CHILDREN)`` around a fresh
process (POSIX getrusage; Linux reports ``ru_maxrss`` in KiB). Common practice,
no source: a bomb is refused in seconds and well under 1 GB.
"""

from __future__ import annotations

import gzip
import json
import os
import time
from pathlib import Path

import pyarrow as pa
import pyarrow.parquet as pq
import pytest
import skops.io as sio
from sklearn.feature_extraction.text import CountVectorizer
from sklearn.naive_bayes import MultinomialNB
from sklearn.pipeline import make_pipeline

from clirun import nbledger
from hostile import run_measured

ROOT = Path(__file__).resolve().parent.parent
TEXTS = ["pay the parcel fee", "fee link now", "tea at the workshop", "kids tea party", "sofa for sale", "sofa deal"]
LABELS = ["scam", "scam", "ok", "ok", "advert", "advert"]
GIB = 1 << 30


@pytest.fixture
def model(tmp_path):
    path = tmp_path / "m.skops"
    sio.dump(make_pipeline(CountVectorizer(), MultinomialNB()).fit(TEXTS, LABELS), path)
    return path


def _env(tmp_path):
    return dict(os.environ, PYTHONPATH=str(ROOT), XDG_CACHE_HOME=str(tmp_path / "cache"))


def _refused_quickly(args, tmp_path, expected):
    started = time.monotonic()
    code, err, peak = run_measured(args, _env(tmp_path), timeout=300)
    seconds = time.monotonic() - started
    print(f"\n{args[2].name}: exit {code} in {seconds:.1f} s, peak {peak / 2**20:.0f} MiB: {err.strip()[:160]}")
    assert code == 2 and expected in err and "Traceback" not in err, err
    assert peak < GIB
    lines = [l for l in err.splitlines() if l.strip()]
    assert len(lines) == 1, err
    return seconds


ENGINES = {"local": [], "dask": ["--engine", "dask", "--workers", "1"]}


@pytest.mark.parametrize("engine", ENGINES)
def test_a_one_line_jsonl_gz_bomb_is_refused_before_the_line_is_held(model, tmp_path, engine):
    bomb = tmp_path / "bomb.jsonl.gz"
    with gzip.open(bomb, "wb", compresslevel=1) as stream:
        stream.write(b'{"text": "')
        block = b"a" * (1 << 20)
        for _ in range(768):  # 768 MiB on one line, under 1 MB on disk
            stream.write(block)
        stream.write(b'"}\n')
    assert bomb.stat().st_size < 4 << 20
    out = tmp_path / ("l.csv" if engine == "local" else "set")
    _refused_quickly(["ledger", model, bomb, "--text-col", "text", "--out", out, *ENGINES[engine]], tmp_path,
                     "--max-bytes")
    assert not out.exists()


@pytest.mark.parametrize("engine", ENGINES)
def test_parquet_rows_of_100_mb_are_refused_unread(model, tmp_path, engine):
    """One 100 MiB row per row group: the file's own metadata shows it before a page is decompressed."""
    data = tmp_path / "rows.parquet"
    big = pa.array(["fee " * (25 << 20)], type=pa.large_string())  # 100 MiB, built once
    with pq.ParquetWriter(data, pa.schema([("text", pa.large_string())]), compression="zstd") as writer:
        for _ in range(6):
            writer.write_table(pa.table({"text": big}))
    del big
    assert data.stat().st_size < 1 << 20
    out = tmp_path / ("l.parquet" if engine == "local" else "set")
    _refused_quickly(["ledger", model, data, "--text-col", "text", "--out", out, *ENGINES[engine]], tmp_path,
                     "row group 1 holds")
    assert not out.exists()


def test_parquet_rows_of_40_mb_are_refused_a_row_at_a_time(model, tmp_path):
    data = tmp_path / "rows.parquet"
    big = "fee " * (10 << 20)  # 40 MiB per row
    pq.write_table(pa.table({"text": pa.array([big] * 12, type=pa.large_string())}), data, compression="zstd")
    del big
    assert data.stat().st_size < 16 << 20
    _refused_quickly(["ledger", model, data, "--text-col", "text", "--out", tmp_path / "l.parquet"], tmp_path, "--max-bytes")


def test_a_long_csv_row_names_the_limit(model, tmp_path, capsys):
    data = tmp_path / "long.csv"
    data.write_text("text\nshort one\n" + "fee " * (300 << 10) + "\n")
    line = nbledger(capsys, "ledger", model, data, "--text-col", "text", "--out", tmp_path / "l.csv",
                    "--max-bytes", str(256 << 10)).one_error_line()
    assert "--max-bytes" in line, line
    # Within the limit it is read and explained.
    result = nbledger(capsys, "ledger", model, data, "--text-col", "text", "--out", tmp_path / "l.csv")
    assert result.code == 0, result.err


@pytest.mark.parametrize("engine", ["local", "dask"])
def test_deep_json_and_huge_numbers_end_in_one_line(model, tmp_path, capsys, engine):
    deep = tmp_path / "deep.jsonl"
    deep.write_text('{"text": "fee", "x": ' + "[" * 100_000 + "]" * 100_000 + "}\n")
    huge = tmp_path / "huge.jsonl"
    huge.write_text('{"text": "fee", "x": ' + "9" * 5000 + "}\n")
    extra = ["--engine", engine, "--workers", "1"] if engine == "dask" else []
    for data, expected in ((deep, "nested deeper"), (huge, "number too long")):
        out = tmp_path / f"{data.stem}.csv"
        line = nbledger(capsys, "ledger", model, data, "--text-col", "text", "--out", out, *extra).one_error_line()
        assert expected in line and "internal problem" not in line, line
        assert not out.exists()


def test_max_data_bytes_bounds_each_file_once_decompressed(model, tmp_path, capsys):
    data = tmp_path / "d.jsonl.gz"
    with gzip.open(data, "wt") as stream:
        for i in range(20_000):
            stream.write(json.dumps({"text": f"pay the fee {i}"}) + "\n")
    line = nbledger(capsys, "ledger", model, data, "--text-col", "text", "--out", tmp_path / "l.csv",
                    "--max-data-bytes", "64K").one_error_line()
    assert "--max-data-bytes" in line, line
    csv = tmp_path / "d.csv.gz"
    with gzip.open(csv, "wt") as stream:
        stream.write("text\n" + "pay the fee\n" * 20_000)
    line = nbledger(capsys, "ledger", model, csv, "--text-col", "text", "--out", tmp_path / "l.csv",
                    "--max-data-bytes", "64K").one_error_line()
    assert "--max-data-bytes" in line, line


def test_why_data_id_honours_max_bytes(model, tmp_path, capsys):
    data = tmp_path / "d.csv"
    data.write_text("id,text\nsmall,pay the fee\nbig," + "fee " * (300 << 10) + "\n")
    line = nbledger(capsys, "why", model, "--data", data, "--id", "big", "--text-col", "text").one_error_line()
    assert "--max-bytes" in line and "1,048,576" in line, line
    assert nbledger(capsys, "why", model, "--data", data, "--id", "small", "--text-col", "text").code == 0


#: Commands that read a model or data, and the five limit options the README promises each of them.
READERS = ("why", "vocab", "assess", "report", "compare", "probe", "serve", "ledger")
LIMITS = {"--max-bytes", "--max-data-bytes", "--max-model-memory", "--load-timeout", "--no-cache"}


def test_every_command_that_reads_a_model_or_data_takes_the_five_limit_options():
    import typer

    import explain.cli  # noqa: F401  (registers every command)
    from explain.cli.common import app

    commands = typer.main.get_command(app).commands
    for name in READERS:
        options = {o for p in commands[name].params for o in p.opts}
        assert LIMITS <= options, (name, sorted(LIMITS - options))
    assert {"--max-bytes", "--max-data-bytes"} <= {o for p in commands["train"].params for o in p.opts}


def test_report_compare_serve_and_why_data_honour_the_limits(model, tmp_path, capsys):
    data = tmp_path / "long.csv"
    data.write_text("id,text,label\n1,pay the fee,scam\n2,tea at noon,ok\n3," + "fee " * (300 << 10) + ",scam\n")
    message = tmp_path / "long.txt"
    message.write_text("fee " * (300 << 10))
    other = tmp_path / "other.skops"
    other.write_bytes(model.read_bytes())
    runs = [
        ("report", model, "--data", data, "--text-col", "text", "--label-col", "label", "--out", tmp_path / "r.pdf"),
        ("report", model, "--explain", message, "--out", tmp_path / "r.pdf"),
        ("compare", model, other, "--data", data, "--text-col", "text"),
        ("serve", model, "--queue", data, "--text-col", "text", "--db", tmp_path / "q.db", "--port", "0"),
    ]
    for args in runs:
        result = nbledger(capsys, *args)
        errors = [l for l in result.err.splitlines() if l.startswith("error: ")]  # report also names its steps
        assert result.code == 2 and len(errors) == 1 and "Traceback" not in result.err, result.err
        assert "--max-bytes" in errors[0] and "1,048,576" in errors[0], (args[0], errors[0])
    assert not (tmp_path / "r.pdf").exists()
    # Raised, the long message is read (compare is the quickest to finish).
    result = nbledger(capsys, "compare", model, other, "--data", data, "--text-col", "text", "--max-bytes", 2 << 20)
    assert result.code == 0, result.err
    line = nbledger(capsys, "why", model, "--data", data, "--id", "1", "--text-col", "text",
                    "--max-data-bytes", "1K").one_error_line()
    assert "--max-data-bytes" in line, line
