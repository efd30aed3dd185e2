"""Every text escaped in every medium: labels, tokens, file names and message text from hostile files.

Checks: the HTML twin parsed with the standard library's ``html.parser`` holds no
element or attribute made from input; the PDF's text (pypdf) and every terminal
output, read from a pseudo-terminal (``pty``, POSIX) with and without
``NO_COLOR``, hold no raw control or bidirectional character (Unicode UAX #9
lists the bidi controls); JSON on a terminal decodes to the same value.
"""

from __future__ import annotations

import json
import os
import pty
import re
import select
import subprocess
import sys
from html.parser import HTMLParser
from pathlib import Path

import pytest
import skops.io as sio
from pypdf import PdfReader
from sklearn.feature_extraction.text import CountVectorizer
from sklearn.naive_bayes import MultinomialNB
from sklearn.pipeline import make_pipeline

ROOT = Path(__file__).resolve().parent.parent
BIDI = "\u061c\u200e\u200f\u202a\u202b\u202c\u202d\u202e\u2066\u2067\u2068\u2069\u2028\u2029"
RAW = re.compile(f"[\x00-\x08\x0b-\x1f\x7f-\x9f{BIDI}]")
# Rich's own colours (SGR: ESC [ ... m) are styles, not text from input; the hostile
# sequences below are deliberately other kinds (OSC title, clear screen, BEL).
SGR = re.compile(r"\x1b\[[0-9;]*m")
BAD_LABEL = '<img src="http://127.0.0.1:9/x">\x1b[2Jscam\u202e'
MESSAGE = "pay the fee now \u202egnp.exe \x1b]0;pwn\x07 done"


@pytest.fixture(scope="module")
def hostile(tmp_path_factory):
    folder = tmp_path_factory.mktemp("hostile")
    texts = ["pay the fee\x07 now \u202egnp.exe", "tea at noon", "fee link \x1b]0;pwn\x07 now",
             "kids tea party", "fee fee pay", "tea club <b>bold</b>"] * 3
    labels = [BAD_LABEL, "ok", BAD_LABEL, "ok", BAD_LABEL, "ok"] * 3
    pipeline = make_pipeline(CountVectorizer(token_pattern=r"[^\s]+"), MultinomialNB()).fit(texts, labels)
    assert any(RAW.search(t) for t in pipeline[0].get_feature_names_out())  # the vocabulary is hostile too
    model = folder / "h\u202etxt.skops"  # a hostile file name
    sio.dump(pipeline, model)
    data = folder / "d.csv"
    import pandas as pd

    pd.DataFrame({"text": texts, "label": labels}).to_csv(data, index=False)
    message = folder / "msg.txt"
    message.write_text(MESSAGE)
    return folder, model, data, message


def _env(folder, **extra):
    env = dict(os.environ, PYTHONPATH=str(ROOT), XDG_CACHE_HOME=str(folder / "cache"), COLUMNS="80", **extra)
    env.pop("NO_COLOR", None) if "NO_COLOR" not in extra else None
    return env


class _Tags(HTMLParser):
    def __init__(self):
        super().__init__()
        self.tags = []

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))


def test_the_html_and_pdf_twins_hold_nothing_from_input_raw(hostile):
    folder, model, data, message = hostile
    out = folder / "r.pdf"
    done = subprocess.run(
        [sys.executable, "-m", "explain", "report", str(model), "--data", str(data), "--explain", str(message),
         "--normal-class", "ok", "--out", str(out), "--html", str(folder / "r.html")],
        capture_output=True, text=True, env=_env(folder), timeout=600,
    )
    assert done.returncode == 0, done.stderr
    page = (folder / "r.html").read_text(encoding="utf-8")
    assert not RAW.search(page), sorted({hex(ord(c)) for c in RAW.findall(page)})
    parser = _Tags()
    parser.feed(page)
    for tag, attrs in parser.tags:
        assert tag not in ("b", "script", "iframe", "object"), tag
        for name in ("src", "href"):
            assert attrs.get(name) is None or attrs[name].startswith(("data:", "#")), (tag, attrs.get(name)[:80])
    assert "exe.png" not in page
    text = "".join(p.extract_text() for p in PdfReader(out).pages)
    assert not RAW.search(text), sorted({hex(ord(c)) for c in RAW.findall(text)})
    assert "gnp.exe" in text and "exe.png" not in text


def _on_a_terminal(args, env, timeout=180) -> str:
    """What ``nbledger ARGS`` prints on a pseudo-terminal (stdout and stderr both on it)."""
    primary, secondary = pty.openpty()
    proc = subprocess.Popen([sys.executable, "-m", "explain", *map(str, args)], stdin=secondary, stdout=secondary,
                            stderr=secondary, env=env, close_fds=True)
    os.close(secondary)
    chunks = []
    while True:
        ready, _, _ = select.select([primary], [], [], timeout)
        if not ready:
            proc.kill()
            raise AssertionError("no output within the timeout")
        try:
            block = os.read(primary, 65536)
        except OSError:  # the terminal closed: the process has ended
            break
        if not block:
            break
        chunks.append(block)
    proc.wait(timeout=timeout)
    os.close(primary)
    return b"".join(chunks).decode("utf-8", "replace")


@pytest.mark.parametrize("no_color", [True, False])
def test_every_terminal_output_shows_controls(hostile, no_color):
    folder, model, data, message = hostile
    env = _env(folder, **({"NO_COLOR": "1"} if no_color else {}))
    runs = [
        ("why", model, "--file", message, "--normal-class", "ok"),
        ("vocab", model),
        ("assess", model, data, "--text-col", "text", "--label-col", "label", "--normal-class", "ok"),
        ("why", folder / "missing\u202e\x1b]0;x\x07.skops", "fee"),  # an error naming a hostile file name
    ]
    for args in runs:
        screen = SGR.sub("", _on_a_terminal(args, env)).replace("\r\n", "\n")
        assert not RAW.search(screen), (args[0], sorted({hex(ord(c)) for c in RAW.findall(screen)}))
    screen = _on_a_terminal(("why", model, "--file", message, "--normal-class", "ok", "--format", "json"), env)
    assert not RAW.search(screen.replace("\r\n", "\n"))
    document = json.loads(screen)
    assert BAD_LABEL in document["classes"]  # the same value, escaped for the terminal only
