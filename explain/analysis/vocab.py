"""What the filter has learned: every token's evidence, how well it is supported, and its risks.

:func:`review_vocabulary` compares one class (the *target*) with another
class or with all the other classes pooled (``"rest"``), for every token of
the vocabulary at once, and returns a :class:`VocabReview`: a frozen object
holding every column as an array, the settings that produced them, and the
rankings, so that the terminal, the CSV/JSON files, the pictures and a later
report only present it. Positive values are evidence *for* the target.

Lenses (one column each; ``LENSES`` lists those a ranking can use)
-------------------------------------------------------------------
``ratio``
    What one occurrence adds to the log-odds of target against other:
    ``W[target, j] - W[other, j]`` (see :mod:`explain.model.model_view` for ``W``).
    Against ``rest`` the other classes are pooled by the model itself: the
    ratio is how much one occurrence of the token, alone in a message,
    changes ``log P(target) - log P(any other class)``, i.e.
    ``W[t, j] - [logsumexp_o(b_o + W[o, j]) - logsumexp_o(b_o)]`` over the
    other classes ``o`` with baselines ``b``. With two classes both
    definitions agree exactly.
``zscore``
    The weighted log-odds ratio with an informative Dirichlet prior, divided
    by its standard error (Monroe, Colaresi & Quinn 2008, "Fightin' words:
    lexical feature selection and evaluation for identifying the content of
    political conflict", *Political Analysis* 16(4), section 3.5; formulas
    from memory). With the model's training counts ``y`` of the two sides
    (``n`` their totals) and the prior ``alpha_j = a0 * (y_t[j] + y_o[j]) /
    (n_t + n_o)`` taken from the pooled counts of the two sides::

        delta_j = log((y_t + alpha) / (n_t + a0 - y_t - alpha))
                - log((y_o + alpha) / (n_o + a0 - y_o - alpha))
        z_j     = delta_j / sqrt(1 / (y_t + alpha) + 1 / (y_o + alpha))

    ``a0`` (``prior_scale``) defaults to ``n_t + n_o``, so the prior counts
    are the pooled counts themselves. The z-score discounts thinly supported
    tokens and is the default ranking. ``weighted_log_odds`` keeps ``delta``.
``mass``
    ``ratio`` times the token's mean count per message in the side it points
    to (``y / messages`` of the target when ``ratio > 0``, of the other side
    otherwise): the evidence the token contributes on a typical message.
``chi2``, ``g2``, ``mi``
    Pearson's chi-square, Dunning's G2 and the mutual information (bits) of
    the 2x2 table token-versus-class (:mod:`explain.analysis.stats`). They carry no
    sign; ``direction`` is +1 where the token goes with the target
    (``n11 n00 > n10 n01``), -1 where with the other side, and rankings use
    ``direction * statistic``. Which counts fill the tables is told by
    :attr:`VocabReview.counts`: messages containing the token when a labelled
    file is given or the features are binary (BernoulliNB); otherwise the
    model's own totals (token occurrences, Dunning's corpus comparison, or
    summed TF-IDF weights), which is said in the review.

Support and risk
----------------
``support_target``/``support_other`` are the model's training totals of the
two sides (``feature_count_``: occurrences for count features);
``documents_target``/``documents_other`` the messages containing the token,
when known. Risk flags are those of :mod:`explain.analysis.risk`.
"""

from __future__ import annotations

import collections.abc
from dataclasses import dataclass
from types import MappingProxyType
from typing import Callable, Mapping, Sequence

import numpy as np
import scipy.sparse as sp
from scipy.special import logsumexp

from explain.errors import NbledgerError
from explain.model.model_view import ModelView
from explain.analysis.risk import (
    FLAGS,
    RedactionCheck,
    RiskThresholds,
    TokenTraits,
    Watchlist,
    redact,
    redaction_check,
    risk_flags,
    token_traits,
    watchlist_columns,
)
from explain.analysis.stats import dunning_g2, mutual_information, pearson_chi2

