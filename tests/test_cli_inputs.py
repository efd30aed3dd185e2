"""Bad input to train and why: one clear line, a non-zero exit, no partial output."""

from __future__ import annotations

import gzip
import json

import pandas as pd
import pytest

from clirun import nbledger

ROWS = [("pay the parcel fee now", "scam"), ("fee link http", "scam"), ("tea at the workshop", "ok"),
        ("kids tea party saturday", "ok"), ("borrow your drill", "ok"), ("courier will pay you", "scam")]


@pytest.fixture
def csv_file(tmp_path):
    path = tmp_path / "msgs.csv"
    pd.DataFrame({"id": range(len(ROWS)), "text": [t for t, _ in ROWS], "label": [l for _, l in ROWS]}).to_csv(path, index=False)
    return path


@pytest.fixture
def model(tmp_path, csv_file, capsys):
    out = tmp_path / "m.skops"
    assert nbledger(capsys, "train", csv_file, "--text-col", "text", "--label-col", "label", "--out", out,
                    "--normal-class", "ok").code == 0
    return out


def train(capsys, data, out, *extra):
    return nbledger(capsys, "train", data, "--text-col", "text", "--label-col", "label", "--out", out, *extra)


def test_wrong_column_lists_the_columns(tmp_path, csv_file, capsys):
    out = tmp_path / "x.skops"
    line = nbledger(capsys, "train", csv_file, "--text-col", "body", "--label-col", "label", "--out", out).one_error_line()
    assert "'body'" in line and "id, text, label" in line
    assert not out.exists() and list(tmp_path.glob(".x.skops*")) == []


def test_empty_file(tmp_path, capsys):
    data = tmp_path / "empty.csv"
    data.write_bytes(b"")
    assert "empty" in train(capsys, data, tmp_path / "x.skops").one_error_line()
    assert not (tmp_path / "x.skops").exists()


def test_header_only(tmp_path, capsys):
    data = tmp_path / "h.csv"
    data.write_text("text,label\n")
    assert "no rows" in train(capsys, data, tmp_path / "x.skops").one_error_line()


def test_one_class(tmp_path, capsys):
    data = tmp_path / "one.csv"
    data.write_text("text,label\nhello,ok\nhi there,ok\n")
    assert "one class" in train(capsys, data, tmp_path / "x.skops").one_error_line()
    assert not (tmp_path / "x.skops").exists() and not (tmp_path / "x.card.json").exists()


def test_missing_labels_name_the_row(tmp_path, capsys):
    data = tmp_path / "gap.csv"
    data.write_text("text,label\nhello,ok\nfee,\nlink,scam\n")
    assert "data row 2" in train(capsys, data, tmp_path / "x.skops").one_error_line()


def test_unknown_format(tmp_path, capsys):
    data = tmp_path / "msgs.xlsx"
    data.write_bytes(b"PK")
    assert ".csv, .jsonl or .parquet" in train(capsys, data, tmp_path / "x.skops").one_error_line()


def test_non_utf8_bytes_are_replaced_and_counted(tmp_path, capsys):
    data = tmp_path / "latin.csv"
    body = "text,label\n" + "".join(f"{t},{l}\n" for t, l in ROWS)
    data.write_bytes(body.encode() + "caf\xe9 fee,scam\nna\xefve tea,ok\n".encode("latin-1"))
    result = train(capsys, data, tmp_path / "x.skops")
    assert result.code == 0
    assert "warning: 2 invalid UTF-8 byte sequences" in result.err


@pytest.mark.parametrize("suffix", [".jsonl", ".jsonl.gz", ".parquet", ".csv.gz"])
def test_other_formats_train_the_same_model(tmp_path, csv_file, capsys, suffix):
    frame = pd.read_csv(csv_file)
    path = tmp_path / f"msgs{suffix}"
    if suffix.startswith(".jsonl"):
        payload = "".join(json.dumps(r) + "\n" for r in frame.to_dict("records")).encode()
        path.write_bytes(gzip.compress(payload) if suffix.endswith(".gz") else payload)
    elif suffix == ".parquet":
        frame.to_parquet(path)
    else:
        path.write_bytes(gzip.compress(csv_file.read_bytes()))
    assert train(capsys, path, tmp_path / "x.skops").code == 0
    assert train(capsys, csv_file, tmp_path / "y.skops").code == 0
    a = json.loads((tmp_path / "x.card.json").read_text())
    b = json.loads((tmp_path / "y.card.json").read_text())
    assert a["data"]["rows_per_class"] == b["data"]["rows_per_class"]
    from explain.model.loading import load_model

    x, y = load_model(tmp_path / "x.skops").view, load_model(tmp_path / "y.skops").view
    assert list(x.tokens) == list(y.tokens) and (x.weights == y.weights).all()


def test_broken_jsonl_names_the_line(tmp_path, capsys):
    data = tmp_path / "bad.jsonl"
    data.write_text('{"text": "a", "label": "ok"}\n{"text": "b", "label": \n')
    assert "line 2" in train(capsys, data, tmp_path / "x.skops").one_error_line()


def test_empty_message(model, capsys):
    assert "empty" in nbledger(capsys, "why", model, "   ").one_error_line()


def test_five_megabyte_message_is_refused_unless_allowed(model, tmp_path, capsys):
    big = tmp_path / "big.txt"
    big.write_bytes(b"parcel fee " * (5 * 1024 * 1024 // 11))
    assert "--max-bytes" in nbledger(capsys, "why", model, "--file", big).one_error_line()
    result = nbledger(capsys, "why", model, "--file", big, "--max-bytes", 6 * 1024 * 1024, "--format", "json")
    assert result.code == 0
    assert json.loads(result.out)["decision"] == "scam"


def test_message_file_with_invalid_utf8(model, tmp_path, capsys):
    msg = tmp_path / "m.txt"
    msg.write_bytes(b"pay the fee \xff\xfe now")
    result = nbledger(capsys, "why", model, "--file", msg)
    assert result.code == 0 and "2 invalid UTF-8" in result.err  # \xff and \xfe each start no sequence


def test_unknown_class_and_bad_threshold(model, capsys):
    line = nbledger(capsys, "why", model, "fee", "--normal-class", "spam").one_error_line()
    assert "ok, scam" in line
    assert "threshold" in nbledger(capsys, "why", model, "fee", "--threshold", "1.5").one_error_line()


def test_missing_model_and_bad_format(model, tmp_path, capsys):
    assert "no model file" in nbledger(capsys, "why", tmp_path / "nope.skops", "fee").one_error_line()
    assert "--format" in nbledger(capsys, "why", model, "fee", "--format", "xml").one_error_line()
