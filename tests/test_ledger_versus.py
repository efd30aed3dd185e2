"""The balance answers the decision's question, checked against scikit-learn's own scores.

Reference for every figure: scikit-learn's ``predict`` and ``predict_joint_log_proba``
(``MultinomialNB``, ``ComplementNB``, ``BernoulliNB`` in ``sklearn.naive_bayes``).
"""

from __future__ import annotations

import math

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from batch_tops import top_tokens
from corpora import cases, loaded, messages
from explain.analysis.batch import batch_evidence
from explain.analysis.ledger import ledger_of


def close(a: float, b: float) -> bool:
    return math.isclose(a, b, rel_tol=1e-9, abs_tol=1e-9)


def sklearn_jll(pipeline, text: str) -> np.ndarray:
    """scikit-learn's joint log-likelihoods of one text (the reference)."""
    return pipeline[-1].predict_joint_log_proba(pipeline[:-1].transform([text]))[0]


@settings(max_examples=40, deadline=None)
@given(case=cases(n_classes=3), text=messages)
def test_three_classes_argmax_closing_balance_is_decided_against_normal(case, text):
    """Flagged: jll[decided] - jll[normal]; let through: jll[normal] - max over flagged jll (scikit-learn)."""
    if not text.strip():
        return
    model = loaded(case.pipeline, normal_class="class0")
    ledger = ledger_of(model, text)
    jll = sklearn_jll(case.pipeline, text)
    decided = str(case.pipeline.predict([text])[0])  # scikit-learn's predict is the decision
    assert ledger.decision == decided
    classes = list(case.pipeline.classes_)
    normal = classes.index("class0")
    flagged = [c for c in range(len(classes)) if c != normal]
    if decided != "class0":
        d = classes.index(decided)
        assert ledger.versus == "flagged-against-normal"
        assert (ledger.credit_class, ledger.debit_class) == (decided, "class0")
        assert close(ledger.closing, jll[d] - jll[normal])
        other = next(c for c in flagged if c != d)
        assert ledger.beat[0] == classes[other] and close(ledger.beat[1], jll[d] - jll[other])
    else:
        strongest = max(flagged, key=lambda c: (jll[c], -c))
        assert ledger.versus == "normal-against-flagged" and ledger.beat is None
        assert (ledger.credit_class, ledger.debit_class) == ("class0", classes[strongest])
        assert close(ledger.closing, jll[normal] - jll[flagged].max())
    # Every entry is its token's exact share of that comparison: they add up to the closing balance.
    assert ledger.exact and close(ledger.opening + math.fsum(e.amount for e in ledger.entries), ledger.closing)
    assert ledger.credit_wins  # argmax with the decided side on credit


@settings(max_examples=25, deadline=None)
@given(case=cases(n_classes=3), texts=st.lists(messages, min_size=1, max_size=6))
def test_batch_top_tokens_use_the_ledgers_comparison(case, texts):
    """The ledger rows' top tokens are the ledger's own entries: one message, one set of entries."""
    texts = [t for t in texts if t.strip()]
    if not texts:
        return
    model = loaded(case.pipeline, normal_class="class0")
    from explain.model.decision import DecisionRule

    batch = batch_evidence(model.view, model.featurizer.transform(texts), DecisionRule.for_view(model.view), top_k=50)
    for i, text in enumerate(texts):
        ledger = ledger_of(model, text)
        assert model.view.classes[batch.credit[i]] == ledger.credit_class
        assert model.view.classes[batch.debit[i]] == ledger.debit_class
        amounts = {e.token: e.amount for e in ledger.entries}
        for token, value in top_tokens(batch, i, "for") + top_tokens(batch, i, "against"):
            assert close(value, amounts[token])


def test_no_normal_class_is_said_and_is_predicted_against_runner_up():
    from corpora import make_pipeline

    texts = ["fee parcel link", "tea harbour kids", "solar window lesson", "fee prize raffle"]
    labels = ["a", "b", "c", "a"]
    pipeline = make_pipeline("counts", "multinomial").fit(texts, labels)
    ledger = ledger_of(loaded(pipeline), "fee window tea")
    jll = sklearn_jll(pipeline, "fee window tea")
    top = np.argsort(-jll, kind="stable")
    assert ledger.versus == "predicted-against-runner-up" and "no normal class" in ledger.versus_words
    assert close(ledger.closing, jll[top[0]] - jll[top[1]])