LENSES = ("zscore", "ratio", "mass", "chi2", "g2")
#: How tables and pictures name each lens's values.
LENS_TITLES = {
    "zscore": "z-score",
    "ratio": "ratio (log-odds per occurrence)",
    "mass": "mass (log-odds on a typical message)",
    "chi2": "chi-square",
    "g2": "G2",
}
REST = "rest"
DEFAULT_TOP = 20


@dataclass(frozen=True, eq=False)
class DocumentCounts:
    """Messages containing each token, per class, counted in a labelled file.

    ``counts`` has shape (C, F) in the model's class order, ``messages`` (C,).
    ``rows_note`` says which rows of the file were counted (those the model
    trained on, or all of them and why).
    """

    counts: np.ndarray
    messages: np.ndarray
    source: str
    rows_note: str = ""


def document_counts(view: ModelView, X, labels, source: str, rows_note: str = "") -> DocumentCounts:
    """Count, per class, the messages of a labelled file that contain each token.

    ``X`` is the file's feature matrix as the model's text steps make it;
    a token is present where the classifier sees a non-zero value (after
    BernoulliNB's binarisation). Labels must be exactly the model's classes:
    a label the model lacks, or a class with no message, is named in the error.
    """
    labels = np.asarray(labels, dtype=object).astype(str)
    known = set(view.classes)
    unknown = sorted(set(labels) - known)
    if unknown:
        raise NbledgerError(
            f"{source} has labels the model does not have: {', '.join(unknown)}; "
            f"the model's classes are: {', '.join(view.classes)}"
        )
    missing = [c for c in view.classes if c not in set(labels)]
    if missing:
        raise NbledgerError(
            f"{source} has no messages labelled {', '.join(missing)}; "
            f"the model's classes are: {', '.join(view.classes)}"
        )
    present = view.prepare(X)
    present.data = (present.data > 0).astype(np.float64)
    rows = np.searchsorted(np.sort(view.classes.astype(str)), labels)
    by_class = np.argsort(view.classes.astype(str))[rows]
    onehot = sp.csr_matrix(
        (np.ones(len(labels)), (by_class, np.arange(len(labels)))), shape=(view.n_classes, len(labels))
    )
    return DocumentCounts(
        counts=np.asarray((onehot @ present).todense()),
        messages=np.bincount(by_class, minlength=view.n_classes).astype(np.float64),
        source=source,
        rows_note=rows_note,
    )


@dataclass(frozen=True)
class CountSource:
    """What fills the 2x2 tables: ``"documents"``, ``"occurrences"``, ``"tfidf-weights"`` or ``"normalised-weights"``, and why.

    With a labelled file, ``rows_counted`` is the number of its messages
    counted and ``rows_note`` which rows they are (see :class:`DocumentCounts`).
    """

    kind: str
    reason: str
    rows_counted: int | None = None
    rows_note: str = ""


def count_source(view: ModelView, documents: DocumentCounts | None) -> CountSource:
    if documents is not None:
        return CountSource(
            "documents",
            f"counted in the labelled file {documents.source} "
            f"({int(documents.messages.sum()):,} messages)" + (f"; {documents.rows_note}" if documents.rows_note else ""),
            rows_counted=int(documents.messages.sum()),
            rows_note=documents.rows_note,
        )
    if view.feature_kind == "binary":
        return CountSource(
            "documents",
            "the model's features are binary, so its training counts are messages containing each token",
        )
    if view.feature_kind == "normalised":
        return CountSource(
            "normalised-weights",
            "the model was trained on hashed counts scaled by the hasher's norm and no labelled file was given: "
            "the 2x2 tables and z-scores treat summed scaled counts as counts; give labelled data for message counts",
        )
    if view.feature_kind == "tfidf":
        return CountSource(
            "tfidf-weights",
            "the model was trained on TF-IDF weights and no labelled file was given: the 2x2 tables "
            "and z-scores treat summed TF-IDF weights as counts; give labelled data for message counts",
        )
    return CountSource(
        "occurrences",
        "the model was trained on token counts and no labelled file was given: the 2x2 tables count "
        "occurrences of the token against all other token occurrences (Dunning 1993), not messages; "
        "give labelled data for message counts",
    )


