"""One reader of data tables: the whole-file path and the streaming path give the same texts and the same errors.

``read_messages`` (every command but the ledger) gathers the chunks of the one
parser, :mod:`explain.model.table_stream`, that ``stream_texts`` (the batch
ledger) streams. Each odd or hostile file below goes through both, with the same
limits, and must end in the same one-line error, or give the same texts.

Outside reference for normal files: pandas (``pandas.read_csv``,
``pandas.read_json(lines=True)``) and pyarrow (``pyarrow.parquet.read_table``)
read the same files; the texts and ids both paths give must equal theirs.
"""

from __future__ import annotations

import gzip
import json
from pathlib import Path

import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from explain.errors import NbledgerError
from explain.model.data_io import read_column, read_messages
from explain.model.data_stream import ReadingLimits, stream_texts

MAX_BYTES = 4096
MAX_DATA_BYTES = 256 << 10


def _whole(path, id_col=None):
    return read_messages(path, "text", None, id_col, max_bytes=MAX_DATA_BYTES, max_message_bytes=MAX_BYTES)


def _streamed(path, id_col=None, chunk_rows=3):
    chunks = list(stream_texts([path], "text", id_col, chunk_rows, ReadingLimits(MAX_BYTES, MAX_DATA_BYTES)))
    texts = [t for c in chunks for t in c.texts]
    ids = [i for c in chunks for i in c.ids] if id_col is not None else None
    return texts, ids, sum(c.replaced for c in chunks)


def _both_refuse(path) -> str:
    with pytest.raises(NbledgerError) as whole:
        _whole(path)
    with pytest.raises(NbledgerError) as streamed:
        _streamed(path)
    assert str(whole.value) == str(streamed.value)
    return str(whole.value)


def _jsonl(rows) -> bytes:
    return "".join(json.dumps(r) + "\n" for r in rows).encode()


def _write(frame: pd.DataFrame, path: Path) -> None:
    """``frame`` as the file its suffix names (pandas writes it: the reference the readers are checked against)."""
    if path.suffix == ".parquet":
        frame.to_parquet(path)
    elif path.suffix == ".jsonl":
        path.write_bytes(_jsonl(frame.to_dict("records")))
    else:
        frame.to_csv(path, index=False)


# --- the same fault, the same line -------------------------------------------------------------

@pytest.mark.parametrize("suffix", [".csv", ".jsonl", ".parquet", ".csv.gz"])
def test_a_missing_column_names_the_columns_found(tmp_path, suffix):
    frame = pd.DataFrame({"id": ["m1", "m2"], "body": ["tea at four", "pay the fee"]})
    path = tmp_path / f"d{suffix}"
    _write(frame, path)
    if suffix == ".csv.gz":
        path.write_bytes(gzip.compress(frame.to_csv(index=False).encode()))
    assert _both_refuse(path) == f"d{suffix} has no column 'text'; columns found: id, body"


def test_a_malformed_csv_row_names_its_row(tmp_path):
    path = tmp_path / "bad.csv"
    path.write_text('text,label\ntea at four,ok\n"private words",ok,surplus\nfee,scam\n')
    line = _both_refuse(path)
    assert line == "bad.csv: data row 2 has 3 fields, the header has 2"
    assert "private" not in line
    path.write_text("text,label\ntea at four,ok\nshort row\n")  # fewer fields than the header is malformed too
    assert _both_refuse(path) == "bad.csv: data row 2 has 1 field, the header has 2"


def test_a_bad_json_line_names_its_line_and_the_last_row_read(tmp_path):
    path = tmp_path / "bad.jsonl"
    path.write_bytes(b'{"text": "tea"}\n\n{"text": "private words"\n')
    line = _both_refuse(path)
    assert line == "bad.jsonl: could not read past data row 1: line 3 is not valid JSON: Expecting ',' delimiter"
    path.write_bytes(b'{"text": "tea"}\n["not", "an", "object"]\n')
    assert _both_refuse(path) == "bad.jsonl: could not read past data row 1: line 2 is not a JSON object"
    path.write_bytes(b'{"text": "tea", "x": ' + b"[" * 200 + b"]" * 200 + b"}\n")
    assert _both_refuse(path) == "bad.jsonl: could not read past data row 0: line 1 nested deeper than 64 levels"


@pytest.mark.parametrize("suffix", [".csv", ".jsonl", ".parquet"])
def test_an_over_long_message_names_its_row(tmp_path, suffix):
    frame = pd.DataFrame({"text": ["tea at four", "fee " * 2000, "pay now", "x" * 9000]})
    path = tmp_path / f"long{suffix}"
    _write(frame, path)
    assert _both_refuse(path) == (
        f"long{suffix}: data row 2 holds a message longer than 4,096 bytes (--max-bytes); raise --max-bytes to read it"
    )


