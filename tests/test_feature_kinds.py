"""Exact evidence for word n-grams and custom analyzers (issue 9, items 3 and 6).

Parity with scikit-learn's ``predict_joint_log_proba`` for each kind; character
n-grams are in ``test_character_heat.py``, plain unigrams and bigrams in
``test_evidence.py``.
"""

from __future__ import annotations

import json
import re

import numpy as np
import pytest
import skops.io as sio
from hypothesis import given, settings
from hypothesis import strategies as st
from sklearn.feature_extraction.text import CountVectorizer, TfidfVectorizer
from sklearn.naive_bayes import BernoulliNB, ComplementNB, MultinomialNB
from sklearn.pipeline import Pipeline

from explain.analysis.evidence import explain_message
from explain.analysis.ledger import ledger_of
from explain.model.loading import LoadLimits, load_model
from tests.clirun import nbledger
from tests.corpora import loaded
from tests.hostile import split_words

TRAIN = ["free prize now claim", "claim your prize today", "tea at the quay today", "the ferry is late again",
         "your parcel fee is due", "rota for the quay tea"]
LABELS = ["scam", "scam", "ok", "ok", "scam", "ok"]
WORDS = sorted({w for t in TRAIN for w in t.split()}) + ["harbour", "Prize", "FEE"]
messages = st.lists(st.sampled_from(WORDS + [",", ".", "  "]), min_size=1, max_size=12).map(" ".join).filter(
    lambda t: re.search(r"\w\w", t))
classifiers = st.sampled_from([MultinomialNB, ComplementNB, BernoulliNB])
PROPERTY = settings(max_examples=60, deadline=None)


def _log_odds(pipeline, text, a, b):
    jll = pipeline[-1].predict_joint_log_proba(pipeline[:-1].transform([text]))[0]
    classes = list(pipeline[-1].classes_)
    return jll[classes.index(a)] - jll[classes.index(b)]


@PROPERTY
@given(text=messages, ngrams=st.sampled_from([(2, 2), (1, 3), (2, 3)]), nb=classifiers,
       vec=st.sampled_from([CountVectorizer, TfidfVectorizer]))
def test_word_ngrams_parity_and_spans_cover_their_words(text, ngrams, nb, vec):
    pipeline = Pipeline([("v", vec(ngram_range=ngrams)), ("nb", nb())]).fit(TRAIN, LABELS)
    expl = explain_message(loaded(pipeline, "ok"), text)
    assert expl.baseline + sum(t.evidence for t in expl.tokens) == pytest.approx(
        _log_odds(pipeline, text, expl.predicted, expl.runner_up), abs=1e-9)
    assert expl.spans_note is None
    for t in expl.tokens:
        for a, b in t.spans:
            # an n-gram's span runs from its first word to its last
            words = re.findall(r"(?u)\b\w\w+\b", text[a:b].lower())
            assert " ".join(words) == t.token


def _char_trigrams(text: str) -> list[str]:
    """A custom analyzer of our own (code, so only loaded with --trust): lower-cased character trigrams of words."""
    return [w[i : i + 3] for w in text.lower().split() for i in range(max(1, len(w) - 2))]


@PROPERTY
@given(text=messages, nb=classifiers, analyzer=st.sampled_from([split_words, _char_trigrams]))
def test_custom_analyzer_parity_without_spans(text, nb, analyzer):
    pipeline = Pipeline([("v", CountVectorizer(analyzer=analyzer)), ("nb", nb())]).fit(TRAIN, LABELS)
    model = loaded(pipeline, "ok")
    expl = explain_message(model, text)
    assert expl.baseline + sum(t.evidence for t in expl.tokens) == pytest.approx(
        _log_odds(pipeline, text, expl.predicted, expl.runner_up), abs=1e-9)
    # Evidence stays exact per feature; where each token sits is unknown, and said so.
    assert "custom analyzer" in expl.spans_note
    assert all(t.spans == () for t in expl.tokens)
    assert all(e.spans == () for e in ledger_of(model, text).entries)


def test_custom_analyzer_from_a_file_needs_trust_and_says_spans_are_omitted(tmp_path, capsys):
    pipeline = Pipeline([("v", CountVectorizer(analyzer=split_words)), ("nb", MultinomialNB())]).fit(TRAIN, LABELS)
    path = tmp_path / "custom.skops"
    sio.dump(pipeline, path)
    refused = nbledger(capsys, "why", path, "claim your prize")
    assert "--trust" in refused.one_error_line()
    trust = [a for t in sio.get_untrusted_types(file=path) for a in ("--trust", t)]
    doc = json.loads(nbledger(capsys, "why", path, "claim your prize", *trust, "--format", "json").out)
    assert "custom analyzer" in doc["spans_note"]
    model = load_model(path, trust=tuple(sio.get_untrusted_types(file=path)), limits=LoadLimits(cache=False))
    assert explain_message(model, "claim your prize").log_odds == pytest.approx(
        _log_odds(pipeline, "claim your prize", "scam", "ok"), abs=1e-9)
