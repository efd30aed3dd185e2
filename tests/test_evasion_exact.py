"""Exact evasion costs are computed in full, never capped; every attack is confirmed by scikit-learn.

References: an independent computation from scikit-learn's fitted arrays (``feature_log_prob_``,
``predict_joint_log_proba``) by a sorted cumulative sum, and scikit-learn's ``predict`` on each
attacked text.
"""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np
import pytest

from corpora import loaded
from explain.analysis.evasion import MoreThan, evasion_costs
from explain.model.decision import DecisionRule
from sklearn.feature_extraction.text import CountVectorizer
from sklearn.naive_bayes import MultinomialNB
from sklearn.pipeline import Pipeline

DEMO = Path(__file__).resolve().parents[1] / "demo_corpus" / "messages.csv"


@pytest.fixture(scope="module")
def two_classes():
    with open(DEMO, newline="", encoding="utf-8") as fh:
        rows = [r for r in csv.DictReader(fh) if r["label"] in ("ok", "scam")]
    train, test = rows[: len(rows) * 2 // 3], rows[len(rows) * 2 // 3 :]
    pipeline = Pipeline([("v", CountVectorizer()), ("nb", MultinomialNB())])
    pipeline.fit([r["text"] for r in train], [r["label"] for r in train])
    return pipeline, [r["text"] for r in test]


def independent_costs(pipeline, texts, budget: str) -> np.ndarray:
    """Cheapest additions by a sorted cumulative sum over scikit-learn's own arrays (no project code).

    Margin ``m = jll[scam] - jll[ok]`` (``predict_joint_log_proba``); one added occurrence of token
    ``j`` changes it by ``g_j = log p(j|scam) - log p(j|ok)`` (``feature_log_prob_``). Argmax lets the
    message through once ``m + sum(g) < 0`` (at exactly 0 ``ok``, the first class, wins too).
    """
    vec, nb = pipeline[0], pipeline[-1]
    classes = list(nb.classes_)
    normal, flagged = classes.index("ok"), classes.index("scam")
    analyze = vec.build_analyzer()
    names = vec.get_feature_names_out()
    addable = np.array([analyze(t) == [t] for t in names])
    g = nb.feature_log_prob_[flagged] - nb.feature_log_prob_[normal]
    X = vec.transform(texts)
    jll = nb.predict_joint_log_proba(X)
    margin = jll[:, flagged] - jll[:, normal]
    costs = []
    for i in np.flatnonzero(margin > 0):
        if budget == "repeats":
            step = -g[addable].min()
            costs.append(int(np.floor(margin[i] / step)) + 1)
        else:
            allowed = addable & (g < 0)
            allowed[X[i].indices] = False
            gains = np.sort(g[allowed])
            total = margin[i] + np.cumsum(gains)
            through = np.flatnonzero(total <= 0)
            costs.append(int(through[0]) + 1 if len(through) else -1)
    return np.array(costs)


def _attacked(text: str, additions) -> str:
    return text + " " + " ".join(" ".join([token] * n) for token, n in additions)


@pytest.mark.parametrize("budget", ["repeats", "distinct"])
def test_exact_median_is_the_sorted_cumulative_sum_and_never_capped(two_classes, budget):
    pipeline, texts = two_classes
    model = loaded(pipeline, normal_class="ok")
    rule = DecisionRule.for_view(model.view)
    # max_added=2 is far below most costs: exact costs must not stop there (the cap is the greedy search's only).
    evasion = evasion_costs(model, texts, rule, max_added=2)
    result = evasion.budget(budget)
    assert result.exact
    expected = independent_costs(pipeline, texts, budget)
    assert len(expected) == len(result.costs) and (expected > 2).sum() > len(expected) // 2
    assert list(result.costs) == list(expected)
    ranked = np.where(expected < 0, np.inf, expected).astype(float)
    median = float(np.quantile(ranked, 0.5, method="inverted_cdf"))
    (summary,) = result.summaries
    assert summary.median == median and not isinstance(summary.median, MoreThan)
    # Each attack lets the message through by scikit-learn's predict; one unit less does not.
    for row, cost, additions in list(zip(evasion.rows, result.costs, result.additions))[:40]:
        assert sum(n for _, n in additions) == cost
        assert pipeline.predict([_attacked(texts[row], additions)])[0] == "ok"
        fewer = list(additions[:-1]) + ([(additions[-1][0], additions[-1][1] - 1)] if additions[-1][1] > 1 else [])
        assert pipeline.predict([_attacked(texts[row], fewer) if fewer else texts[row]])[0] == "scam"


def test_greedy_costs_past_the_cap_are_more_than_n(two_classes):
    """Three classes search greedily: a quartile past max_added says "more than N", never a missing value."""
    with open(DEMO, newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))[:900]
    pipeline = Pipeline([("v", CountVectorizer()), ("nb", MultinomialNB())])
    pipeline.fit([r["text"] for r in rows[:600]], [r["label"] for r in rows[:600]])
    model = loaded(pipeline, normal_class="ok")
    evasion = evasion_costs(model, [r["text"] for r in rows[600:]], DecisionRule.for_view(model.view), max_added=1)
    result = evasion.budget("repeats")
    assert not result.exact
    values = [v for s in result.summaries for v in (s.q1, s.median, s.q3)]
    assert all(v is not None for v in values)
    beyond = [v for v in values if isinstance(v, MoreThan)]
    assert beyond and all(v.limit == 1 and str(v) == "more than 1" for v in beyond)
