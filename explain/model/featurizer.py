"""From message text to the feature row a naive Bayes classifier multiplies.

A :class:`Featurizer` wraps the fitted text steps of a pipeline
(``CountVectorizer``, ``TfidfVectorizer``, ``HashingVectorizer``, or a
``CountVectorizer`` or ``HashingVectorizer`` followed by ``TfidfTransformer``).
It gives three things:

- ``transform(texts)``: the pipeline's own feature matrix (scikit-learn does
  the work, so the numbers are the model's);
- ``occurrences(text)``: every token occurrence the analyzer produces, with
  its column (or -1 when the vocabulary does not know it) and, where the
  analyzer allows it, its character span in the original text;
- ``weigh(counts)``: counts to features, so that removing occurrences can be
  re-scored exactly (TF-IDF re-normalises the whole row).
"""

from __future__ import annotations

import itertools
import re
from collections import Counter
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from sklearn.preprocessing import normalize

from explain.errors import NbledgerError

Span = tuple[int, int]


@dataclass(frozen=True)
class Occurrences:
    """The analyzer's tokens for one message, in the analyzer's order.

    ``columns[i]`` is the feature column of ``tokens[i]`` (-1 when unknown to
    the vocabulary); ``spans[i]`` its ``(start, end)`` character offsets in
    the original text, or ``spans is None`` with ``spans_note`` saying why.
    """

    tokens: tuple[str, ...]
    columns: np.ndarray
    spans: tuple[Span, ...] | None
    spans_note: str | None

    def counts(self, n_features: int) -> sp.csr_matrix:
        """The count row these occurrences make (1 x n_features)."""
        known = self.columns[self.columns >= 0]
        counts = np.bincount(known, minlength=n_features).astype(np.float64)
        return sp.csr_matrix(counts.reshape(1, -1))


