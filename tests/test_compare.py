"""``compare``: two filters side by side (issue 9, item 1)."""

from __future__ import annotations

from collections import Counter
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.stats import binomtest, chi2

from explain.analysis.compare import compare_models
from explain.analysis.stats import mcnemar
from explain.model.data_io import Messages
from tests.corpora import cases

PROPERTY = settings(max_examples=40, deadline=None)


@settings(max_examples=200, deadline=None)
@given(b=st.integers(0, 80), c=st.integers(0, 80))
def test_mcnemar_against_scipy_and_the_closed_formula(b, c):
    # McNemar 1947: the exact form is a binomial test of b in b + c trials at 1/2
    # (checked against scipy.stats.binomtest); the chi-square form is (b - c)^2 / (b + c).
    test = mcnemar(b, c)
    assert (test.b, test.c) == (b, c)
    if b + c == 0:
        assert test.exact_p == 1.0 and test.chi2 == 0.0 and test.chi2_p == 1.0
        return
    assert test.exact_p == pytest.approx(binomtest(b, b + c, 0.5).pvalue, rel=1e-12, abs=1e-300)
    assert test.chi2 == pytest.approx((b - c) ** 2 / (b + c), rel=1e-15)
    assert test.chi2_p == pytest.approx(chi2.sf((b - c) ** 2 / (b + c), 1), rel=1e-12)


def test_mcnemar_worked_values():
    # b = 7, c = 1: exact two-sided p = 2 * (1 + 8) / 2^8 = 18/256 (hand computation);
    # chi-square (7 - 1)^2 / 8 = 4.5.
    test = mcnemar(7, 1)
    assert test.exact_p == pytest.approx(18 / 256) and test.chi2 == 4.5


def _messages(texts, labels) -> Messages:
    return Messages(
        texts=list(texts), labels=np.asarray(labels, dtype=object), ids=np.asarray([str(i + 1) for i in range(len(texts))]),
        replaced_chars=0, source=Path("memory.csv"), sha256="",
    )


@PROPERTY
@given(old=cases(), new=cases(), data=st.data())
def test_decisions_changes_and_counts_match_scikit_learn(old, new, data):
    texts = old.texts + new.texts
    labels = old.labels + new.labels
    result = compare_models(old.model, replace(new.model, sha256="other"), _messages(texts, labels), show=3)
    before, after = old.pipeline.predict(texts).astype(str), new.pipeline.predict(texts).astype(str)
    d = result.decisions
    assert d.old_decisions.tolist() == before.tolist() and d.new_decisions.tolist() == after.tolist()
    expected = Counter((a, b) for a, b in zip(before, after) if a != b)
    assert {(a, b): n for a, b, n in d.changes} == dict(expected)
    assert d.changed == sum(expected.values())
    assert len(d.shown) == min(3, d.changed)
    for m in d.shown:
        assert (m.old.decision, m.new.decision) == (before[m.row], after[m.row])
    truth = np.asarray(labels)
    b = int(np.sum((before == truth) & (after != truth)))
    c = int(np.sum((before != truth) & (after == truth)))
    assert (d.mcnemar.b, d.mcnemar.c) == (b, c)
    assert d.old_score.accuracy.numerator == int(np.sum(before == truth))
    if set(old.model.classes) != set(new.model.classes):
        assert any("different classes" in n for n in result.notes)


def _per_unit(pipeline, token: str) -> float:
    """W[class1, j] - W[class0, j] from scikit-learn's own arrays.

    MultinomialNB and ComplementNB score ``X @ feature_log_prob_.T`` (plus priors);
    BernoulliNB adds ``log p - log(1 - p)`` for each present feature (scikit-learn's
    ``BernoulliNB._joint_log_likelihood``).
    """
    nb, j = pipeline[-1], pipeline[0].vocabulary_[token]
    flp = nb.feature_log_prob_[:, j]
    if type(nb).__name__ == "BernoulliNB":
        flp = flp - np.log1p(-np.exp(flp))
    return float(flp[1] - flp[0])


def _same_weights(old, new) -> bool:
    shared = set(old.pipeline[0].vocabulary_) & set(new.pipeline[0].vocabulary_)
    return all(_per_unit(old.pipeline, t) == pytest.approx(_per_unit(new.pipeline, t), abs=0) for t in shared)


@PROPERTY
@given(old=cases(n_classes=2), new=cases(n_classes=2))
def test_evidence_shifts_are_the_models_own_log_probabilities(old, new):
    # Outside reference: scikit-learn's feature_log_prob_ (see _per_unit).
    result = compare_models(old.model, replace(new.model, sha256="other"), normal_class="class0", top=1000)
    old_vocab = old.pipeline[0].vocabulary_
    new_vocab = new.pipeline[0].vocabulary_
    assert result.vocabulary.shared == len(set(old_vocab) & set(new_vocab))
    assert set(result.vocabulary.added) == set(new_vocab) - set(old_vocab)
    assert set(result.vocabulary.removed) == set(old_vocab) - set(new_vocab)
    (comparison,) = result.vocabulary.comparisons
    assert comparison.shifts_up or comparison.shifts_down or result.vocabulary.shared == 0 or _same_weights(old, new)
    for shift in comparison.shifts_up + comparison.shifts_down:
        for pipeline, value in ((old.pipeline, shift.old), (new.pipeline, shift.new)):
            assert value == pytest.approx(_per_unit(pipeline, shift.token), abs=1e-9)
    ups = [s.change for s in comparison.shifts_up]
    assert all(x > 0 for x in ups) and ups == sorted(ups, reverse=True)


