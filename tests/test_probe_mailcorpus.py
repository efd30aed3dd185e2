"""Evasion on real mail: the public corpus described in ../shared/README.md.

A multinomial filter on word counts is trained on ``easy-ham-1`` + ``spam-1``;
the share of ``spam-2`` messages it flags that could be let through with at
most 5 added tokens is printed with the test results (no fixed expectation).
Each reported attack is checked with scikit-learn on the padded text.
"""

import numpy as np
import pytest
from sklearn.feature_extraction.text import CountVectorizer
from sklearn.naive_bayes import MultinomialNB
from sklearn.pipeline import make_pipeline

from benchmarks import mailcorpus
from explain.analysis.evasion import evasion_costs
from explain.model.decision import DecisionRule
from tests.corpora import loaded

pytestmark = pytest.mark.mailcorpus


def test_share_of_spam_2_evaded_with_five_added_tokens():
    try:
        train = mailcorpus.load(["easy-ham-1", "spam-1"])
        later = mailcorpus.load(["spam-2"])
    except mailcorpus.CorpusUnavailable as exc:
        pytest.skip(f"public mail corpus unavailable: {exc}")
    pipeline = make_pipeline(CountVectorizer(min_df=2), MultinomialNB()).fit(train.texts, train.labels)
    model = loaded(pipeline, "ham")
    found = evasion_costs(model, later.texts, DecisionRule.for_view(model.view), max_added=50)
    assert found.repeats.exact and found.distinct.exact
    flagged = len(found.rows)
    assert flagged == int((pipeline.predict(later.texts) == "spam").sum())
    for budget in ("repeats", "distinct"):
        res = found.budget(budget)
        within5 = float(((res.costs > 0) & (res.costs <= 5)).mean())
        summary = res.summaries[0]
        print(
            f"\nspam-2, {budget}: {flagged} of {len(later)} flagged; evaded with <= 5 added tokens: "
            f"{100 * within5:.1f} %; median {summary.median}, quartiles {summary.q1}-{summary.q3}; "
            f"weak points: {', '.join(w.token for w in res.weak_points[:5])}"
        )
        # scikit-learn lets every padded text through (checked on a spread of messages)
        picks = np.flatnonzero(res.costs > 0)[:: max(1, flagged // 40)]
        padded = [
            later.texts[found.rows[i]] + " " + " ".join(t for t, n in res.additions[i] for _ in range(n)) for i in picks
        ]
        assert (pipeline.predict(padded) == "ham").all()