class Featurizer:
    """The fitted text steps of a naive Bayes pipeline.

    A ``HashingVectorizer`` stores no vocabulary: its columns are named
    ``column j`` here, and :meth:`hashed_names` recovers the tokens behind a
    column from texts at hand.

    Parameters
    ----------
    vectorizer : fitted CountVectorizer or TfidfVectorizer, or a HashingVectorizer.
    tfidf : fitted TfidfTransformer applied after ``vectorizer``, or None.
    tokens : the vectorizer's feature names in column order, when already known
        (saves sorting a large vocabulary again).
    """

    def __init__(self, vectorizer, tfidf=None, tokens=None):
        from sklearn.feature_extraction.text import CountVectorizer, HashingVectorizer, TfidfVectorizer

        if type(vectorizer) not in (CountVectorizer, TfidfVectorizer, HashingVectorizer):
            raise NbledgerError(
                f"the text step is {type(vectorizer).__name__}; "
                "supported: CountVectorizer, TfidfVectorizer, HashingVectorizer"
            )
        refuse_reading(vectorizer)
        self.hashed = type(vectorizer) is HashingVectorizer
        if self.hashed and vectorizer.alternate_sign:
            raise NbledgerError(
                "the HashingVectorizer uses alternate_sign=True, which makes negative features; "
                "naive Bayes needs non-negative features, so train it with alternate_sign=False"
            )
        if not self.hashed and not hasattr(vectorizer, "vocabulary_"):
            raise NbledgerError(f"the {type(vectorizer).__name__} in this file has not been fitted")
        self.vectorizer = vectorizer
        self.tfidf = vectorizer if isinstance(vectorizer, TfidfVectorizer) else tfidf
        # The same tokenisation without binarising or weighting, so that one
        # pass gives both the raw counts and the features (see counts_and_features).
        if self.hashed:
            n = int(vectorizer.n_features)
            self.tokens = np.asarray(
                [f"column {j}" for j in range(n)] if tokens is None else tokens, dtype=object
            )
            self._counter = HashingVectorizer(**vectorizer.get_params()).set_params(
                binary=False, norm=None, alternate_sign=False, dtype=np.float64
            )
            self._vocabulary = _HashedColumns(n)
            # The hashing step's own row normalisation comes before any TF-IDF step.
            self._hash_norm = vectorizer.norm
        else:
            self.tokens = np.asarray(
                vectorizer.get_feature_names_out() if tokens is None else tokens, dtype=object
            )
            own = CountVectorizer().get_params()
            self._counter = CountVectorizer(
                **{k: v for k, v in vectorizer.get_params().items() if k in own and k != "vocabulary"},
            ).set_params(binary=False, vocabulary=vectorizer.vocabulary_, dtype=np.float64)
            self._vocabulary = vectorizer.vocabulary_
            self._hash_norm = None
        self._analyzer = vectorizer.build_analyzer()
        self._plain = None if self.hashed else _plain_words(vectorizer)
        if self.tfidf is not None:
            self.feature_kind = "tfidf"
        elif self._hash_norm is not None:
            self.feature_kind = "normalised"
        elif vectorizer.binary:
            self.feature_kind = "binary"
        else:
            self.feature_kind = "counts"

    @property
    def n_features(self) -> int:
        return len(self.tokens)

    def transform(self, texts) -> sp.csr_matrix:
        """The pipeline's own feature matrix for ``texts`` (float64 CSR)."""
        X = self.vectorizer.transform(texts)
        if self.tfidf is not None and self.tfidf is not self.vectorizer:
            X = self.tfidf.transform(X)
        return sp.csr_matrix(X, dtype=np.float64)

    def counts_and_features(self, texts) -> tuple[sp.csr_matrix, sp.csr_matrix]:
        """Raw occurrence counts and the pipeline's features from one tokenisation.

        Both are (n, n_features) float64 CSR; the features equal ``transform``
        (the same scikit-learn steps, applied to the same count matrix). For
        plain counts the two are one matrix: callers must not change it in place.
        """
        token_lists = self.plain_tokens(texts)
        if token_lists is not None:
            counts = self.counts_of_tokens(token_lists)
        else:
            counts = sp.csr_matrix(self._counter.transform(texts), dtype=np.float64)
        if not (self.vectorizer.binary or self._hash_norm is not None or self.tfidf is not None):
            return counts, counts
        X = counts.copy()
        if self.vectorizer.binary:
            X.data.fill(1)
        if self._hash_norm is not None:
            X = normalize(X, norm=self._hash_norm, copy=False)
        if self.tfidf is not None:
            # TfidfVectorizer.transform is CountVectorizer.transform then its own TfidfTransformer.
            X = getattr(self.tfidf, "_tfidf", self.tfidf).transform(X, copy=False)
        return sp.csr_matrix(counts, dtype=np.float64), sp.csr_matrix(X, dtype=np.float64)

    def plain_tokens(self, texts) -> list[list[str]] | None:
        """Each text's tokens as a plain word analyzer makes them (see :func:`_plain_words`), or None.

        The same steps as scikit-learn's analyzer (lower-casing, the token
        pattern's ``findall``, the stop-word filter) without its per-text
        function calls; with :meth:`counts_of_tokens` equal to
        ``CountVectorizer.transform`` entry for entry (tested over random
        texts). None when the analyzer is not plain or a text is not a
        ``str``: then only scikit-learn's own analyzer says what the tokens are.
        """
        if self._plain is None or not all(type(t) is str for t in texts):
            return None
        find, lower, stop = self._plain
        out = [find(text.lower() if lower else text) for text in texts]
        if stop:
            out = [[t for t in found if t not in stop] for found in out]
        return out

    def counts_of_tokens(self, token_lists: list[list[str]]) -> sp.csr_matrix:
        """Raw counts (n, n_features) float64 CSR of the vocabulary's tokens in each list, duplicates summed."""
        tokens = list(itertools.chain.from_iterable(token_lists))
        lengths = np.fromiter(map(len, token_lists), dtype=np.int64, count=len(token_lists))
        get = self._vocabulary.get
        cols = np.fromiter(map(get, tokens, itertools.repeat(-1)), dtype=np.int64, count=len(tokens))
        rows = np.repeat(np.arange(len(token_lists)), lengths)
        known = cols >= 0
        X = sp.csr_matrix(
            (np.ones(int(known.sum())), (rows[known], cols[known])), shape=(len(token_lists), self.n_features)
        )
        X.sum_duplicates()
        return X

    def counts(self, texts) -> sp.csr_matrix:
        """Raw occurrence counts of the vocabulary's tokens (before binary/TF-IDF)."""
        rows = [self.occurrences(t, with_spans=False).columns for t in texts]
        indptr = np.cumsum([0] + [int((r >= 0).sum()) for r in rows])
        indices = np.concatenate([r[r >= 0] for r in rows]) if rows else np.zeros(0, int)
        X = sp.csr_matrix(
            (np.ones(len(indices)), indices, indptr), shape=(len(rows), self.n_features)
        )
        X.sum_duplicates()
        return X

    def weigh(self, counts: sp.spmatrix) -> sp.csr_matrix:
        """Counts to the features ``transform`` would give for the same tokens.

        Mirrors ``CountVectorizer(binary=...)`` and ``TfidfTransformer.transform``
        (sublinear tf, idf, then row normalisation), so that a count row with
        occurrences removed can be re-scored without re-tokenising. A
        ``HashingVectorizer`` normalises its rows itself (its ``norm``) before
        any TF-IDF step.
        """
        X = sp.csr_matrix(counts, dtype=np.float64, copy=True)
        X.eliminate_zeros()
        if self.vectorizer.binary:
            X.data[:] = 1.0
        if self._hash_norm is not None:
            X = sp.csr_matrix(normalize(X, norm=self._hash_norm, copy=False))
        if self.tfidf is None:
            return X
        if self.tfidf.sublinear_tf:
            np.log(X.data, X.data)
            X.data += 1.0
        if self.tfidf.use_idf:
            X.data *= self.tfidf.idf_[X.indices]
        if self.tfidf.norm is not None:
            X = normalize(X, norm=self.tfidf.norm, copy=False)
        return sp.csr_matrix(X)

    def hashed_names(self, texts) -> dict[int, tuple[str, ...]]:
        """Hashed models: column -> the distinct tokens of ``texts`` hashed into it (sorted).

        A column with two or more tokens is a collision: its evidence is the
        sum of all of them, and the model cannot tell them apart.
        """
        found: dict[int, set[str]] = {}
        for text in texts:
            occ = self.occurrences(text, with_spans=False)
            for token, column in zip(occ.tokens, occ.columns.tolist()):
                found.setdefault(column, set()).add(token)
        return {c: tuple(sorted(t)) for c, t in sorted(found.items())}

    def occurrences(self, text: str, with_spans: bool = True) -> Occurrences:
        """Every token the analyzer makes of ``text``, with columns and spans."""
        tokens = self._analyzer(text)
        columns = np.fromiter(
            (self._vocabulary.get(t, -1) for t in tokens), dtype=np.int64, count=len(tokens)
        )
        spans, note = (None, "not asked for")
        if with_spans:
            spans, note = self._spans(text, tokens)
        return Occurrences(tuple(tokens), columns, spans, note)

    # --- character spans -------------------------------------------------

    def _spans(self, text: str, tokens: list[str]) -> tuple[tuple[Span, ...] | None, str | None]:
        vec = self.vectorizer
        if callable(vec.analyzer):
            return None, "the model uses a custom analyzer, so token positions are unknown"
        if vec.preprocessor is not None or vec.tokenizer is not None:
            return None, "the model uses a custom preprocessor or tokenizer, so token positions are unknown"
        if not isinstance(text, str):
            return None, "the message is not text"
        pre = vec.build_preprocessor()(text)
        if len(pre) != len(text):
            return None, "lower-casing or accent stripping changed the text's length, so positions are unknown"
        if vec.analyzer == "word":
            found = self._word_spans(pre)
        elif vec.analyzer in ("char", "char_wb"):
            found = self._char_spans(pre, vec.analyzer == "char_wb")
        else:
            return None, f"analyzer {vec.analyzer!r} has no known positions"
        if [t for t, _ in found] != list(tokens):
            return None, "the analyzer's tokens could not be matched to the text, so positions are unknown"
        return tuple(s for _, s in found), None

    def _word_spans(self, pre: str) -> list[tuple[str, Span]]:
        vec = self.vectorizer
        pattern = re.compile(vec.token_pattern)
        group = 1 if pattern.groups == 1 else 0
        stop = vec.get_stop_words()
        words = [
            (m.group(group), m.span(group))
            for m in pattern.finditer(pre)
            if not (stop is not None and m.group(group) in stop)
        ]
        lo, hi = vec.ngram_range
        out: list[tuple[str, Span]] = list(words) if lo == 1 else []
        for n in range(max(lo, 2), hi + 1):
            for i in range(len(words) - n + 1):
                part = words[i : i + n]
                out.append((" ".join(w for w, _ in part), (part[0][1][0], part[-1][1][1])))
        return out

    def _char_spans(self, pre: str, word_bounded: bool) -> list[tuple[str, Span]]:
        # scikit-learn first folds runs of white space into one space; keep a
        # map from the folded text back to the original offsets.
        folded, origin = [], []
        i = 0
        for m in re.finditer(r"\s\s+", pre):
            folded.append(pre[i : m.start()])
            origin.extend(range(i, m.start()))
            folded.append(" ")
            origin.append(m.start())
            i = m.end()
        folded.append(pre[i:])
        origin.extend(range(i, len(pre)))
        text = "".join(folded)
        lo, hi = self.vectorizer.ngram_range
        out: list[tuple[str, Span]] = []
        if not word_bounded:
            for n in range(lo, hi + 1):
                for k in range(len(text) - n + 1):
                    out.append((text[k : k + n], (origin[k], origin[k + n - 1] + 1)))
            return out
        for m in re.finditer(r"\S+", text):
            padded = " " + m.group() + " "
            last = len(padded)
            for n in range(lo, hi + 1):
                offset = 0
                starts = [0]
                while offset + n < last:
                    offset += 1
                    starts.append(offset)
                for k in starts:
                    # padded index p is word index p - 1; the pad spaces map to the word's edges
                    a = min(max(k - 1, 0), len(m.group()) - 1)
                    b = min(max(k + n - 2, 0), len(m.group()) - 1)
                    out.append((padded[k : k + n], (origin[m.start() + a], origin[m.start() + b] + 1)))
                if offset == 0:
                    break
        return out