@dataclass(frozen=True, eq=False)
class VocabComparison:
    """Every lens, support column and flag of one comparison (arrays of shape (F,)).

    ``order[l]`` lists the columns from strongest evidence for the target to
    strongest against it under lens ``LENSES[l]`` (ties keep column order);
    ``rank[l, j]`` is the 1-based position of column ``j`` in ``order[l]``.
    ``table`` holds the 2x2 cells ``(n11, n10, n01, n00)`` behind chi2, g2
    and mi, shape (4, F). ``flags`` is (len(FLAGS), F) boolean and
    ``flag_counts`` the number of tokens carrying each flag.
    """

    target: str
    other: str
    other_classes: Sequence[str]
    ratio: np.ndarray
    weighted_log_odds: np.ndarray
    zscore: np.ndarray
    mass: np.ndarray
    chi2: np.ndarray
    g2: np.ndarray
    mi: np.ndarray
    direction: np.ndarray
    support_target: np.ndarray
    support_other: np.ndarray
    documents_target: np.ndarray | None
    documents_other: np.ndarray | None
    messages_target: float
    messages_other: float
    table: np.ndarray
    flags: np.ndarray
    flag_counts: Mapping[str, int]
    order: np.ndarray
    rank: np.ndarray

    @property
    def label(self) -> str:
        return f"{self.target} vs {self.other}"

    def values(self, lens: str) -> np.ndarray:
        """The signed values a ranking by ``lens`` sorts (chi2 and g2 times ``direction``)."""
        if lens in ("chi2", "g2"):
            return self.direction * getattr(self, lens)
        return getattr(self, _check_lens(lens))

    def top(self, lens: str, n: int, side: str = "for") -> np.ndarray:
        """Columns of the ``n`` strongest tokens for (or against) the target under ``lens``.

        Only tokens whose evidence points that way are listed, so fewer than
        ``n`` may come back.
        """
        order = self.order[LENSES.index(_check_lens(lens))]
        values = self.values(lens)
        if side == "for":
            picked = order[:n]
            return picked[values[picked] > 0]
        if side == "against":
            picked = order[::-1][:n]
            return picked[values[picked] < 0]
        raise ValueError(f"side must be 'for' or 'against', got {side!r}")

    def flag(self, name: str) -> np.ndarray:
        return self.flags[FLAGS.index(name)]

    def strongest_flagged(self, name: str, lens: str, n: int) -> np.ndarray:
        """Columns of the ``n`` tokens carrying flag ``name`` with the largest ``|lens|``, either way."""
        flagged = np.flatnonzero(self.flag(name))
        strength = np.abs(self.values(lens)[flagged])
        return flagged[np.argsort(-strength, kind="stable")[:n]]


@dataclass(frozen=True)
class WatchEntry:
    """One watchlist term and the vocabulary column it matched (-1: not in the vocabulary)."""

    term: str
    column: int


@dataclass(frozen=True, eq=False)
class VocabReview:
    """The vocabulary review of one model: every number a presenter shows.

    ``tokens`` are the vocabulary as presented: with ``redacted`` set, every
    personal-looking token is already replaced by a placeholder, so nothing
    downstream can show it. ``support_by_class`` is the model's
    ``feature_count_`` (C, F). ``lens`` and ``top`` are the ranking and list
    length asked for; every lens is ranked regardless. ``redaction`` says
    what the personal-data check looked at and found (also without
    ``redacted``). ``comparisons`` is a sequence whose items are computed
    when first asked for (a model of many classes never holds them all).
    """

    classes: tuple[str, ...]
    normal_class: str | None
    variant: str
    feature_kind: str
    tokens: np.ndarray
    support_by_class: np.ndarray
    comparisons: Sequence[VocabComparison]
    traits: TokenTraits
    counts: CountSource
    prior_scale: float | None
    thresholds: RiskThresholds
    lens: str
    top: int
    redacted: bool
    redacted_count: int
    redaction: RedactionCheck
    watchlist: tuple[WatchEntry, ...]
    watchlist_source: str | None
    #: hashed features: where the column names came from, else None
    names_note: str | None = None

    @property
    def n_features(self) -> int:
        return len(self.tokens)


