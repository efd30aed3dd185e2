"""Evasion costs and term swaps, checked against brute force and scikit-learn itself.

The references: every multiset (or set) of added tokens up to a small size,
scored by the fitted scikit-learn pipeline on the actual padded texts; the
pipeline's own ``predict``/``predict_joint_log_proba``/``predict_proba`` on the
substituted texts; the counterfactual token fairness gap as defined in
Garg et al. 2019, AIES, section 3 (mean over a message's counterfactuals of
the absolute change in the model's probability; from memory of the paper).
"""

from __future__ import annotations

import itertools
import re

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy.special import logit

from explain.analysis.evasion import evasion_costs
from explain.analysis.probe import probe
from explain.analysis.term_swap import parse_swap_terms, term_swaps
from explain.errors import NbledgerError
from explain.model.decision import DecisionRule
from tests.corpora import WORDS, cases, loaded, make_pipeline

BRUTE = 3  # brute force covers every addition of up to this many tokens
phrases = st.lists(st.sampled_from([w for w in WORDS if len(w) > 1]), min_size=1, max_size=8).map(" ".join)
settings_ = settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])


def _passes(case, texts, threshold, normal=0):
    """scikit-learn's own verdict: is each text let through (decided as the normal class)?"""
    if threshold is None:
        return case.pipeline.predict(texts) == case.pipeline.classes_[normal]
    jll = _jll(case, texts)
    return jll[:, 1 - normal] - jll[:, normal] < logit(threshold)


def _jll(case, texts):
    return case.pipeline[-1].predict_joint_log_proba(case.pipeline[:-1].transform(texts))


def _brute(case, text, present, budget, presence, threshold, normal):
    """Fewest added tokens (at most BRUTE) that let ``text`` through, by scoring every padded text."""
    vocab = [str(t) for t in case.model.view.tokens]
    for size in range(1, BRUTE + 1):
        if budget == "repeats" and not presence:
            picks = itertools.combinations_with_replacement(vocab, size)
        else:
            picks = itertools.combinations([t for t in vocab if t not in present], size)
        padded = [text + " " + " ".join(p) for p in picks]
        if padded and _passes(case, padded, threshold, normal).any():
            return size
    return None


@settings_
@given(
    case=st.sampled_from(["counts", "binary"]).flatmap(lambda k: cases(n_classes=2, kind=k, ngrams=(1, 1))),
    extra=st.lists(phrases, min_size=1, max_size=3),
    threshold=st.sampled_from([None, 0.5, 0.9, 0.2]),
    normal=st.sampled_from([0, 1]),
)
def test_exact_evasion_is_the_brute_force_minimum(case, extra, threshold, normal):
    model = loaded(case.pipeline, f"class{normal}")
    texts = case.texts + extra
    rule = DecisionRule.for_view(model.view, threshold)
    try:
        found = evasion_costs(model, texts, rule, max_added=10)
    except NbledgerError as exc:
        assert "no message" in str(exc)
        assert _passes(case, texts, threshold, normal).all()
        return
    assert found.repeats.exact and found.distinct.exact
    assert not _passes(case, [texts[i] for i in found.rows], threshold, normal).any()
    analyze = model.featurizer._analyzer
    for budget in ("repeats", "distinct"):
        result = found.budget(budget)
        for i, row in enumerate(found.rows[:4]):
            text = texts[row]
            cost = int(result.costs[i])
            if cost > 0:
                words = [t for t, n in result.additions[i] for _ in range(n)]
                assert len(words) == cost
                # scikit-learn lets the padded text through
                assert _passes(case, [text + " " + " ".join(words)], threshold, normal)[0]
            best = _brute(case, text, set(analyze(text)), budget, found.presence, threshold, normal)
            if best is not None:
                assert cost == best
            else:
                assert cost == -1 or cost > BRUTE


@settings_
@given(case=cases(ngrams=(1, 1)), extra=st.lists(phrases, min_size=1, max_size=3), threshold=st.sampled_from([None, 0.5, 0.9]))
def test_every_attack_lets_the_padded_text_through(case, extra, threshold):
    """Every variant, exact or greedy: the reported additions work on the real pipeline.

    Single words only: with word n-grams added words also form n-grams with
    their neighbours, which the costs (counted in features) say they leave out.
    """
    model = loaded(case.pipeline, "class0")
    texts = case.texts + extra
    rule = DecisionRule.for_view(model.view, threshold)
    try:
        found = evasion_costs(model, texts, rule, max_added=8)
    except NbledgerError:
        return
    exact = model.featurizer.feature_kind != "tfidf" or model.view.variant == "bernoulli"
    assert found.repeats.exact == (exact and model.view.n_classes == 2)
    for budget in ("repeats", "distinct"):
        result = found.budget(budget)
        for i, row in enumerate(found.rows):
            if result.costs[i] < 0:
                continue
            padded = texts[row] + " " + " ".join(t for t, n in result.additions[i] for _ in range(n))
            if threshold is None:
                assert case.pipeline.predict([padded])[0] == "class0"
            else:
                jll = _jll(case, [padded])[0]
                assert rule.decide(jll[None, :])[0] == 0


def _reference_swap(text, source, target):
    # The default token pattern: runs of 2+ word characters (scikit-learn's CountVectorizer docs).
    return re.sub(rf"(?<!\w){re.escape(source)}(?!\w)", target, text)