def hashed_column_names(featurizer: Featurizer, view, text: str | None, source: str | None):
    """(view, note) for a hashed model's vocabulary review: columns named by the tokens of ``text``.

    Without ``text`` the columns keep their numbers. ``note`` is one line
    saying where the names came from; ``view`` is a ModelView.
    """
    if text is None:
        return view, (
            "Hashed features: the model stores no vocabulary, so columns are shown by number; "
            "name them from sample text with --names-from FILE."
        )
    names = featurizer.hashed_names([text])
    shared = sum(len(t) > 1 for t in names.values())
    return view.with_names(names), (
        f"Hashed features: {len(names):,} of {featurizer.n_features:,} columns named by the tokens of {source}, "
        f"hashed with the model's settings; {shared:,} shared by several tokens (joined by ' / '); "
        "the rest are shown by number."
    )


class _HashedColumns:
    """``get(token, default)`` like a vocabulary, for a HashingVectorizer's columns.

    scikit-learn's own ``FeatureHasher`` (signed 32-bit MurmurHash3, seed 0,
    column ``abs(h) % n_features``) computes each column, so the columns are
    the model's; a token is hashed once and remembered.
    """

    def __init__(self, n_features: int):
        from sklearn.feature_extraction import FeatureHasher

        self._hasher = FeatureHasher(n_features, input_type="string", alternate_sign=False)
        self._seen: dict[str, int] = {}

    def get(self, token: str, default: int = -1) -> int:
        column = self._seen.get(token)
        if column is None:
            column = int(self._hasher.transform([[token]]).indices[0])
            self._seen[token] = column
        return column


