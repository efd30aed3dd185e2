"""The evidence engine against scikit-learn and against published worked examples."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from batch_tops import top_tokens
from corpora import cases, loaded, make_pipeline, messages
from explain.analysis.batch import batch_evidence, score_texts
from explain.model.decision import DecisionRule
from explain.errors import NbledgerError
from explain.analysis.evidence import explain_message

PROPERTY = settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])


def reference(pipeline, texts):
    """scikit-learn's own numbers (reference library: scikit-learn 1.9)."""
    X = pipeline[:-1].transform(texts)
    clf = pipeline[-1]
    return clf.predict_joint_log_proba(X), clf.predict_proba(X), clf.predict(X)


def rel_close(a, b, tol=1e-9):
    return abs(a - b) <= tol * max(1.0, abs(a), abs(b))


# Parity with scikit-learn over every variant x feature kind x class count.
@pytest.mark.parametrize("n_classes", [2, 3, 5])
@pytest.mark.parametrize("kind", ["counts", "binary", "tfidf", "count+tfidf"])
@pytest.mark.parametrize("variant", ["multinomial", "complement", "bernoulli"])
@PROPERTY
@given(data=st.data())
def test_evidence_adds_up_to_sklearn_joint_log_likelihood(n_classes, kind, variant, data):
    case = data.draw(cases(n_classes=n_classes, kind=kind, variant=variant))
    text = data.draw(messages.filter(lambda t: t.strip()))
    jll, proba, predicted = reference(case.pipeline, [text])
    e = explain_message(case.model, text)
    a, b = e.classes.index(e.predicted), e.classes.index(e.runner_up)
    assert e.predicted == predicted[0]
    assert rel_close(e.log_odds, jll[0, a] - jll[0, b])
    assert rel_close(e.baseline + e.evidence_sum, jll[0, a] - jll[0, b])
    np.testing.assert_allclose(e.probabilities, proba[0], rtol=1e-9, atol=1e-12)
    np.testing.assert_allclose(e.jll, jll[0], rtol=1e-9)
    for t in e.tokens:
        assert rel_close(t.evidence, t.value * t.per_unit)
        assert math.isclose(t.odds_factor, math.exp(t.evidence), rel_tol=1e-12)


@PROPERTY
@given(case=cases(), texts=st.lists(messages, min_size=1, max_size=8))
def test_batch_matches_sklearn_and_single_messages(case, texts):
    jll, proba, predicted = reference(case.pipeline, texts)
    batch = score_texts(case.model, texts, top_k=3)
    np.testing.assert_allclose(batch.jll, jll, rtol=1e-9)
    np.testing.assert_allclose(batch.probabilities, proba, rtol=1e-9, atol=1e-12)
    assert list(batch.classes[batch.predicted]) == list(predicted)
    for i, text in enumerate(texts):
        if not text.strip():
            continue
        e = explain_message(case.model, text)
        want = [(t.token, t.evidence) for t in e.strongest(3, "for")]
        got = top_tokens(batch, i, "for")
        assert [round(v, 9) for _, v in got] == [round(v, 9) for _, v in want]
        assert {tok for tok, _ in got} <= {t.token for t in e.tokens}
        against = [(t.token, t.evidence) for t in e.strongest(3, "against")]
        assert [round(v, 9) for _, v in top_tokens(batch, i, "against")] == [round(v, 9) for _, v in against]


@PROPERTY
@given(case=cases(), text=messages)
def test_weigh_counts_reproduces_the_pipeline_features(case, text):
    f = case.model.featurizer
    occ = f.occurrences(text)
    mine = f.weigh(occ.counts(f.n_features)).toarray()
    np.testing.assert_allclose(mine, f.transform([text]).toarray(), rtol=1e-12, atol=1e-15)
    np.testing.assert_array_equal(f.counts([text]).toarray(), occ.counts(f.n_features).toarray())


@PROPERTY
@given(case=cases(n_classes=2), text=messages.filter(lambda t: t.strip()), t=st.floats(0.01, 0.99))
def test_threshold_decision_on_two_classes(case, text, t):
    e = explain_message(case.model, text, threshold=t)
    _, proba, _ = reference(case.pipeline, [text])
    if abs(proba[0, 1] - t) < 1e-9:
        return  # a tie at the threshold is decided by rounding
    # With two classes and no named normal class the first class is normal.
    flagged = proba[0, 1] >= t
    assert e.decision == (e.classes[1] if flagged else e.classes[0])
    assert math.isclose(e.flag_probability, proba[0, 1], rel_tol=1e-9, abs_tol=1e-12)


@PROPERTY
@given(case=cases(n_classes=3), texts=st.lists(messages, min_size=1, max_size=6), t=st.floats(0.05, 0.95))
def test_threshold_on_not_normal_with_several_classes(case, texts, t):
    view = case.model.view.with_normal_class("class1")
    rule = DecisionRule.for_view(view, t)
    batch = batch_evidence(view, case.model.featurizer.transform(texts), rule)
    _, proba, _ = reference(case.pipeline, texts)
    not_normal = 1 - proba[:, 1]
    for i in range(len(texts)):
        if abs(not_normal[i] - t) < 1e-9:
            continue  # a tie at the threshold is decided by rounding
        if not_normal[i] >= t:
            flagged = [0, 2]
            assert batch.decision[i] == flagged[int(np.argmax(proba[i, flagged]))]
        else:
            assert batch.decision[i] == 1


