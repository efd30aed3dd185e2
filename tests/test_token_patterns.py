"""The named token patterns of ``nbledger train --tokens`` (issue 9, item 2).

Every example value is reserved: RFC 2606 domains (example.org/.net/.com),
RFC 5737 addresses (192.0.2.x) and the 555-01xx numbers set aside for fiction.
"""

from __future__ import annotations

import json

import pytest
import skops.io as sio
from hypothesis import given, settings
from hypothesis import strategies as st
from sklearn.feature_extraction.text import CountVectorizer

from explain.cli import run
from explain.errors import NbledgerError
from explain.model.featurizer import Featurizer
from explain.model.token_patterns import ENTITIES, WORDS, token_pattern
from explain.model.training import TrainSettings

# (message, the tokens the entities pattern must make of it, lower-cased as the vectorizer does)
TABLE = [
    ("Visit https://tideway.example.net/notices today.",
     ["visit", "https://tideway.example.net/notices", "today"]),
    ("See www.example.org, then reply.", ["see", "www.example.org", "then", "reply"]),
    ("Rota at tideway.example.org/rota?week=3 (new)", ["rota", "at", "tideway.example.org/rota?week=3", "new"]),
    ("Bare address example.com.", ["bare", "address", "example.com"]),
    ("Write to warden@example.org now!", ["write", "to", "warden@example.org", "now"]),
    ("Tea money: £2.49 each, $1,200 total, 40€ fee", ["tea", "money", "£2.49", "each", "$1,200", "total", "40€", "fee"]),
    ("Call 555-0134 or (01632) 555-0142 or +1 202-555-0143.",
     ["call", "555-0134", "or", "(01632) 555-0142", "or", "+1 202-555-0143"]),
    ("Router 192.0.2.14 is down", ["router", "192.0.2.14", "is", "down"]),
    # Ordinary words stay as the default pattern cuts them.
    ("The harbour end.Then 3.50pm tea", ["the", "harbour", "end", "then", "50pm", "tea"]),
    ("e.g. quay", ["quay"]),
]


@pytest.mark.parametrize("text,expected", TABLE)
def test_entities_table(text, expected):
    f = Featurizer(CountVectorizer(token_pattern=ENTITIES).fit([text]))
    occ = f.occurrences(text)
    assert list(occ.tokens) == expected
    # Spans cut the original text exactly: the token is the text under its span, lower-cased.
    assert occ.spans is not None, occ.spans_note
    assert [text[a:b].lower() for a, b in occ.spans] == expected


def test_words_is_scikit_learns_default_and_unknown_names_are_refused():
    # scikit-learn's CountVectorizer documents token_pattern=r"(?u)\b\w\w+\b" as its default.
    assert WORDS == CountVectorizer().token_pattern
    assert token_pattern("entities") == ENTITIES and token_pattern("words") == WORDS
    with pytest.raises(NbledgerError, match="--tokens"):
        token_pattern("sentences")
    with pytest.raises(NbledgerError, match="word analyzer"):
        TrainSettings(tokens="entities", analyzer="char_wb")


pieces = st.lists(
    st.sampled_from([
        "warden@example.org", "https://tideway.example.net/a", "£3.20", "555-0107", "192.0.2.9",
        "quay", "Ferry", "tea", ",", ".", " ", "  ", "\n", "(", ")", "!", "example.com", "40€",
    ]),
    max_size=12,
)


@settings(max_examples=100, deadline=None)
@given(parts=pieces)
def test_entity_spans_cut_the_text_exactly(parts):
    text = "".join(parts)
    f = Featurizer(CountVectorizer(token_pattern=ENTITIES, ngram_range=(1, 2)).fit([text + " quay"]))
    occ = f.occurrences(text)
    assert occ.spans is not None, occ.spans_note
    for token, (a, b) in zip(occ.tokens, occ.spans):
        if " " not in token or token == text[a:b].lower():
            assert text[a:b].lower() == token
        else:  # a bigram covers both its tokens and what lies between them
            first, second = token.split(" ", 1)[0], token.rsplit(" ", 1)[1]
            assert text[a:b].lower().startswith(first) and text[a:b].lower().endswith(second)


def test_train_with_entities_keeps_values_whole_and_skops_trusts_it(tmp_path):
    data = tmp_path / "d.csv"
    rows = [("Pay £2.49 at https://pay.example.net/fee now", "scam"), ("Tea at the quay, call 555-0134", "ok"),
            ("Claim £40 at pay.example.com today", "scam"), ("Rota from warden@example.org", "ok")]
    data.write_text("text,label\n" + "".join(f'"{t}",{c}\n' for t, c in rows), encoding="utf-8")
    model = tmp_path / "m.skops"
    assert run(["train", str(data), "--text-col", "text", "--label-col", "label", "--tokens", "entities",
                "--out", str(model)]) == 0
    # No untrusted types: the model loads with skops's defaults (no trusted list).
    assert sio.get_untrusted_types(file=model) == []
    vocabulary = sio.load(model)[0].vocabulary_
    assert {"£2.49", "https://pay.example.net/fee", "555-0134", "warden@example.org", "pay.example.com"} <= set(vocabulary)
    card = json.loads((tmp_path / "m.card.json").read_text())
    assert card["settings"]["tokens"] == "entities"
    assert run(["train", str(data), "--text-col", "text", "--label-col", "label", "--tokens", "lines",
                "--out", str(tmp_path / "n.skops")]) == 2