def test_a_row_far_over_the_bound_is_refused_before_it_is_held(tmp_path):
    path = tmp_path / "huge.jsonl"
    path.write_bytes(b'{"text": "tea"}\n{"text": "' + b"a" * (200 << 10) + b'"}\n')
    assert _both_refuse(path) == (
        "huge.jsonl: line 2 is longer than 69,632 bytes (--max-bytes 4,096 plus 65,536 for its other fields); "
        "raise --max-bytes to read it"
    )


@pytest.mark.parametrize("suffix", [".csv.gz", ".jsonl.gz", ".parquet.gz"])
def test_a_file_that_inflates_past_the_data_limit_is_stopped(tmp_path, suffix):
    frame = pd.DataFrame({"text": [f"pay the fee {i} " + "now " * 20 for i in range(20_000)]})  # ~2 MB inflated
    path = tmp_path / f"bomb{suffix}"
    if suffix == ".parquet.gz":
        plain = tmp_path / "plain.parquet"
        frame.to_parquet(plain, compression=None)
        raw = plain.read_bytes()
    elif suffix == ".jsonl.gz":
        raw = _jsonl(frame.to_dict("records"))
    else:
        raw = frame.to_csv(index=False).encode()
    packed = gzip.compress(raw, compresslevel=9)
    path.write_bytes(packed)
    assert len(raw) > 5 * len(packed) and len(raw) > MAX_DATA_BYTES and len(packed) < MAX_DATA_BYTES
    assert _both_refuse(path) == f"bomb{suffix} holds more than 262,144 bytes once decompressed (--max-data-bytes)"