@settings(max_examples=10, deadline=None)
@given(case=cases(n_classes=3))
def test_same_file_twice_changes_nothing(case):
    result = compare_models(case.model, case.model, _messages(case.texts, case.labels), normal_class="class0")
    assert result.same_file and any("the same" in n for n in result.notes)
    assert result.decisions.changed == 0 and result.decisions.mcnemar.b == result.decisions.mcnemar.c == 0
    for comparison in result.vocabulary.comparisons:
        assert comparison.shifts_up == () == comparison.shifts_down
        assert all(r.old_rank == r.new_rank for r in comparison.ranks)


# --- what changed: the settings table (issue 21, item 6) ---------------------------------------------

SETTING_TEXTS = ["pay the parcel fee now pay now fee", "parcel at the depot pay fee", "tea at the harbour club",
                 "club tea tea on sunday club", "free prize claim now", "lend me the drill on sunday",
                 "sofa for sale now", "sale of garden tools at the club", "fresh eggs for sale"]
SETTING_LABELS = ["scam", "scam", "ok", "ok", "scam", "ok", "advert", "advert", "advert"]


def _fitted(kind, variant, alpha, sha):
    from explain.model.plain_form import classifier_settings
    from tests.corpora import loaded, make_pipeline

    pipe = make_pipeline(kind, variant, alpha=alpha).fit(SETTING_TEXTS, SETTING_LABELS)
    model = replace(loaded(pipe, "ok"), sha256=sha, classifier_settings=classifier_settings(pipe.named_steps["nb"]))
    return pipe, model


@pytest.mark.parametrize("old, new, differing, weights", [
    (("counts", "multinomial", 1.0), ("counts", "complement", 1.0), {"variant"}, "per occurrence"),
    (("counts", "multinomial", 1.0), ("binary", "multinomial", 1.0), {"feature_kind"}, "per occurrence"),
    (("counts", "multinomial", 1.0), ("counts", "multinomial", 0.1), {"alpha"}, "per unit"),
    (("tfidf", "multinomial", 1.0), ("binary", "bernoulli", 0.5), {"variant", "feature_kind", "alpha"},
     "per occurrence"),
])
def test_compare_names_the_settings_that_differ(old, new, differing, weights):
    from explain.present.compare import text_lines, to_json

    old_pipe, old_model = _fitted(*old, sha="a" * 64)
    new_pipe, new_model = _fitted(*new, sha="b" * 64)
    result = compare_models(old_model, new_model, normal_class="ok")
    by_name = {s.name: s for s in result.settings}
    assert {s.name for s in result.settings if s.differs} == differing | {"fingerprint"}
    # the model fingerprint (SHA-256 of what decides) is the model's own, so a new alpha changes it too
    assert by_name["fingerprint"].old == old_model.fingerprint != by_name["fingerprint"].new
    # the values are scikit-learn's own parameters of each pipeline
    for pipe, side in ((old_pipe, "old"), (new_pipe, "new")):
        nb, vec = pipe.named_steps["nb"], pipe.named_steps["v"]
        assert getattr(by_name["alpha"], side) == nb.get_params()["alpha"]
        assert getattr(by_name["ngrams"], side) == list(vec.get_params()["ngram_range"])
        assert getattr(by_name["vocabulary_size"], side) == len(vec.vocabulary_)
        assert getattr(by_name["variant"], side) == type(nb).__name__.removesuffix("NB").lower()
    assert result.weights_compared == weights
    lines = "\n".join(text_lines(result, width=200))
    named = {"variant": "variant", "feature_kind": "features", "alpha": "alpha"}
    differing_line = next(line for line in lines.splitlines() if line.startswith("  differing: "))
    assert all(named[d] in differing_line for d in differing) and "model fingerprint" in differing_line
    assert to_json(result)["weights_compared"] == weights
    # the page: the settings table marks each differing row, and says how tokens are compared
    from html.parser import HTMLParser

    from explain.present.compare import render_html

    class Rows(HTMLParser):
        def __init__(self):
            super().__init__()
            self.rows, self.text = [], []

        def handle_starttag(self, tag, attrs):
            if tag == "tr":
                self.rows.append([dict(attrs).get("class")])
            elif tag in ("th", "td") and self.rows:
                self.rows[-1].append("")

        def handle_data(self, data):
            self.text.append(data)
            if self.rows and len(self.rows[-1]) > 1:
                self.rows[-1][-1] += data

    page = Rows()
    page.feed(render_html(result, to_json(result), "none"))
    marked = {row[1] for row in page.rows if row[0] == "differs"}  # [class, first cell, ...]
    assert marked == {named[d] for d in differing} | {"model fingerprint"}
    text = " ".join(" ".join(page.text).split())
    assert ("weigh tokens on different scales" in text) == (weights == "per occurrence")
    assert f"evidence {weights} (log-odds against ok)" in text
    if weights == "per occurrence":
        assert "weight scales differ" in lines
        # per occurrence: what one occurrence adds in a message of that token alone, from scikit-learn's own
        # joint log-likelihoods (the one-token message against the empty one)
        shifts = [*result.vocabulary.comparisons[0].shifts_up, *result.vocabulary.comparisons[0].shifts_down]
        assert len(shifts) >= 3
        for pipe, side in ((old_pipe, "old"), (new_pipe, "new")):
            for shift in shifts:
                jll = pipe[-1].predict_joint_log_proba(pipe[:-1].transform([shift.token, ""]))
                target = result.vocabulary.comparisons[0].target
                scam, ok = list(pipe.classes_).index(target), list(pipe.classes_).index("ok")
                expected = (jll[0, scam] - jll[0, ok]) - (jll[1, scam] - jll[1, ok])
                assert getattr(shift, side) == pytest.approx(expected, abs=1e-9), (side, shift.token)
