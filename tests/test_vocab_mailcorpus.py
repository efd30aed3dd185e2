"""The vocabulary review on real mail: the public corpus described in ../shared/README.md.

A multinomial filter (scikit-learn defaults) is trained on every message of
the corpus. Ranking its vocabulary by the raw per-occurrence ratio crowns
tokens with little training support; the z-score of Monroe, Colaresi & Quinn
(2008) ranks well-supported evidence first, which is why it is the default.
The figures are printed with the test results (``pytest -s``).
"""

import numpy as np
import pytest
from sklearn.feature_extraction.text import CountVectorizer
from sklearn.naive_bayes import MultinomialNB

from benchmarks import mailcorpus
from explain.model.model_view import view_of
from explain.analysis.vocab import review_vocabulary

pytestmark = pytest.mark.mailcorpus

TOP = 20


@pytest.fixture(scope="module")
def review():
    try:
        corpus = mailcorpus.load()
    except mailcorpus.CorpusUnavailable as exc:
        pytest.skip(f"public mail corpus unavailable: {exc}")
    vectorizer = CountVectorizer()
    clf = MultinomialNB().fit(vectorizer.fit_transform(corpus.texts), corpus.labels)
    view = view_of(clf, vectorizer.get_feature_names_out(), "counts", normal_class="ham")
    return review_vocabulary(view, top=TOP)


@pytest.mark.parametrize("side", ["for", "against"])
def test_ratio_crowns_thinly_supported_tokens_zscore_does_not(review, side):
    (c,) = review.comparisons
    assert (c.target, c.other) == ("spam", "ham")
    support = c.support_target + c.support_other
    medians = {}
    for lens in ("ratio", "zscore"):
        picked = c.top(lens, TOP, side)
        assert len(picked) == TOP
        medians[lens] = float(np.median(support[picked]))
        shown = ", ".join(f"{review.tokens[j]} ({support[j]:.0f})" for j in picked[:8])
        print(f"\n{side} spam, top {TOP} by {lens}: median training support {medians[lens]:.1f}; first: {shown}")
    print(f"{side} spam: zscore/ratio median support = {medians['zscore'] / medians['ratio']:.1f}")
    assert medians["ratio"] < medians["zscore"]


def test_flag_counts_on_real_mail(review):
    (c,) = review.comparisons
    print("\nflags on the mail corpus (spam vs ham):", dict(c.flag_counts))
    # thin tokens are a subset of the strong ones, all of them with little support
    thin = c.flag("thin")
    support = c.support_target + c.support_other
    assert thin.any() and np.all(support[thin] < review.thresholds.thin_below)
    assert np.all(np.abs(c.ratio[thin]) >= review.thresholds.strong_log_odds)
    # the corpus carries long digit runs (order and phone numbers) that the default tokenizer keeps whole
    assert c.flag_counts["personal"] > 0 and c.flag_counts["numeric"] >= c.flag_counts["personal"]
