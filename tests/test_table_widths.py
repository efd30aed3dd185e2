"""Issue 12, item 9 for vocab and train: at 80 and 120 columns no number is split across lines."""

import contextlib
import io
import re
from pathlib import Path

import pandas as pd
import pytest
from rich.console import Console

import explain.cli.train as train_cli
from explain.analysis.risk import Watchlist
from explain.analysis.vocab import LENSES, review_vocabulary
from explain.cli import run
from explain.model.loading import load_model
from explain.present import vocab as present

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "demo_corpus" / "messages.csv"
WIDTHS = (80, 120)
NUMBER = re.compile(r"-?\d[\d,]*(?:\.\d+)?(?:e[+-]?\d+)?")


@pytest.fixture(scope="module")
def data(tmp_path_factory):
    folder = tmp_path_factory.mktemp("widths")
    pd.read_csv(DEMO, dtype=str, keep_default_na=False).iloc[:1500].to_csv(folder / "train.csv", index=False)
    with contextlib.redirect_stdout(io.StringIO()):
        assert run(["train", str(folder / "train.csv"), "--text-col", "text", "--label-col", "label",
                    "--normal-class", "ok", "--out", str(folder / "m.skops")]) == 0
    return folder


def rendered(table, width: int) -> str:
    buffer = io.StringIO()
    Console(file=buffer, width=width, no_color=True, highlight=False).print(table)
    return buffer.getvalue()


def assert_numbers_whole(table, width: int) -> None:
    """Every cell of a column that holds numbers is on one line, whole; no line is wider than the terminal."""
    text = rendered(table, width)
    lines = text.splitlines()
    assert max(map(len, lines)) <= width
    assert "…" not in text
    checked = 0
    for column in table.columns:
        for cell in column.cells:
            cell = str(cell)
            if NUMBER.fullmatch(cell.replace(" ", "")) or (column.no_wrap and NUMBER.search(cell)):
                assert any(cell in line for line in lines), (column.header, cell, width)
                checked += 1
    assert checked > 0


@pytest.mark.parametrize("width", WIDTHS)
@pytest.mark.parametrize("lens", LENSES)
def test_vocab_tables_keep_numbers_whole(data, width, lens):
    view = load_model(data / "m.skops").view
    review = review_vocabulary(view, lens=lens, top=20, watchlist=Watchlist(("harbour", "roma", "polish"), "w.txt"))
    for c in review.comparisons:
        for side in ("for", "against"):
            table = present._token_table(review, c, c.top(lens, 20, side), side, width >= present.WIDE_TERMINAL)
            assert_numbers_whole(table, width)
    for c in review.comparisons:
        assert_numbers_whole(present._watchlist(review, c), width)


def test_the_wide_layout_fits_its_width(data):
    review = review_vocabulary(load_model(data / "m.skops").view, lens="chi2", top=20)
    c = review.comparisons[0]
    table = present._token_table(review, c, c.top("chi2", 20, "for"), "for", True)
    assert_numbers_whole(table, present.WIDE_TERMINAL)
    headers = [str(col.header) for col in table.columns]
    assert "direction" in headers and "chi-square" in headers
    # unsigned statistics, the side named in its own column
    chi = next(col for col in table.columns if col.header == "chi-square")
    assert all(not str(v).startswith("-") for v in chi.cells)


@pytest.mark.parametrize("width", WIDTHS)
def test_train_summary_keeps_numbers_whole(data, width, monkeypatch):
    buffer = io.StringIO()
    monkeypatch.setattr(train_cli, "console", Console(file=buffer, width=width, no_color=True, highlight=False))
    assert run(["train", str(data / "train.csv"), "--text-col", "text", "--label-col", "label",
                "--holdout", "0.3", "--seed", "5", "--out", str(data / f"w{width}.skops")]) == 0
    text = buffer.getvalue()
    assert max(map(len, text.splitlines())) <= width
    unwrapped = " ".join(text.split())
    for number in NUMBER.findall(unwrapped):
        assert any(number in line for line in text.splitlines()), number
