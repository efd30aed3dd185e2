"""Character spans of tokens point at the right characters of the original message."""

from __future__ import annotations

import re

from hypothesis import given, settings
from hypothesis import strategies as st
from sklearn.feature_extraction.text import CountVectorizer

from explain.model.featurizer import Featurizer

FIT = ["Parcel fee due", "tea at the Workshop", "the drill is free", "café au lait"]
# Text with mixed case, punctuation, runs of white space and accented letters.
messages = st.text(alphabet=st.sampled_from(list("abcdeFéÉ .,!\n\t")), max_size=40)
PROPERTY = settings(max_examples=150, deadline=None)


@PROPERTY
@given(text=messages, ngrams=st.sampled_from([(1, 1), (1, 2), (2, 3)]))
def test_word_spans_cover_their_words(text, ngrams):
    f = Featurizer(CountVectorizer(ngram_range=ngrams).fit(FIT + [text or "x"]))
    occ = f.occurrences(text)
    assert occ.spans is not None, occ.spans_note
    for token, (start, end) in zip(occ.tokens, occ.spans):
        words = re.findall(r"(?u)\b\w\w+\b", text[start:end].lower())
        assert " ".join(words) == token


@PROPERTY
@given(text=messages, analyzer=st.sampled_from(["char_wb", "char"]), ngrams=st.sampled_from([(2, 2), (1, 3), (3, 5)]))
def test_character_spans(text, analyzer, ngrams):
    f = Featurizer(CountVectorizer(analyzer=analyzer, ngram_range=ngrams).fit(FIT + [text or "x"]))
    occ = f.occurrences(text)
    assert occ.spans is not None, occ.spans_note
    for token, (start, end) in zip(occ.tokens, occ.spans):
        piece = text[start:end].lower()
        # Padding spaces of char_wb and folded white space map to the edges of the span.
        def fold(s):
            return re.sub(r"\s+", " ", s).strip()

        assert fold(piece) == fold(token) or fold(token) == ""  # a lone padding space


def test_stop_words_are_skipped_and_ngrams_join_across_them():
    f = Featurizer(CountVectorizer(stop_words="english", ngram_range=(2, 2)).fit(["pay the fee now"]))
    text = "Pay THE fee now"
    occ = f.occurrences(text)
    spans = dict(zip(occ.tokens, occ.spans))
    assert text[slice(*spans["pay fee"])] == "Pay THE fee"


def test_unknown_positions_are_said_not_guessed():
    f = Featurizer(CountVectorizer(tokenizer=str.split, token_pattern=None).fit(["a b"]))
    occ = f.occurrences("a b")
    assert occ.spans is None and "custom" in occ.spans_note
    # Lower-casing that changes length ("İ" becomes two characters): no spans, said why.
    g = Featurizer(CountVectorizer().fit(["istanbul"]))
    occ = g.occurrences("İstanbul ferry")
    assert occ.spans is None and "length" in occ.spans_note