def _check_lens(lens: str) -> str:
    if lens not in LENSES:
        raise NbledgerError(f"unknown ranking {lens!r}; choose one of: {', '.join(LENSES)}")
    return lens


def plan_comparisons(view: ModelView, target: str | None = None, against: str | None = None) -> list[tuple[int, tuple[int, ...]]]:
    """Which comparisons to make: a list of (target index, indices of the other side).

    - ``target`` and ``against`` given: that one (``against="rest"`` pools the others);
    - ``target`` only: against the normal class when there is one, else the
      other class of a two-class model, else the rest;
    - no ``target``: every class against ``against`` (a class or the rest);
      without ``against``, every flagged class against the normal class, the
      second class against the first in a two-class model, else every class
      against the rest.
    """
    C = view.n_classes
    if C < 2:
        raise NbledgerError("the model has a single class, so there is nothing to compare")
    everyone = range(C)

    def others(t: int, a: str | None) -> Sequence[int]:
        if a == REST:
            return _AllBut(t, C)
        return (view.class_index(a),)

    if target is not None:
        t = view.class_index(target)
        if against is None:
            normal = view.normal_index
            against = view.classes[normal] if normal is not None and normal != t else (
                view.classes[1 - t] if C == 2 else REST
            )
        if against != REST and view.class_index(against) == t:
            raise NbledgerError(f"--class and --against both name {target!r}; pick two different classes")
        return [(t, others(t, against))]
    if against is not None:
        if against == REST:
            return [(t, others(t, REST)) for t in everyone]
        a = view.class_index(against)
        return [(t, (a,)) for t in everyone if t != a]
    normal = view.normal_index
    if normal is not None:
        return [(t, (normal,)) for t in everyone if t != normal]
    if C == 2:
        return [(1, (0,))]
    return [(t, others(t, REST)) for t in everyone]


class _AllBut(collections.abc.Sequence):
    """The classes ``0 .. C-1`` except ``t``, in order, without holding them.

    Every class against the rest makes C comparisons with C - 1 others each: as
    tuples that is C squared numbers (10^8 for 10,000 classes) in the plan alone.
    """

    def __init__(self, t: int, n: int, names=None):
        self._t, self._n, self._names = t, n, names

    def __len__(self) -> int:
        return self._n - 1

    def __getitem__(self, i):
        if isinstance(i, slice):
            return [self[k] for k in range(*i.indices(len(self)))]
        if not -len(self) <= i < len(self):
            raise IndexError(i)
        i %= len(self)
        c = i if i < self._t else i + 1
        return c if self._names is None else str(self._names[c])

    def __iter__(self):
        for c in range(self._n):
            if c != self._t:
                yield c if self._names is None else str(self._names[c])

    def __eq__(self, other) -> bool:  # equal to a tuple or list of the same classes
        if not isinstance(other, collections.abc.Sequence) or isinstance(other, str) or len(other) != len(self):
            return False
        return all(a == b for a, b in zip(self, other))

    __hash__ = None

    def __repr__(self) -> str:
        return repr(tuple(self))


#: Comparisons x tokens a review keeps computed at once (about 150 bytes each): all of a model's
#: comparisons when they fit, else the most recently used.
_KEPT_CELLS = 1 << 20


class _Comparisons(collections.abc.Sequence):
    """A review's comparisons, each computed when first asked for.

    A model of many classes makes as many comparisons, each of several arrays
    over the whole vocabulary (10,000 classes x 1,000 tokens: 1.5 GB held at
    once). Presenters go through them in order, so only the ``keep`` most
    recently used are kept; one asked for again after that is computed again,
    the same numbers.
    """

    def __init__(self, plan, make, keep: int):
        import collections

        self._plan, self._make, self._keep = list(plan), make, max(1, int(keep))
        self._kept: "collections.OrderedDict[int, VocabComparison]" = collections.OrderedDict()

    def __len__(self) -> int:
        return len(self._plan)

    def __getitem__(self, i):
        if isinstance(i, slice):
            return tuple(self[k] for k in range(*i.indices(len(self))))
        if not -len(self) <= i < len(self):
            raise IndexError(i)
        i %= len(self)
        found = self._kept.get(i)
        if found is None:
            found = self._kept[i] = self._make(*self._plan[i])
            if len(self._kept) > self._keep:
                self._kept.popitem(last=False)
        else:
            self._kept.move_to_end(i)
        return found

    def __iter__(self):
        for i in range(len(self)):
            yield self[i]

    def __repr__(self) -> str:
        return f"<{len(self)} comparisons>"


