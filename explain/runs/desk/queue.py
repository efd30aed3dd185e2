"""The desk's queue: messages read once at start, scored in chunks, each with its decision and risk flags.

Scores are the model's joint log-likelihoods (:meth:`ModelView.joint_log_likelihood`, equal to
scikit-learn's ``predict_joint_log_proba``); the flag log-odds and the decision come from the one
:class:`~explain.model.decision.DecisionRule`, the glossary's *margin* (how far the decision was from
going the other way, positive on the flagged side) from :func:`explain.analysis.drivers.flag_margin`.
The queue puts the messages with the smallest absolute margin first.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np
from scipy.special import expit

from explain.analysis.drivers import flag_margin
from explain.analysis.risk import FLAGS, RiskThresholds, risk_flags, token_traits
from explain.errors import NbledgerError
from explain.model.decision import DecisionRule

#: Messages scored at a time while a queue loads (one progress step each).
CHUNK = 2000


@dataclass(frozen=True)
class QueueItem:
    """One queued message and how the model decided it."""

    position: int
    id: str
    text: str
    decision: str
    flagged: bool
    flag_probability: float
    log_odds: float
    margin: float
    flags: tuple[str, ...]
    date: str | None = None

    def as_json(self, outcome: str | None) -> dict:
        return {
            "id": self.id,
            "decision": self.decision,
            "flagged": self.flagged,
            "flag_probability": self.flag_probability,
            "log_odds": self.log_odds,
            "margin": self.margin,
            "flags": list(self.flags),
            "date": self.date,
            "reviewed": outcome is not None,
            "outcome": outcome,
        }


@dataclass(frozen=True)
class Queue:
    items: tuple[QueueItem, ...]
    source: str

    def __post_init__(self):
        object.__setattr__(self, "_by_id", {})
        for item in self.items:
            self._by_id.setdefault(item.id, item)  # a repeated id: the first message is the one shown

    def get(self, message_id: str) -> QueueItem | None:
        return self._by_id.get(message_id)

    def __len__(self) -> int:
        return len(self.items)


def _token_flags(view, rule: DecisionRule, thresholds: RiskThresholds) -> dict[int, np.ndarray]:
    """Per flagged class c, the risk flags of every column weighed toward c against the normal class,
    a bool array (F, len(FLAGS)) (the same :func:`risk_flags` a ledger's entries get)."""
    traits = token_traits(list(view.tokens))
    normal = rule.normal_index
    watched = np.zeros(view.n_features, dtype=bool)
    out = {}
    for c in rule.flagged_indices:
        ratio = view.weights[c] - view.weights[normal]
        support = view.feature_count[[c, normal]].sum(axis=0)
        out[int(c)] = risk_flags(traits, ratio, support, watched, thresholds).T.copy()
    return out


def message_dates(values) -> list[str | None]:
    """Dates as ISO 8601 in UTC (``...Z``), None where missing or unreadable.

    RFC 5322 ``Date:`` headers are read by :func:`email.utils.parsedate_to_datetime`, anything else
    (ISO 8601 in a table) by :func:`pandas.to_datetime`; a date without a zone is taken as UTC.
    """
    import datetime as _dt
    from email.utils import parsedate_to_datetime

    import pandas as pd

    out: list[str | None] = []
    for value in values:
        moment = None
        if value is not None and not isinstance(value, str):
            value = str(value)
        if isinstance(value, str) and value.strip():
            try:
                moment = parsedate_to_datetime(value)
            except (TypeError, ValueError, IndexError):
                stamp = pd.to_datetime(value, utc=True, errors="coerce")
                moment = None if pd.isna(stamp) else stamp.to_pydatetime()
        if moment is not None and moment.tzinfo is None:
            moment = moment.replace(tzinfo=_dt.timezone.utc)
        out.append(None if moment is None else
                   moment.astimezone(_dt.timezone.utc).replace(microsecond=0).isoformat().replace("+00:00", "Z"))
    return out


def score_queue(loaded, messages, rule: DecisionRule, progress: Callable[[int, int], None] | None = None,
                dates=None) -> Queue:
    """Score ``messages`` (:class:`explain.model.data_io.Messages`) in chunks of :data:`CHUNK`; ``dates``
    (one string per message, as :func:`message_dates` reads them) orders the queue by date."""
    view, featurizer = loaded.view, loaded.featurizer
    if rule.normal_index is None:
        raise NbledgerError("the desk needs a normal class to weigh flagged messages against: give --normal-class")
    flags_by_class = _token_flags(view, rule, RiskThresholds())
    items: list[QueueItem] = []
    texts, ids, n = messages.texts, [str(i) for i in messages.ids], len(messages)
    dates = [None] * n if dates is None else message_dates(dates)
    for start in range(0, n, CHUNK):
        stop = min(start + CHUNK, n)
        X = view.prepare(featurizer.transform(texts[start:stop]))
        jll = view.joint_log_likelihood(X)
        flag = rule.flag_log_odds(jll)
        decided = rule.decide(jll)
        margin = flag_margin(rule, jll)
        top_flagged = rule.flagged_indices[np.argmax(jll[:, rule.flagged_indices], axis=1)]
        present = (X != 0).astype(np.int8).tocsr()
        for k in range(len(jll)):
            cols = present.indices[present.indptr[k]:present.indptr[k + 1]]
            having = flags_by_class[int(top_flagged[k])][cols].any(axis=0)
            items.append(QueueItem(
                position=start + k,
                id=ids[start + k],
                text=texts[start + k],
                decision=str(view.classes[decided[k]]),
                flagged=bool(decided[k] != rule.normal_index),
                flag_probability=float(expit(flag[k])),
                log_odds=float(flag[k]),
                margin=float(margin[k]),
                flags=tuple(FLAGS[j] for j in np.flatnonzero(having)),
                date=dates[start + k],
            ))
        if progress is not None:
            progress(stop, n)
    return Queue(tuple(items), str(messages.source))


ORDERS = ("margin", "date", "arrival")


def select(queue: Queue, outcomes: dict[str, str], *, decision=None, flag=None, reviewed=None,
           order: str = "margin") -> list[QueueItem]:
    """The queue filtered (decision class, risk flag, reviewed or not) and ordered.

    ``order``: ``margin`` (smallest absolute margin first: nearest the other decision), ``date`` (oldest
    first, undated last) or ``arrival`` (file order).
    """
    if order not in ORDERS:
        raise NbledgerError(f"order must be one of {', '.join(ORDERS)}")
    chosen = [
        item for item in queue.items
        if (decision is None or item.decision == decision or (decision == "flagged" and item.flagged))
        and (flag is None or flag in item.flags)
        and (reviewed is None or (item.id in outcomes) == reviewed)
    ]
    if order == "margin":
        chosen.sort(key=lambda item: (abs(item.margin), item.position))
    elif order == "date":
        chosen.sort(key=lambda item: (item.date is None, item.date or "", item.position))
    return chosen