def refuse_reading(vectorizer) -> None:
    """Refuse a text step that would read or fetch anything instead of taking the message text itself.

    scikit-learn's text steps take ``input='filename'`` or ``'file'`` to treat
    each message as a path (or an open file) and read it: a model file could
    then make ``why`` print any file the user can read. Only ``'content'`` is
    accepted, whatever ``--trust`` says.
    """
    source = getattr(vectorizer, "input", "content")
    if isinstance(source, str) and source == "content":
        return
    shown = repr(source)[:40] if isinstance(source, str) else type(source).__name__
    raise NbledgerError(
        f"the text step has input={shown}: it would read each message as a file name or file rather than "
        "take its text; nbledger never loads such a model (no --trust changes that)"
    )


def unknown_tokens(occ: Occurrences) -> list[tuple[str, int]]:
    """Distinct tokens unknown to the vocabulary, with how often each occurs."""
    unknown = Counter(t for t, c in zip(occ.tokens, occ.columns) if c < 0)
    return sorted(unknown.items(), key=lambda kv: (-kv[1], kv[0]))


def _plain_words(vectorizer):
    """``(findall, lower, stop words)`` when the vectorizer's analyzer is plain single words, else None.

    Plain: the ``word`` analyzer on text content with no accent stripping,
    preprocessor or tokenizer of its own and single words only
    (``ngram_range`` (1, 1)). scikit-learn then lower-cases (if asked),
    applies the token pattern's ``findall`` and drops stop words; nothing else.
    """
    if (
        vectorizer.analyzer != "word" or vectorizer.input != "content" or vectorizer.strip_accents is not None
        or vectorizer.preprocessor is not None or vectorizer.tokenizer is not None
        or tuple(vectorizer.ngram_range) != (1, 1) or vectorizer.token_pattern is None
    ):
        return None
    pattern = re.compile(vectorizer.token_pattern)
    if pattern.groups > 1:
        return None  # scikit-learn refuses such a pattern; let it say so
    stop = vectorizer.get_stop_words()
    return pattern.findall, bool(vectorizer.lowercase), frozenset(stop) if stop else None
