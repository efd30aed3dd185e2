"""The ledger's own counting of plain single words equals scikit-learn's ``CountVectorizer.transform``.

Reference: scikit-learn's ``CountVectorizer`` itself (the outside library whose
features the model multiplies), over random texts, token patterns, case and
stop-word settings.
"""

from __future__ import annotations

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from sklearn.feature_extraction.text import CountVectorizer, TfidfVectorizer

from explain.model.featurizer import Featurizer
from explain.model.token_patterns import ENTITIES, WORDS

# Letters whose case changes length or shape (Turkish dotted I, sharp s, Greek final sigma), digits,
# accents, look-alikes, currency signs and the punctuation of addresses and amounts.
ALPHABET = "aAbBzZ09İıßẞΣσςéÉ  \t\n.,;:!?@/-_'\"$€£%()іе" + "tideway rent fee prize"
texts = st.lists(st.text(alphabet=ALPHABET, max_size=80), min_size=1, max_size=12)
patterns = st.sampled_from([WORDS, ENTITIES, r"(?u)\b\w+\b", r"(?u)([a-z]+)\d*", r"\S+"])
stops = st.sampled_from([None, "english", ["rent", "the", "ıı", "ss"]])


@settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(train=texts, score=texts, pattern=patterns, lowercase=st.booleans(), stop=stops,
       kind=st.sampled_from([CountVectorizer, TfidfVectorizer]), binary=st.booleans())
def test_plain_counts_equal_scikit_learn(train, score, pattern, lowercase, stop, kind, binary):
    vec = kind(token_pattern=pattern, lowercase=lowercase, stop_words=stop, binary=binary)
    try:
        vec.fit(train + ["tideway rent fee prize"])
    except ValueError:  # an empty vocabulary: nothing to compare
        return
    featurizer = Featurizer(vec)
    assert featurizer._plain is not None
    counts, X = featurizer.counts_and_features(score)
    want = CountVectorizer(token_pattern=pattern, lowercase=lowercase, stop_words=stop,
                           vocabulary=vec.vocabulary_).transform(score)
    assert counts.shape == want.shape
    assert np.array_equal(counts.toarray(), want.toarray())
    assert counts.has_canonical_format
    np.testing.assert_array_equal(X.toarray(), vec.transform(score).toarray())


def test_other_analyzers_keep_scikit_learn_counting():
    for vec in (CountVectorizer(ngram_range=(1, 2)), CountVectorizer(analyzer="char"),
                CountVectorizer(strip_accents="unicode"), CountVectorizer(preprocessor=str.upper)):
        assert Featurizer(vec.fit(["tideway rent fee", "prize fee"]))._plain is None