class _Rest:
    """Sums over "every class but t" for all t at once, in O(classes x features) rather than its square.

    Counts: the column totals less class t's row. The pooled log-probability
    of the rest, ``logsumexp_{c != t}(W[c] + b[c])``, is ``logaddexp`` of the
    running ``logaddexp`` from the first class up to t and from the last class
    down to t (prefix and suffix scans): no subtraction, so no cancellation.
    """

    def __init__(self, view: ModelView, documents: "DocumentCounts | None" = None):
        W, b = view.weights, view.baseline
        self.feature_total = view.feature_count.sum(axis=0)
        self.class_total = float(view.class_count.sum())
        if documents is not None:  # message counts per token and class, pooled the same way
            self.document_total = documents.counts.sum(axis=0)
            self.message_total = float(documents.messages.sum())
        joint = W + b[:, None]
        self._before = _shifted_scan(joint)
        self._after = _shifted_scan(joint[::-1])[::-1]
        self._b_before = _shifted_scan(b[:, None])[:, 0]
        self._b_after = _shifted_scan(b[::-1, None])[::-1, 0]

    def pooled(self, t: int) -> np.ndarray:
        with np.errstate(invalid="ignore"):
            num = np.logaddexp(self._before[t], self._after[t])
            den = np.logaddexp(self._b_before[t], self._b_after[t])
        return num - den


def _shifted_scan(values: np.ndarray) -> np.ndarray:
    """Row t: ``logaddexp`` of rows 0..t-1 (minus infinity for t = 0)."""
    out = np.empty_like(values)
    out[0] = -np.inf
    if len(values) > 1:
        np.logaddexp.accumulate(values[:-1], axis=0, out=out[1:])
    return out


def _ratio(view: ModelView, t: int, others: Sequence[int], rest: "_Rest | None" = None) -> np.ndarray:
    W, b = view.weights, view.baseline
    if len(others) == 1:
        return W[t] - W[others[0]]
    if rest is not None and len(others) == view.n_classes - 1:
        return W[t] - rest.pooled(t)
    idx = list(others)
    pooled = logsumexp(W[idx] + b[idx, None], axis=0) - logsumexp(b[idx])
    return W[t] - pooled


def monroe_zscore(y_target, y_other, prior_scale: float | None = None) -> tuple[np.ndarray, np.ndarray]:
    """(weighted log-odds ``delta``, z-score) of each token; see the module docstring.

    Tokens with no count on either side carry no information and get 0 for both.

    Examples
    --------
    >>> delta, z = monroe_zscore([30, 10, 60], [10, 30, 60])
    >>> [round(float(v), 3) for v in z]
    [2.267, -2.267, 0.0]
    """
    y_t = np.asarray(y_target, dtype=np.float64)
    y_o = np.asarray(y_other, dtype=np.float64)
    n_t, n_o = y_t.sum(), y_o.sum()
    pooled = y_t + y_o
    total = n_t + n_o
    a0 = total if prior_scale is None else float(prior_scale)
    if not a0 > 0 and total > 0:
        raise NbledgerError(f"the prior scale must be > 0, got {prior_scale}")
    with np.errstate(invalid="ignore", divide="ignore"):
        alpha = a0 * pooled / total
        rest_t = n_t + a0 - y_t - alpha
        rest_o = n_o + a0 - y_o - alpha
        delta = np.log((y_t + alpha) / rest_t) - np.log((y_o + alpha) / rest_o)
        z = delta / np.sqrt(1.0 / (y_t + alpha) + 1.0 / (y_o + alpha))
    informative = (pooled > 0) & (rest_t > 0) & (rest_o > 0)
    return np.where(informative, delta, 0.0), np.where(informative, z, 0.0)


