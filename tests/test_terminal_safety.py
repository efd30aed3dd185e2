"""Hostile text is shown, never obeyed; environment problems end in one clear line."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest
import skops.io as sio
from sklearn.feature_extraction.text import CountVectorizer
from sklearn.naive_bayes import MultinomialNB
from sklearn.pipeline import make_pipeline

from clirun import nbledger
from explain.model.model_files import card_path_for
from explain.present.token_display import safe_line, safe_text, shown

ROOT = Path(__file__).resolve().parent.parent
ESC_TITLE = "\x1b]0;owned\x07"
CLEAR = "\x1b[2J"
RLO = "\u202e"
HOSTILE = f"pay the fee {ESC_TITLE}now{CLEAR} at {RLO}moc.elpmaxe\u202c sofa"
RAW = ("\x1b", RLO, "\u202c", "\x9b")


@pytest.fixture
def model(tmp_path):
    texts = ["pay the fee now", "fee now", "tea at the workshop", "kids tea", f"sofa {ESC_TITLE} deal", "sofa deal"]
    labels = ["scam", "scam", "ok", "ok", "ad\x1b[31mvert", "ad\x1b[31mvert"]
    path = tmp_path / "m.skops"
    sio.dump(make_pipeline(CountVectorizer(token_pattern=r"[^ ]+"), MultinomialNB()).fit(texts, labels), path)
    return path


def test_controls_and_bidi_are_made_visible():
    assert safe_line("a\x1b[2Jb") == "a\\x1b[2Jb"
    assert safe_line(f"x{RLO}y\u2066z") == "x<U+202E>y<U+2066>z"
    assert safe_line("\x9b31m\x7f") == "\\x9b31m\\x7f"
    assert safe_line("two\nlines\r") == "two\\nlines\\r"
    assert safe_text("two\nlines\tand\x07") == "two\nlines\tand\\x07"
    assert shown(" dep") == "␣dep" and shown(f"{RLO}fee ") == "<U+202E>fee␣"
    assert safe_line("plain café £2") == "plain café £2"  # printable text is untouched


@pytest.mark.parametrize("args", [
    ("why", "{model}", HOSTILE),
    ("vocab", "{model}"),
    ("assess", "{model}", "{data}", "--text-col", "text", "--label-col", "label"),
])
def test_no_raw_control_or_bidi_reaches_the_terminal(model, tmp_path, capsys, args):
    data = tmp_path / "d.csv"
    data.write_text("id,text,label\n" + f'"x{ESC_TITLE}",{HOSTILE},scam\n' + "2,tea at the workshop,ok\n"
                    + f"3,sofa {RLO} deal,ad\x1b[31mvert\n", encoding="utf-8")
    filled = [a.format(model=model, data=data) for a in args]
    result = nbledger(capsys, *filled)
    assert result.code == 0, result.err
    for text in (result.out, result.err):
        assert not any(ch in text for ch in RAW), [c for c in RAW if c in text]
    assert "\\x1b" in result.out


def test_text_files_are_safe_and_files_for_programs_exact(model, tmp_path, capsys):
    out = tmp_path / "vocab.txt"
    assert nbledger(capsys, "vocab", model, "--out", out).code == 0
    assert not any(ch in out.read_text() for ch in RAW)
    csv = tmp_path / "vocab.csv"
    assert nbledger(capsys, "vocab", model, "--format", "csv", "--out", csv).code == 0
    assert ESC_TITLE.split("\x07")[0].lower() in csv.read_text()  # the token itself, exactly


def test_a_hostile_file_name_in_an_error_is_shown_safely(tmp_path, capsys):
    line = nbledger(capsys, "why", tmp_path / f"m{CLEAR}{RLO}.skops", "fee").one_error_line()
    assert "\\x1b[2J<U+202E>" in line and "\x1b" not in line


# --- the environment ----------------------------------------------------------

def _subprocess(args, tmp_path, **options):
    env = dict(os.environ, PYTHONPATH=str(ROOT), XDG_CACHE_HOME=str(tmp_path / "cache"))
    return subprocess.run([sys.executable, "-m", "explain", *map(str, args)], env=env, capture_output=True,
                          text=True, timeout=120, **options)


def test_closed_standard_input(model, tmp_path):
    done = subprocess.run(
        f'exec 0<&-; "{sys.executable}" -m explain why "{model}" -', shell=True, capture_output=True, text=True,
        env=dict(os.environ, PYTHONPATH=str(ROOT), XDG_CACHE_HOME=str(tmp_path / "cache")), timeout=120,
    )
    assert done.returncode == 2 and done.stderr.startswith("error: standard input is closed"), done.stderr


@pytest.mark.parametrize("command", [("why", "{model}", "pay the fee"), ("vocab", "{model}")])
def test_closed_standard_output_is_one_line(model, tmp_path, command):
    """``nbledger ... >&-``: POSIX lets a program start with a standard stream closed (the shell's ``>&-``)."""
    args = " ".join(f'"{a.format(model=model)}"' for a in command)
    done = subprocess.run(
        f'exec 1>&-; "{sys.executable}" -m explain {args}', shell=True, capture_output=True, text=True,
        env=dict(os.environ, PYTHONPATH=str(ROOT), XDG_CACHE_HOME=str(tmp_path / "cache")), timeout=120,
    )
    assert done.returncode == 2 and "Traceback" not in done.stderr, done.stderr
    assert done.stderr.count("\n") == 1 and done.stderr.startswith("error: standard output is closed"), done.stderr


def test_a_text_part_past_the_reading_limit_is_named_in_the_one_line(model, tmp_path, capsys):
    """An e-mail whose only text part is 20 MB: the line says which reading limit left no text to explain."""
    from explain.model.email_reader import Limits

    size = 20_000_000
    assert size > Limits().max_decoded_bytes
    mail = tmp_path / "big.eml"
    mail.write_bytes(b"From: desk@example.org\r\nSubject: fee\r\nMIME-Version: 1.0\r\n"
                     b"Content-Type: multipart/mixed; boundary=b\r\n\r\n--b\r\nContent-Type: text/plain\r\n\r\n"
                     + b"pay the fee " * (size // 12) + b"\r\n--b--\r\n")
    line = nbledger(capsys, "why", model, "--file", mail, "--email", "--max-bytes", 32_000_000).one_error_line()
    assert "no text in the body view" in line and f"reading limit of {Limits().max_decoded_bytes:,}" in line, line


@pytest.mark.parametrize("where, expected", [
    ("missing", "no model file at"),
    ("folder", "is a folder"),
    ("/dev/zero", "not a regular file"),
    ("/proc/self/nope/m.skops", "no model file at"),
    ("/proc/self/mem", "cannot read the model file"),
])
def test_model_paths_that_are_not_model_files(tmp_path, capsys, where, expected):
    path = {"missing": tmp_path / "none.skops", "folder": tmp_path}.get(where, Path(where))
    line = nbledger(capsys, "why", path, "fee").one_error_line()
    assert expected in line and str(path) in line


def test_a_card_that_cannot_be_read(model, capsys):
    card_path_for(model).mkdir()
    line = nbledger(capsys, "why", model, "fee").one_error_line()
    assert "model card" in line and "folder" in line


@pytest.mark.skipif(os.geteuid() == 0, reason="root reads files whatever their permissions")
def test_an_unreadable_model(model, capsys):
    model.chmod(0)
    line = nbledger(capsys, "why", model, "fee").one_error_line()
    assert "permission denied" in line


def test_a_data_file_that_is_a_fifo(model, tmp_path, capsys):
    fifo = tmp_path / "d.csv"
    os.mkfifo(fifo)
    line = nbledger(capsys, "assess", model, fifo, "--text-col", "text", "--label-col", "label").one_error_line()
    assert "not a regular file" in line


def test_a_ragged_csv_names_the_data_row(model, tmp_path, capsys):
    data = tmp_path / "d.csv"
    data.write_text('text,label\nfee now,scam\n"tea\nat home",ok\nsofa,advert,extra\nkids,ok\n')
    line = nbledger(capsys, "assess", model, data, "--text-col", "text", "--label-col", "label").one_error_line()
    assert "d.csv: data row 3 has 3 fields, the header has 2" in line


def test_an_output_in_proc_is_refused_before_computing(model, tmp_path):
    done = _subprocess(["vocab", model, "--images", tmp_path / "img", "--out", "/proc/x/a.txt"], tmp_path)
    assert done.returncode == 2 and done.stderr.count("\n") == 1 and "/proc" in done.stderr
    assert not (tmp_path / "img").exists()
