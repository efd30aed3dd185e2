"""The ledger of one decision adds up, tips where it says, and finds disguised words."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.special import logsumexp

from corpora import cases, loaded, messages
from explain.analysis.ledger import ledger_of


def sklearn_balance(case, ledger, text) -> float:
    """The balance from scikit-learn itself: jll differences (argmax) or log P(not normal) - log P(normal)."""
    pipe = case.pipeline
    classes = list(ledger.classes)
    debit = classes.index(ledger.debit_class)
    credit = [classes.index(c) for c in ledger.credit_classes]
    if ledger.rule == "argmax":
        jll = pipe[:-1].transform([text])
        jll = pipe[-1].predict_joint_log_proba(jll)[0]
        return float(jll[credit[0]] - jll[debit])
    logp = pipe.predict_log_proba([text])[0]
    return float(logsumexp(logp[credit]) - logp[debit])


def close(a: float, b: float) -> bool:
    return math.isclose(a, b, rel_tol=1e-9, abs_tol=1e-9)


@settings(max_examples=60, deadline=None)
@given(case=cases(), text=messages, data=st.data())
def test_ledger_adds_up_to_scikit_learn(case, text, data):
    """opening + entries == closing == scikit-learn's own balance, for every variant and feature kind."""
    threshold = data.draw(st.sampled_from([None, 0.5, 0.9, 0.01]))
    model = loaded(case.pipeline, normal_class="class0")
    if not text.strip():
        return
    ledger = ledger_of(model, text, threshold)
    total = ledger.opening + math.fsum(e.amount for e in ledger.entries)
    assert close(total, ledger.closing)
    assert close(ledger.closing, sklearn_balance(case, ledger, text))
    if ledger.entries:
        assert close(ledger.entries[-1].balance_after, ledger.closing)
    assert ledger.on_credit_side(ledger.closing) == ledger.credit_wins
    assert (ledger.decision in ledger.credit_classes) == ledger.credit_wins
    assert ledger.exact == (threshold is None or len(ledger.classes) == 2)
