"""Character n-grams: evidence per character is the sum over the n-grams covering it (issue 9, item 4)."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from sklearn.feature_extraction.text import CountVectorizer
from sklearn.naive_bayes import MultinomialNB
from sklearn.pipeline import Pipeline

from explain.analysis.ledger import ledger_of
from explain.present.ledger_html import ledger_context
from tests.corpora import loaded

TRAIN = ["free prize now", "claim your prize", "tea at the quay", "the ferry is late", "fr3e pr1ze claim"]
LABELS = ["scam", "scam", "ok", "ok", "scam"]
messages = st.text(alphabet=st.sampled_from(list("frepizqutay 13")), min_size=1, max_size=30).filter(str.strip)


@settings(max_examples=60, deadline=None)
@given(text=messages, analyzer=st.sampled_from(["char", "char_wb"]), ngrams=st.sampled_from([(2, 3), (3, 5), (1, 2)]))
def test_heat_is_the_sum_of_covering_ngrams_and_the_total_is_exact(text, analyzer, ngrams):
    pipeline = Pipeline([("v", CountVectorizer(analyzer=analyzer, ngram_range=ngrams)), ("nb", MultinomialNB())])
    pipeline.fit(TRAIN, LABELS)
    ledger = ledger_of(loaded(pipeline, "ok"), text)
    assert ledger.character_ngrams
    # Outside reference: scikit-learn's own analyzer, vocabulary and feature_log_prob_.
    vec, nb = pipeline[0], pipeline[1]
    w = nb.feature_log_prob_[list(nb.classes_).index("scam")] - nb.feature_log_prob_[list(nb.classes_).index("ok")]
    expected = np.zeros(len(text))
    # Spans of each n-gram occurrence: the featurizer's, checked against the text in test_spans.py.
    occ = loaded(pipeline).featurizer.occurrences(text)
    for token, (a, b) in zip(occ.tokens, occ.spans):
        j = vec.vocabulary_.get(token)
        if j is not None:
            expected[a:b] += w[j]
    # The ledger answers the decision's question: scam against ok when flagged, ok against scam when let through.
    sign = 1.0 if pipeline.predict([text])[0] == "scam" else -1.0
    np.testing.assert_allclose(ledger.character_heat(), sign * expected, atol=1e-9)
    # The entries still add up to scikit-learn's log-odds exactly.
    jll = nb.predict_joint_log_proba(vec.transform([text]))[0]
    scam_vs_ok = jll[list(nb.classes_).index("scam")] - jll[list(nb.classes_).index("ok")]
    assert ledger.closing == pytest.approx(sign * scam_vs_ok, abs=1e-9)


def test_html_tints_runs_of_heat_and_keeps_the_text():
    pipeline = Pipeline([("v", CountVectorizer(analyzer="char_wb", ngram_range=(3, 4))), ("nb", MultinomialNB())])
    pipeline.fit(TRAIN, LABELS)
    text = "Claim your fr3e pr1ze at the quay"
    view = ledger_context(ledger_of(loaded(pipeline, "ok"), text))
    assert "".join(s["text"] for s in view["segments"]) == text
    marks = {s["mark"] for s in view["segments"] if "mark" in s}
    assert marks == {"▲", "▼"}
