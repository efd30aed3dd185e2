"""The flip set is the smallest removal that changes the decision (brute force over all subsets)."""

from __future__ import annotations

import itertools

import numpy as np
import pytest
import scipy.sparse as sp
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from corpora import WORDS, cases
from explain.model.decision import DecisionRule
from explain.analysis.evidence import _presence_only, explain_message

short_messages = st.lists(st.sampled_from(WORDS[:8]), min_size=1, max_size=6).map(" ".join)
PROPERTY = settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])


def decide(model, counts, rule):
    f, view = model.featurizer, model.view
    x = view.prepare(f.weigh(sp.csr_matrix(counts.reshape(1, -1))))
    return int(rule.decide(view.joint_log_likelihood(x))[0])


def brute_minimum(model, text, rule):
    """Fewest units whose removal changes the decision, over every subset (None: impossible).

    A unit is one occurrence for count features, one whole token when only presence matters.
    """
    f, view = model.featurizer, model.view
    counts = f.occurrences(text).counts(f.n_features).toarray()[0]
    start = decide(model, counts, rule)
    present = np.flatnonzero(counts)
    presence = _presence_only(view, f)
    choices = [range(2) if presence else range(int(counts[j]) + 1) for j in present]
    best = None
    for removal in itertools.product(*choices):
        r = np.array(removal)
        cost = int(r.sum())
        if best is not None and cost >= best:
            continue
        after = counts.copy()
        after[present] -= counts[present] * r if presence else r
        if decide(model, after, rule) != start:
            best = cost
    return best, counts, start


def units(flip, presence):
    return len(flip.removals) if presence else flip.size


def check(model, text, threshold):
    rule = DecisionRule.for_view(model.view, threshold)
    e = explain_message(model, text, threshold)
    best, counts, start = brute_minimum(model, text, rule)
    presence = _presence_only(model.view, model.featurizer)
    flip = e.flip
    if flip.removals:
        after = counts.copy()
        for token, n in flip.removals:
            after[int(np.flatnonzero(model.view.tokens == token)[0])] -= n
        assert (after >= 0).all()
        assert decide(model, after, rule) != start  # re-scored exactly: the decision does change
        assert flip.new_decision == model.view.classes[decide(model, after, rule)]
    if flip.exact:
        assert (best is None) == (not flip.removals), (best, flip)
        if best is not None:
            assert units(flip, presence) == best
    else:
        assert flip.method == "greedy"
        if flip.removals:
            assert units(flip, presence) >= best


@PROPERTY
@given(case=cases(kind="counts"), text=short_messages)
def test_exact_for_counts_with_argmax(case, text):
    check(case.model, text, None)


@PROPERTY
@given(case=cases(kind="binary"), text=short_messages)
def test_exact_for_presence_features_with_argmax(case, text):
    check(case.model, text, None)


@pytest.mark.parametrize("kind", ["counts", "binary"])
@PROPERTY
@given(data=st.data(), text=short_messages, t=st.floats(0.02, 0.98))
def test_exact_with_a_threshold_on_two_classes(kind, data, text, t):
    case = data.draw(cases(n_classes=2, kind=kind))
    check(case.model, text, t)


@PROPERTY
@given(case=cases(kind="tfidf"), text=short_messages)
def test_greedy_for_tfidf_is_labelled_and_valid(case, text):
    e = explain_message(case.model, text)
    view = case.model.view
    presence = view.variant == "bernoulli" and view.binarize == 0.0  # TF-IDF reduced to presence
    if not presence and e.tokens:
        assert not e.flip.exact and e.flip.method == "greedy"
    check(case.model, text, None)


@PROPERTY
@given(case=cases(n_classes=3, kind="counts"), text=short_messages, t=st.floats(0.05, 0.95))
def test_threshold_over_several_flagged_classes_is_greedy_and_valid(case, text, t):
    from dataclasses import replace

    model = replace(case.model, view=case.model.view.with_normal_class("class0"))
    e = explain_message(model, text, t)
    assert e.flip.method == "greedy" or not e.flip.removals
    check(model, text, t)


def test_flip_set_on_a_clear_case_names_the_driving_token():
    from corpora import loaded, make_pipeline

    pipe = make_pipeline("counts", "multinomial").fit(
        ["pay the parcel fee", "parcel fee link now", "fee link", "tea at the workshop", "kids tea", "drill at workshop"],
        ["scam", "scam", "scam", "ok", "ok", "ok"],
    )
    e = explain_message(loaded(pipe), "tea and parcel fee fee")
    assert e.predicted == "scam"
    assert e.flip.exact and e.flip.new_decision == "ok"
    assert "fee" in dict(e.flip.removals)