def _ranking(values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    order = np.argsort(-values, kind="stable")
    if len(order) < 2**31:  # half the memory of every comparison's rankings
        order = order.astype(np.int32)
    rank = np.empty_like(order)
    rank[order] = np.arange(1, len(order) + 1)
    return order, rank


def _comparison(
    view: ModelView,
    t: int,
    others: Sequence[int],
    documents: DocumentCounts | None,
    traits: TokenTraits,
    watched: np.ndarray,
    thresholds: RiskThresholds,
    prior_scale: float | None,
    rest: _Rest | None = None,
) -> VocabComparison:
    fc, cc = view.feature_count, view.class_count
    y_t = fc[t]
    against_rest = rest is not None and len(others) == view.n_classes - 1
    idx = None if against_rest else list(others)
    if against_rest:  # t against the rest: totals less t's own
        y_o, m_o = rest.feature_total - y_t, rest.class_total - float(cc[t])
    else:
        y_o, m_o = fc[idx].sum(axis=0), float(cc[idx].sum())
    m_t = float(cc[t])

    ratio = _ratio(view, t, others, rest)
    delta, z = monroe_zscore(y_t, y_o, prior_scale)
    with np.errstate(invalid="ignore", divide="ignore"):
        rate = np.where(ratio > 0, y_t / m_t, y_o / m_o)
    mass = np.where(np.isfinite(rate), ratio * rate, 0.0)

    if documents is not None:
        d_t = documents.counts[t]
        if against_rest:
            d_o, n_o = rest.document_total - d_t, rest.message_total - float(documents.messages[t])
        else:
            d_o, n_o = documents.counts[idx].sum(axis=0), float(documents.messages[idx].sum())
        table = np.stack([d_t, d_o, documents.messages[t] - d_t, n_o - d_o])
    elif view.feature_kind == "binary":
        d_t, d_o = y_t, y_o
        table = np.stack([y_t, y_o, m_t - y_t, m_o - y_o])
    else:
        d_t = d_o = None
        table = np.stack([y_t, y_o, y_t.sum() - y_t, y_o.sum() - y_o])
    chi2, g2, mi = pearson_chi2(*table), dunning_g2(*table), mutual_information(*table)
    direction = np.sign(table[0] * table[3] - table[1] * table[2]).astype(np.int8)

    normal = view.normal_index
    flagged_sides = (True, True) if normal is None else (t != normal, normal not in others)
    flags = risk_flags(traits, ratio, y_t + y_o, watched, thresholds, flagged_sides)
    columns = {"zscore": z, "ratio": ratio, "mass": mass, "chi2": direction * chi2, "g2": direction * g2}
    rankings = [_ranking(columns[lens]) for lens in LENSES]
    return VocabComparison(
        target=str(view.classes[t]),
        other=str(view.classes[others[0]]) if len(others) == 1 else REST,
        other_classes=(_AllBut(t, view.n_classes, view.classes) if against_rest
                       else tuple(str(view.classes[o]) for o in idx)),
        ratio=ratio,
        weighted_log_odds=delta,
        zscore=z,
        mass=mass,
        chi2=chi2,
        g2=g2,
        mi=mi,
        direction=direction,
        support_target=y_t,
        support_other=y_o,
        documents_target=d_t,
        documents_other=d_o,
        messages_target=m_t,
        messages_other=m_o,
        table=table,
        flags=flags,
        flag_counts=MappingProxyType({name: int(flags[i].sum()) for i, name in enumerate(FLAGS)}),
        order=np.stack([o for o, _ in rankings]),
        rank=np.stack([r for _, r in rankings]),
    )


def review_vocabulary(
    view: ModelView,
    *,
    target: str | None = None,
    against: str | None = None,
    lens: str = "zscore",
    top: int = DEFAULT_TOP,
    documents: DocumentCounts | None = None,
    watchlist: Watchlist | None = None,
    thresholds: RiskThresholds = RiskThresholds(),
    prior_scale: float | None = None,
    redact_personal: bool = False,
    analyzer: Callable[[str], Sequence[str]] | None = None,
    names=frozenset(),
) -> VocabReview:
    """Review what ``view`` has learned; see the module docstring for every column.

    Parameters
    ----------
    view : the model's normalised arrays.
    target, against : which comparisons (:func:`plan_comparisons`).
    lens : the ranking presenters lead with, one of :data:`LENSES`.
    top : how many tokens for and against presenters list.
    documents : message counts from a labelled file (:func:`document_counts`).
    watchlist : terms to report whatever their evidence.
    names : lower-case words found as people's names (or a word -> kind mapping) in the messages at hand
        (:func:`explain.analysis.personal_data.names_in`): such tokens are ``personal`` (kind ``name``) too.
    thresholds : when evidence is strong and support thin.
    prior_scale : ``a0`` of the z-score's prior; None for the pooled total.
    redact_personal : replace personal-looking tokens (and watchlist terms) by placeholders.
    analyzer : the model's tokenizer (text -> tokens), tried on example personal
        values to say which kinds it splits into unrecognisable pieces.

    Examples
    --------
    >>> from sklearn.naive_bayes import MultinomialNB
    >>> from explain.model.model_view import view_of
    >>> clf = MultinomialNB().fit([[5, 1, 0], [0, 1, 4]], ["ok", "scam"])
    >>> review = review_vocabulary(view_of(clf, ["moorings", "the", "prize"], "counts"))
    >>> c = review.comparisons[0]
    >>> c.label, review.tokens[c.top("zscore", 1)], review.tokens[c.top("zscore", 1, "against")]
    ('scam vs ok', array(['prize'], dtype=object), array(['moorings'], dtype=object))
    """
    _check_lens(lens)
    if top < 1:
        raise NbledgerError(f"--top must be at least 1, got {top}")
    plan = plan_comparisons(view, target, against)
    traits = token_traits(view.tokens, names)
    terms = watchlist.terms if watchlist is not None else ()
    columns = watchlist_columns(terms, view.tokens)
    watched = np.zeros(view.n_features, dtype=bool)
    watched[columns[columns >= 0]] = True
    rest = _Rest(view, documents) if any(len(o) == view.n_classes - 1 and len(o) > 1 for _, o in plan) else None
    comparisons = _Comparisons(
        plan, lambda t, others: _comparison(view, t, others, documents, traits, watched, thresholds, prior_scale, rest),
        keep=len(plan) if len(plan) * view.n_features <= _KEPT_CELLS else max(4, _KEPT_CELLS // view.n_features),
    )
    if len(comparisons):
        comparisons[0]  # a bad setting (the prior scale) is refused now, not while presenting
    tokens = redact(view.tokens, traits) if redact_personal else np.asarray(view.tokens, dtype=object)
    shown = list(terms)
    if redact_personal:
        # A term is hidden when it looks personal itself or matched a hidden token.
        for i, (c, personal) in enumerate(zip(columns, token_traits(terms).personal)):
            if c >= 0 and traits.personal[c]:
                shown[i] = tokens[c]
            elif personal:
                shown[i] = "[personal term]"
    return VocabReview(
        classes=tuple(str(c) for c in view.classes),
        normal_class=view.normal_class,
        variant=view.variant,
        feature_kind=view.feature_kind,
        tokens=tokens,
        support_by_class=view.feature_count,
        comparisons=comparisons,
        traits=traits,
        counts=count_source(view, documents),
        prior_scale=prior_scale,
        thresholds=thresholds,
        lens=lens,
        top=int(top),
        redacted=bool(redact_personal),
        redacted_count=int(traits.personal.sum()) if redact_personal else 0,
        redaction=redaction_check(traits, analyzer),
        watchlist=tuple(WatchEntry(str(s), int(c)) for s, c in zip(shown, columns)),
        watchlist_source=None if watchlist is None else watchlist.source,
    )