def test_a_truncated_gzip_names_the_last_row_read(tmp_path):
    packed = gzip.compress(b"text\n" + b"".join(b"pay the fee %d\n" % i for i in range(5000)))
    path = tmp_path / "cut.csv.gz"
    path.write_bytes(packed[: len(packed) // 2])
    line = _both_refuse(path)
    assert line.startswith("cut.csv.gz: could not read past data row ") and "end-of-stream" in line, line


@pytest.mark.parametrize("suffix", [".csv", ".jsonl", ".parquet", ".csv.gz"])
def test_an_empty_file_is_refused(tmp_path, suffix):
    path = tmp_path / f"empty{suffix}"
    path.write_bytes(gzip.compress(b"") if suffix.endswith(".gz") else b"")
    assert _both_refuse(path) == f"empty{suffix} is empty"


def test_blank_lines_only_are_empty(tmp_path):
    for name in ("blank.csv", "blank.jsonl"):
        (tmp_path / name).write_bytes(b"\n\n  \n" if name.endswith(".jsonl") else b"  \n\n")
        assert _both_refuse(tmp_path / name) == f"{name} is empty"


@pytest.mark.parametrize("suffix", [".csv", ".jsonl"])
def test_invalid_utf8_is_replaced_and_counted_alike(tmp_path, suffix):
    path = tmp_path / f"latin{suffix}"
    if suffix == ".csv":
        path.write_bytes(b"id,text\nm1,caf\xe9 fee\nm2,na\xefve \xff\xfe tea\nm3,plain\n")
    else:
        path.write_bytes(b'{"id": "m1", "text": "caf\xe9 fee"}\n{"id": "m2", "text": "na\xefve \xff\xfe tea"}\n'
                         b'{"id": "m3", "text": "plain"}\n')
    whole = _whole(path, "id")
    texts, ids, replaced = _streamed(path, "id", chunk_rows=1)
    # Python's "replace" policy: \xe9 and \xef each start a sequence cut short; \xff and \xfe start none.
    assert whole.replaced_chars == replaced == 4
    assert whole.texts == texts == ["caf\ufffd fee", "na\ufffdve \ufffd\ufffd tea", "plain"]
    assert list(whole.ids) == ids == ["m1", "m2", "m3"]


# --- normal files: the same texts and ids as pandas and pyarrow ------------------------------------

ROWS = pd.DataFrame({
    "id": ["tc-001", "tc-002", " tc-003 ", "tc-004", "tc-005", "tc-006"],
    "text": ["Tea at the Tideway workshop, 4pm", 'pay the "parcel" fee\nnow', "", "Café £2.49 — déjà ✓",
             "  spaced  ", "a,b,c"],
    "label": ["ok", "scam", "ok", "ok", "advert", "scam"],
})


def _reference(path, suffix):
    """(texts, ids) of ``path`` as pandas or pyarrow read it."""
    if suffix.startswith(".csv"):
        frame = pd.read_csv(path, dtype=str, keep_default_na=False)
    elif suffix.startswith(".jsonl"):
        frame = pd.read_json(path, lines=True, dtype=False)
    else:
        frame = pq.read_table(path).to_pandas()
    return ["" if t is None else t for t in frame["text"]], [i.strip() for i in frame["id"]]


@pytest.mark.parametrize("suffix", [".csv", ".csv.gz", ".jsonl", ".jsonl.gz", ".parquet"])
def test_normal_files_read_as_pandas_and_pyarrow_read_them(tmp_path, suffix):
    path = tmp_path / f"rows{suffix}"
    if suffix.startswith(".csv"):
        raw = ROWS.to_csv(index=False).encode()
    elif suffix.startswith(".jsonl"):
        raw = _jsonl(ROWS.to_dict("records"))
    else:
        pq.write_table(pa.Table.from_pandas(ROWS, preserve_index=False), path, row_group_size=4)
    if suffix != ".parquet":
        path.write_bytes(gzip.compress(raw) if suffix.endswith(".gz") else raw)
    texts, ids = _reference(path, suffix)
    assert texts == list(ROWS["text"]) and len(ids) == 6  # the reference reads what was written
    whole = _whole(path)  # the column "id" is found without being named
    streamed_texts, streamed_ids, replaced = _streamed(path, "id", chunk_rows=4)
    assert whole.texts == streamed_texts == texts
    assert list(whole.ids) == streamed_ids == ids
    assert whole.id_col == "id" and whole.replaced_chars == replaced == 0
    labelled = read_messages(path, "text", "label")
    assert list(labelled.labels) == list(ROWS["label"])


def test_json_strings_may_hold_unicode_line_breaks(tmp_path):
    """Only \\n ends a JSON Lines row (JSON Lines text format); U+2028, U+0085 and form feeds inside strings are text."""
    path = tmp_path / "breaks.jsonl"
    rows = [{"id": "m1", "text": "tea\u2028at four"}, {"id": "m2", "text": "pay\x85the\x0cfee"}, {"id": "m3", "text": "ok"}]
    path.write_text("".join(json.dumps(r, ensure_ascii=False) + "\n" for r in rows), encoding="utf-8")
    texts, ids = _reference(path, ".jsonl")
    assert texts == [r["text"] for r in rows]
    assert _whole(path).texts == _streamed(path, "id")[0] == texts
    assert list(_whole(path).ids) == _streamed(path, "id")[1] == ids


def test_a_parquet_text_repeated_in_many_rows_is_held_once(tmp_path):
    """A dictionary page lets 140 kB on disk stand for 4 GB of text: the rows of a batch share one string instead."""
    long_text = "fee " * (50 << 10)  # 200 KiB
    column = pa.DictionaryArray.from_arrays(pa.array([0] * 20_000, type=pa.int32()), pa.array([long_text]))
    path = tmp_path / "repeated.parquet"
    pq.write_table(pa.table({"text": column}), path)
    assert path.stat().st_size < 1 << 20 and pq.ParquetFile(path).metadata.row_group(0).column(0).has_dictionary_page
    whole = read_messages(path, "text", max_message_bytes=256 << 10)
    chunks = list(stream_texts([path], "text", None, 5_000, ReadingLimits(256 << 10)))
    for texts in (whole.texts, [t for c in chunks for t in c.texts]):
        assert len(texts) == 20_000 and texts[0] == long_text
        assert len({id(t) for t in texts}) <= 4  # one string per batch of 5,000 rows or more, not one per row
    assert _both_refuse(path) == (
        "repeated.parquet: data row 1 holds a message longer than 4,096 bytes (--max-bytes); raise --max-bytes to read it"
    )


@pytest.mark.parametrize("suffix", [".csv", ".jsonl", ".parquet"])
def test_read_column_reads_any_one_column_through_the_same_parser(tmp_path, suffix):
    frame = ROWS.assign(sent_at=[f"2026-0{m}-1{m}T09:00:00Z" for m in range(1, 7)])
    path = tmp_path / f"rows{suffix}"
    if suffix == ".csv":
        frame.to_csv(path, index=False)
        reference = pd.read_csv(path, dtype=str, keep_default_na=False)["sent_at"].tolist()
    elif suffix == ".jsonl":
        path.write_bytes(_jsonl(frame.to_dict("records")))
        reference = pd.read_json(path, lines=True, dtype=False)["sent_at"].tolist()
    else:
        frame.to_parquet(path)
        reference = pq.read_table(path).column("sent_at").to_pylist()
    assert read_column(path, "sent_at") == reference == list(frame["sent_at"])
    with pytest.raises(NbledgerError) as missing:
        read_column(path, "house")
    assert str(missing.value) == f"rows{suffix} has no column 'house'; columns found: id, text, label, sent_at"
