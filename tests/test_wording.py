"""Numbers people can say: probabilities near certainty, odds factors, plurals; tints that do not invert."""

from __future__ import annotations

import math

import pytest
from matplotlib.colors import to_rgb

from explain.analysis.evidence import FlipSet
from explain.present.drawing import PALETTE
from explain.present.tint import tint
from explain.present.wording import flip_sentence, folded, odds_factor, plural, probability, probability_of_log_odds

PROBABILITIES = [
    (0.5, None, "0.5000"),
    (0.98765, None, "0.9877"),
    (1.0, 5.4e-13, "1 - 5.4e-13"),
    (1.0, None, "> 0.9999"),
    (0.99999, None, "> 0.9999"),
    (0.99999, 1.0e-5, "1 - 1e-05"),
    (3.1e-7, None, "3.1e-07"),
    (0.0, None, "< 0.0001"),
]


@pytest.mark.parametrize("p,complement,expected", PROBABILITIES)
def test_probability_wording(p, complement, expected):
    assert probability(p, complement) == expected


def test_probability_from_log_odds_keeps_its_distance_from_certainty():
    # 1 / (1 + e^-28.3) = 1 - 5.1e-13 (computed: exp(-28.3) = 5.1e-13)
    assert probability_of_log_odds(28.3) == f"1 - {math.exp(-28.3) / (1 + math.exp(-28.3)):.2g}"
    assert probability_of_log_odds(-28.3) == f"{math.exp(-28.3) / (1 + math.exp(-28.3)):.2g}"


ODDS = [
    (math.log(117), "x117"),
    (-math.log(117), "x117"),  # the side is named by the caller
    (math.log(2.19), "x2.19"),
    (0.01, "x1.01"),
    (0.0, "x1"),
    (math.log(999_999), "x999,999"),
    (194.3 * math.log(10), "about 10^194 to 1"),
    (math.log(2e6), "about 10^6 to 1"),
    (float("inf"), "beyond any number"),
]


@pytest.mark.parametrize("log_factor,expected", ODDS)
def test_odds_wording(log_factor, expected):
    assert odds_factor(log_factor) == expected


@pytest.mark.parametrize(
    "n,noun,form,expected",
    [(1, "token", None, "1 token"), (2, "token", None, "2 tokens"), (0, "word", None, "0 words"),
     (1, "entry", "entries", "1 entry"), (1204, "entry", "entries", "1,204 entries")],
)
def test_plurals(n, noun, form, expected):
    assert plural(n, noun, form) == expected


def test_folded_line_and_flip_sentences():
    assert folded(212, 3.1) == "212 smaller entries: +3.10"
    assert folded(1, -0.5) == "1 smaller entry: -0.50"
    exact = FlipSet((("fee", 2), ("link", 1)), True, "exact", "ok", None)
    assert flip_sentence(exact) == "Removing 'fee' (2 times) and 'link' would change the decision to ok; no smaller set does."
    greedy = FlipSet((("fee", 1),), False, "greedy", "ok", None)
    assert "smaller set may exist" in flip_sentence(greedy)
    none = FlipSet((), True, "exact", None, "removing every token that supports this decision does not change it")
    sentence = flip_sentence(none)
    assert sentence.lower().count("does not change") == 1 and sentence.startswith("Removing every")


@pytest.mark.parametrize("family", PALETTE)
def test_stronger_entries_are_darker_never_lighter(family):
    shades = [tint("credit", family, size, 3.0) for size in (0.5, 1.5, 3.0)]
    assert [s.level for s in shades] == [0, 1, 2]
    lightness = [sum(to_rgb(s.background)) for s in shades]
    assert lightness[0] > lightness[1] > lightness[2]
    assert {s.mark for s in shades} == {"▲"} and tint("debit", family, 1, 3).mark == "▼"


def test_a_bound_is_said_with_its_own_sign():
    # "P(flag) = > 0.9999" read as two relations at once (issue 21)
    from explain.present.wording import probability, stated

    assert stated("P(flag)", probability(1.0)) == "P(flag) > 0.9999"
    assert stated("P(flag)", probability(0.0)) == "P(flag) < 0.0001"
    assert stated("P(flag)", probability(0.7479)) == "P(flag) = 0.7479"
    assert stated("P(flag)", probability(1 - 1e-9, 1e-9)) == "P(flag) = 1 - 1e-09"


def test_one_spelling_per_flag_in_ledgers():
    # the glossary's screen word is watchlist-strong; its JSON key watchlist_strong never reaches a screen
    import io

    from rich.console import Console

    from explain.analysis.ledger import ledger_of
    from explain.analysis.risk import parse_watchlist
    from explain.present.ledger_html import ledger_context
    from explain.present.ledger_terminal import render
    from tests.corpora import loaded, make_pipeline

    texts = ["win a prize now", "prize prize claim", "free prize today", "tea at the club", "club tea sunday",
             "lend the drill"]
    pipe = make_pipeline("counts", "multinomial").fit(texts, ["scam"] * 3 + ["ok"] * 3)
    ledger = ledger_of(loaded(pipe, "ok"), "claim your prize", watchlist=parse_watchlist("prize\n", "w.txt"))
    assert any("watchlist_strong" in e.flags for e in ledger.entries)  # the key, in the result
    flags = [f for row in ledger_context(ledger)["rows"] if "flags" in row for f in row["flags"]]
    assert "watchlist-strong" in flags and not any("_" in f for f in flags)
    console = Console(width=120, no_color=True, record=True, file=io.StringIO())
    render(ledger, console)
    screen = console.export_text()
    assert "watchlist-strong" in screen and "watchlist_strong" not in screen