def test_bernoulli_baseline_separates_prior_and_absence():
    pipe = make_pipeline("counts", "bernoulli").fit(
        ["fee link parcel", "fee courier", "tea kids", "workshop tea drill"], ["scam", "scam", "ok", "ok"]
    )
    e = explain_message(loaded(pipe), "fee tea")
    p = np.exp(pipe[-1].feature_log_prob_)
    a, b = e.classes.index(e.predicted), e.classes.index(e.runner_up)
    absence = np.log(1 - p).sum(axis=1)
    assert e.baseline_absence == pytest.approx(absence[a] - absence[b], rel=1e-12)
    assert e.baseline == pytest.approx(e.baseline_prior + e.baseline_absence, rel=1e-12)


def test_complement_nb_adds_no_prior_with_two_or_more_classes():
    # scikit-learn 1.9, ComplementNB._joint_log_likelihood: the prior is added only for one class.
    pipe = make_pipeline("counts", "complement").fit(
        ["fee fee link", "fee courier", "tea kids", "tea drill", "tea tea"], ["scam", "scam", "ok", "ok", "ok"]
    )
    e = explain_message(loaded(pipe), "fee tea")
    assert e.baseline == 0.0 and e.baseline_prior == 0.0


# Manning, Raghavan & Schütze, Introduction to Information Retrieval (2008), ch. 13,
# Examples 13.1 (multinomial) and 13.2 (Bernoulli); the values were recalled from the book
# and each is confirmed in the test by scikit-learn itself (alpha = 1) beside our figure.
IIR_TRAIN = ["Chinese Beijing Chinese", "Chinese Chinese Shanghai", "Chinese Macao", "Tokyo Japan Chinese"]
IIR_LABELS = ["c", "c", "c", "not-c"]
IIR_TEST = "Chinese Chinese Chinese Tokyo Japan"


def test_iir_multinomial_worked_example():
    pipe = make_pipeline("counts", "multinomial").fit(IIR_TRAIN, IIR_LABELS)
    e = explain_message(loaded(pipe), IIR_TEST)
    joint = dict(zip(e.classes, np.exp(e.jll)))
    assert joint["c"] == pytest.approx(0.0003, abs=0.00005)
    assert joint["not-c"] == pytest.approx(0.0001, abs=0.00005)
    reference = dict(zip(pipe.classes_, np.exp(pipe[-1].predict_joint_log_proba(pipe[:-1].transform([IIR_TEST]))[0])))  # scikit-learn
    assert reference["c"] == pytest.approx(0.0003, abs=0.00005) and reference["not-c"] == pytest.approx(0.0001, abs=0.00005)
    # Exact form of the book's products: 3/4 (3/7)^3 (1/14)^2 and 1/4 (2/9)^3 (2/9)^2.
    assert joint["c"] == pytest.approx(3 / 4 * (3 / 7) ** 3 * (1 / 14) ** 2, rel=1e-12)
    assert joint["not-c"] == pytest.approx(1 / 4 * (2 / 9) ** 5, rel=1e-12)
    assert e.predicted == "c"
    # "Chinese" x3 is the evidence for c; "Tokyo" and "Japan" are evidence against it.
    by_token = {t.token: t for t in e.tokens}
    assert by_token["chinese"].evidence == pytest.approx(3 * math.log((3 / 7) / (2 / 9)), rel=1e-12)
    assert by_token["tokyo"].evidence < 0 and by_token["japan"].evidence < 0


def test_iir_bernoulli_worked_example():
    pipe = make_pipeline("binary", "bernoulli").fit(IIR_TRAIN, IIR_LABELS)
    e = explain_message(loaded(pipe), IIR_TEST)
    joint = dict(zip(e.classes, np.exp(e.jll)))
    assert joint["c"] == pytest.approx(0.005, abs=0.0005)
    assert joint["not-c"] == pytest.approx(0.022, abs=0.002)
    reference = dict(zip(pipe.classes_, np.exp(pipe[-1].predict_joint_log_proba(pipe[:-1].transform([IIR_TEST]))[0])))  # scikit-learn
    assert reference["c"] == pytest.approx(0.005, abs=0.0005) and reference["not-c"] == pytest.approx(0.022, abs=0.002)
    assert e.predicted == "not-c"


def test_empty_message_is_refused():
    pipe = make_pipeline("counts", "multinomial").fit(IIR_TRAIN, IIR_LABELS)
    with pytest.raises(NbledgerError, match="empty"):
        explain_message(loaded(pipe), "   \n")


def test_unknown_tokens_are_listed_with_counts_and_have_no_effect():
    pipe = make_pipeline("counts", "multinomial").fit(IIR_TRAIN, IIR_LABELS)
    e = explain_message(loaded(pipe), "Chinese lighthouse lighthouse ferry")
    assert dict(e.unknown_tokens) == {"lighthouse": 2, "ferry": 1}
    assert {t.token for t in e.tokens} == {"chinese"}