@settings_
@given(
    case=st.sampled_from(["counts", "tfidf", "binary"]).flatmap(lambda k: cases(kind=k)),
    extra=st.lists(phrases, min_size=1, max_size=4),
    groups=st.sampled_from(
        ["people: tea, kids, harbour\nthings: sofa, drill", "a: fee, prize, unknownterm, club", "x: levy, solar"]
    ),
)
def test_term_swaps_equal_scikit_learn_on_the_substituted_texts(case, extra, groups):
    model = loaded(case.pipeline, "class0")
    texts = case.texts + extra
    rule = DecisionRule.for_view(model.view)
    swaps = term_swaps(model, texts, rule, parse_swap_terms(groups, model.featurizer))
    classes = case.pipeline.classes_
    expected_rows = 0
    for i, text in enumerate(texts):
        for group in swaps.terms.groups:
            for s in group.terms:
                if re.search(rf"(?<!\w){s}(?!\w)", text):
                    expected_rows += len(group.terms) - 1
    assert len(swaps.message) == expected_rows
    # untested is not fair: a group or pair no message holds has no gap (None), never 0
    for g in swaps.groups:
        held = any(re.search(rf"(?<!\w){s}(?!\w)", text) for text in texts for s in
                   next(x for x in swaps.terms.groups if x.name == g.group).terms)
        assert g.tested == held and (g.gap is None) == (not held) and (g.messages == 0) == (not held)
    for pair in swaps.pairs:
        held = sum(bool(re.search(rf"(?<!\w){pair.source}(?!\w)", text)) for text in texts)
        assert pair.messages == held and (pair.gap is None) == (held == 0) and pair.tested == (held > 0)
    assert len(swaps.pairs) == sum(len(g.terms) * (len(g.terms) - 1) for g in swaps.terms.groups)
    if not expected_rows:
        return
    new = [_reference_swap(texts[m], s, t) for m, s, t in zip(swaps.message, swaps.source, swaps.target)]
    old = [texts[m] for m in swaps.message]
    assert list(swaps.decision_after) == list(case.pipeline.predict(new))
    assert list(swaps.decision_before) == list(case.pipeline.predict(old))
    jll = _jll(case, new)
    flag = np.logaddexp.reduce(jll[:, 1:], axis=1) - jll[:, 0]
    np.testing.assert_allclose(swaps.log_odds_after, flag, rtol=1e-9, atol=1e-9)
    # Garg et al. 2019: per message, the mean over its counterfactuals of |f(x) - f(x')|; then the mean over messages.
    p_new = 1 - case.pipeline.predict_proba(new)[:, list(classes).index("class0")]
    p_old = 1 - case.pipeline.predict_proba(old)[:, list(classes).index("class0")]
    for g in swaps.groups:
        per_message = {}
        for k in np.flatnonzero(swaps.group == g.group):
            per_message.setdefault(int(swaps.message[k]), []).append(abs(p_new[k] - p_old[k]))
        if per_message:
            assert g.tested
            assert g.gap == pytest.approx(np.mean([np.mean(v) for v in per_message.values()]), abs=1e-9)
            assert g.decisions_changed == int(sum((swaps.group == g.group) & (swaps.decision_after != swaps.decision_before)))


def test_swap_file_problems_are_named():
    pipe = make_pipeline("counts", "multinomial").fit(["tea fee club", "prize link fee"], ["ok", "scam"])
    model = loaded(pipe, "ok")
    text = "# a comment\nlonely: tea\npair: tea, club, fee link\nagain: Club, fee # Club reads as club\n"
    terms = parse_swap_terms(text, model.featurizer)
    notes = " | ".join(terms.notes)
    assert "lonely: fewer than two usable terms" in notes
    assert "tea" in [t for g in terms.groups for t in g.tokens]
    assert "'fee link' is 2 tokens (fee, link)" in notes
    assert "'Club' reads as 'club', already in pair" in notes
    assert [g.name for g in terms.groups] == ["pair"]
    with pytest.raises(NbledgerError, match="no group of two or more usable terms"):
        parse_swap_terms("solo\n", model.featurizer)


def test_unknown_terms_have_no_effect_and_known_ones_their_weights():
    pipe = make_pipeline("counts", "multinomial").fit(["tea fee club", "prize link fee"], ["ok", "scam"])
    model = loaded(pipe, "ok")
    result = probe(model, None, evasion=False, swap_terms=parse_swap_terms("g: tea, zebra", model.featurizer))
    tea, zebra = result.term_evidence
    assert not zebra.known and zebra.evidence == (0.0, 0.0)
    flp = pipe.named_steps["nb"].feature_log_prob_
    j = pipe.named_steps["v"].vocabulary_["tea"]
    assert tea.evidence[1] == pytest.approx(flp[1, j] - flp[0, j])


def test_bad_probe_requests():
    pipe = make_pipeline("counts", "multinomial").fit(["tea fee club", "prize link fee"], ["ok", "scam"])
    model = loaded(pipe, "ok")
    with pytest.raises(NbledgerError, match="at least 1"):
        probe(model, ["prize link"], max_added=0)
    with pytest.raises(NbledgerError, match="no message in the data is flagged"):
        probe(model, ["tea club", "tea"])


def test_property_tests_reach_flagged_messages():
    """Guard against the property tests passing vacuously: a plain case has flagged messages and costs."""
    pipe = make_pipeline("counts", "multinomial").fit(["tea club kids", "prize link fee", "fee prize"], ["ok", "scam", "scam"])
    model = loaded(pipe, "ok")
    found = evasion_costs(model, ["prize link fee", "fee prize prize"], DecisionRule.for_view(model.view), 10)
    assert len(found.rows) == 2 and (found.repeats.costs > 0).all()
    assert found.repeats.additions[0][0][0] in {"tea", "club", "kids"}
