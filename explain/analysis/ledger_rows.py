"""The ledger of many messages: one row of evidence per message, chunk by chunk.

:func:`ledger_rows` turns one chunk of texts into :class:`LedgerRows` (every
figure ``why`` gives for a message, in arrays) and, when asked, the chunk's
:class:`~explain.analysis.drivers.FlagDrivers`. It is pure and works on one
chunk at a time, so a stream of any length needs memory for one chunk only;
the local and the Dask engine both call it.

The flip-set size comes from :func:`~explain.analysis.evidence.exact_flips`
for every message at once where it is a proven minimum (count or presence
features, with the most probable class or a threshold on two classes). For
TF-IDF or a threshold over several flagged classes only a greedy search per
message exists (``nbledger why``), and the ledger leaves the size empty.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from explain.analysis.batch import BatchEvidence, batch_evidence
from explain.analysis.drivers import FlagDrivers, chunk_drivers, flag_margin
from explain.analysis.evidence import exact_flip_possible, exact_flips
from explain.model.decision import DecisionRule, flag_probability
from explain.model.email_reader import resolve_text_view

#: Texts larger than this are explained like any other, and counted (``why`` refuses them).
LARGE_TEXT_BYTES = 1024 * 1024


@dataclass(frozen=True, eq=False)
class LedgerRows:
    """The ledger rows of one chunk of n messages, in input order.

    ``ids`` (n,) str; ``evidence`` the :class:`BatchEvidence` (scores, decision,
    top tokens for and against the predicted class); ``flag_probability``,
    ``margin`` (n,) float and ``flagged`` (n,) bool, or None when the model
    has no normal class; ``flip_size`` (n,) int, the token occurrences in the
    minimum flip set, -1 where no removal changes the decision or the size
    is not exact (see the module note); ``empty`` (n,) bool, texts with no
    character other than white space; ``large`` how many texts exceed
    :data:`LARGE_TEXT_BYTES`. The evidence's top tokens follow the ledger's
    comparison (``evidence.credit`` against ``evidence.debit``), as ``why`` tells
    each message; ``text_view`` is the view the texts were read in.
    """

    ids: np.ndarray
    evidence: BatchEvidence
    flag_probability: np.ndarray | None
    margin: np.ndarray | None
    flagged: np.ndarray | None
    flip_size: np.ndarray
    empty: np.ndarray
    large: int
    #: the text view the texts were read in (``raw``: as given)
    text_view: str = "raw"

    def __len__(self) -> int:
        return len(self.ids)

    def flagged_per_class(self) -> np.ndarray:
        """Flagged messages per decided class, shape (C,)."""
        C = len(self.evidence.classes)
        if self.flagged is None:
            return np.zeros(C, dtype=np.int64)
        return np.bincount(self.evidence.decision[self.flagged], minlength=C)


def ledger_rows(model, texts: list, ids, rule: DecisionRule, top_k: int = 5, drivers: bool = False, features=None,
                text_view: str | None = None):
    """Ledger rows of ``texts`` (list of str) with ``ids`` (n,), and their flag drivers.

    ``features`` may hold ``featurizer.counts_and_features(texts)`` when the
    caller has computed it already; ``text_view`` the view the texts were read
    in (default: the model card's, else ``raw``, as
    :func:`~explain.model.email_reader.resolve_text_view` decides).
    Returns ``(LedgerRows, FlagDrivers or None)``.
    """
    model = model.named_for(texts)
    view, featurizer = model.view, model.featurizer
    counts, X = featurizer.counts_and_features(texts) if features is None else features
    batch = batch_evidence(view, X, rule, top_k)
    flip = np.full(len(texts), -1, dtype=np.int64)
    if exact_flip_possible(view, featurizer, rule) and len(texts):
        flips = exact_flips(view, featurizer, rule, counts, batch.decision, jll=batch.jll)
        flip = np.where(flips.units > 0, flips.size, -1)
    margin = flagged = probability = None
    if rule.normal_index is not None and view.n_classes > 1:
        margin = flag_margin(rule, batch.jll)
        flagged = batch.decision != rule.normal_index
        probability = flag_probability(batch.flag_log_odds)  # the one P(flag), as in explain_message
    rows = LedgerRows(
        ids=np.asarray(ids, dtype=object),
        evidence=batch,
        flag_probability=probability,
        margin=margin,
        flagged=flagged,
        flip_size=flip,
        empty=_empty(texts),
        large=_large(texts),
        text_view=resolve_text_view(getattr(model, "card", None)) if text_view is None else text_view,
    )
    found = None
    if drivers:
        prepared = view.prepare(X)
        prepared.sort_indices()
        found = chunk_drivers(view, rule, prepared, batch.jll, batch.decision)
    return rows, found


def _empty(texts: list) -> np.ndarray:
    """Texts with no character other than white space, (n,) bool."""
    blank = np.fromiter(map(str.isspace, texts), dtype=bool, count=len(texts))
    return blank | (np.fromiter(map(len, texts), dtype=np.int64, count=len(texts)) == 0)


def _large(texts: list) -> int:
    """How many texts exceed :data:`LARGE_TEXT_BYTES` in UTF-8 (at most 4 bytes a character)."""
    lengths = np.fromiter(map(len, texts), dtype=np.int64, count=len(texts))
    return sum(
        len(texts[i].encode("utf-8", "surrogatepass")) > LARGE_TEXT_BYTES
        for i in np.flatnonzero(lengths > LARGE_TEXT_BYTES // 4)
    )
