"""The vocabulary review: lenses, comparisons, tables, rankings (explain.analysis.vocab)."""

import math

import numpy as np
import pytest
import scipy.sparse as sp
from hypothesis import assume, given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays
from scipy.stats import chi2_contingency
from sklearn.naive_bayes import BernoulliNB, ComplementNB, MultinomialNB

from explain.errors import NbledgerError
from explain.model.model_view import view_of
from explain.analysis.risk import FLAGS, Watchlist
from explain.analysis.vocab import (
    LENSES,
    REST,
    document_counts,
    monroe_zscore,
    plan_comparisons,
    review_vocabulary,
)


def direct_monroe(y_t, y_o, a0=None):
    """Monroe, Colaresi & Quinn (2008), Political Analysis 16(4), section 3.5 (from memory):
    informative Dirichlet prior alpha_w = a0 * pi_w with pi from the pooled counts,
    delta_w = log-odds(t) - log-odds(o), var = 1/(y_t + alpha) + 1/(y_o + alpha).
    Written word by word with math.log, independently of explain.analysis.vocab."""
    n_t, n_o = sum(y_t), sum(y_o)
    total = n_t + n_o
    a0 = total if a0 is None else a0
    out = []
    for yt, yo in zip(y_t, y_o):
        alpha = a0 * (yt + yo) / total
        odds_t = (yt + alpha) / (n_t + a0 - yt - alpha)
        odds_o = (yo + alpha) / (n_o + a0 - yo - alpha)
        delta = math.log(odds_t) - math.log(odds_o)
        out.append(delta / math.sqrt(1 / (yt + alpha) + 1 / (yo + alpha)))
    return out


counts = st.lists(st.tuples(st.integers(1, 500), st.integers(1, 500)), min_size=2, max_size=40)


@settings(max_examples=300, deadline=None)
@given(counts, st.one_of(st.none(), st.floats(0.5, 1e5)))
def test_zscore_matches_direct_implementation_of_monroe_et_al(pairs, a0):
    y_t = [a for a, _ in pairs]
    y_o = [b for _, b in pairs]
    _, z = monroe_zscore(y_t, y_o, a0)
    np.testing.assert_allclose(z, direct_monroe(y_t, y_o, a0), rtol=1e-9, atol=1e-9)


@settings(max_examples=300, deadline=None)
@given(counts)
def test_swapping_the_classes_flips_the_sign(pairs):
    # Property of Monroe et al. (2008): delta is a difference of log-odds.
    y_t = [a for a, _ in pairs]
    y_o = [b for _, b in pairs]
    np.testing.assert_allclose(monroe_zscore(y_t, y_o)[1], -monroe_zscore(y_o, y_t)[1], atol=1e-12)


@settings(max_examples=300, deadline=None)
@given(st.lists(st.integers(1, 500), min_size=2, max_size=40), st.integers(1, 20), st.integers(1, 20))
def test_equal_rates_give_zero(y, k_t, k_o):
    # Both classes use every token at the same rate; only the class sizes differ.
    _, z = monroe_zscore(np.array(y) * k_t, np.array(y) * k_o)
    np.testing.assert_allclose(z, 0.0, atol=1e-9)


@settings(max_examples=300, deadline=None)
@given(counts, st.integers(2, 50))
def test_more_support_at_the_same_rates_gives_larger_abs_z(pairs, k):
    y_t = np.array([a for a, _ in pairs], dtype=float)
    y_o = np.array([b for _, b in pairs], dtype=float)
    _, z = monroe_zscore(y_t, y_o)
    _, z_more = monroe_zscore(k * y_t, k * y_o)
    moved = np.abs(z) > 1e-9
    assert np.all(np.abs(z_more[moved]) > np.abs(z[moved]))
    # With the pooled prior the growth is exactly sqrt(k) (delta is unchanged, variance / k).
    np.testing.assert_allclose(z_more, z * math.sqrt(k), rtol=1e-9, atol=1e-9)


def test_zscore_of_a_token_never_seen_is_zero():
    delta, z = monroe_zscore([0, 5, 3], [0, 2, 7])
    assert delta[0] == 0.0 and z[0] == 0.0


# ------------------------------------------------------------------ models made by scikit-learn

CLASSES3 = ["advert", "ok", "scam"]


@st.composite
def trained(draw, variant=MultinomialNB, n_classes=3):
    n_features = draw(st.integers(3, 25))
    per_class = draw(st.integers(2, 6))
    n = n_classes * per_class
    X = draw(arrays(np.int64, (n, n_features), elements=st.integers(0, 6)))
    assume(X.sum() > 0)
    y = np.repeat(CLASSES3[:n_classes] if n_classes == 3 else ["ok", "scam"], per_class)
    alpha = draw(st.sampled_from([0.01, 0.5, 1.0]))
    clf = variant(alpha=alpha).fit(X, y)
    tokens = [f"t{j}" for j in range(n_features)]
    return clf, X, y, view_of(clf, tokens, "counts")


@settings(max_examples=100, deadline=None)
@given(trained(n_classes=2))
def test_two_class_ratio_is_the_difference_of_feature_log_probs(model):
    clf, X, y, view = model
    review = review_vocabulary(view)
    (c,) = review.comparisons
    assert (c.target, c.other) == ("scam", "ok")
    np.testing.assert_array_equal(c.ratio, clf.feature_log_prob_[1] - clf.feature_log_prob_[0])
    rest = review_vocabulary(view, target="scam", against=REST).comparisons[0]
    np.testing.assert_allclose(rest.ratio, c.ratio, rtol=0, atol=1e-12)


@settings(max_examples=100, deadline=None)
@given(trained(), st.sampled_from(CLASSES3))
def test_ratio_against_rest_is_the_log_odds_change_of_one_occurrence(model, target):
    # Reproduced with scikit-learn itself: predict_joint_log_proba of a message holding
    # one occurrence of token j, minus that of an empty message.
    clf, X, y, view = model
    c = review_vocabulary(view, target=target, against=REST).comparisons[0]
    F = X.shape[1]
    t = CLASSES3.index(target)
    others = [k for k in range(3) if k != t]

    def log_odds(jll):
        return jll[:, t] - np.logaddexp.reduce(jll[:, others], axis=1)

    one = log_odds(clf.predict_joint_log_proba(np.eye(F)))
    empty = log_odds(clf.predict_joint_log_proba(np.zeros((1, F))))
    np.testing.assert_allclose(c.ratio, one - empty, rtol=1e-10, atol=1e-10)


@settings(max_examples=100, deadline=None)
@given(trained(), st.sampled_from(CLASSES3), st.sampled_from(CLASSES3))
def test_class_against_class_uses_both_rows_and_counts(model, target, other):
    assume(target != other)
    clf, X, y, view = model
    c = review_vocabulary(view, target=target, against=other).comparisons[0]
    t, o = CLASSES3.index(target), CLASSES3.index(other)
    np.testing.assert_array_equal(c.ratio, clf.feature_log_prob_[t] - clf.feature_log_prob_[o])
    np.testing.assert_array_equal(c.support_target, clf.feature_count_[t])
    np.testing.assert_array_equal(c.support_other, clf.feature_count_[o])
    _, z = monroe_zscore(clf.feature_count_[t], clf.feature_count_[o])
    np.testing.assert_array_equal(c.zscore, z)
    # mass: ratio times the mean count per message of the side the ratio points to
    per_message = np.where(
        c.ratio > 0, clf.feature_count_[t] / clf.class_count_[t], clf.feature_count_[o] / clf.class_count_[o]
    )
    np.testing.assert_allclose(c.mass, c.ratio * per_message, rtol=1e-12)


@settings(max_examples=100, deadline=None)
@given(trained(), st.sampled_from(CLASSES3))
def test_rest_pools_the_counts_of_the_other_classes(model, target):
    clf, X, y, view = model
    c = review_vocabulary(view, target=target, against=REST).comparisons[0]
    others = [k for k in range(3) if CLASSES3[k] != target]
    np.testing.assert_array_equal(c.support_other, clf.feature_count_[others].sum(axis=0))
    assert c.messages_other == clf.class_count_[others].sum()
    assert c.other == REST and set(c.other_classes) == {CLASSES3[k] for k in others}


@settings(max_examples=60, deadline=None)
@given(trained())
def test_occurrence_tables_without_data_match_scipy(model):
    # scipy.stats.chi2_contingency(correction=False) on each token's occurrence table
    clf, X, y, view = model
    review = review_vocabulary(view, target="scam", against="ok")
    assert review.counts.kind == "occurrences"
    c = review.comparisons[0]
    y_t, y_o = clf.feature_count_[2], clf.feature_count_[1]
    for j in range(X.shape[1]):
        table = np.array([[y_t[j], y_o[j]], [y_t.sum() - y_t[j], y_o.sum() - y_o[j]]])
        if (table.sum(axis=0) == 0).any() or (table.sum(axis=1) == 0).any():
            assert c.chi2[j] == 0
            continue
        assert c.chi2[j] == pytest.approx(chi2_contingency(table, correction=False).statistic, rel=1e-9)
        g2 = chi2_contingency(table, correction=False, lambda_="log-likelihood").statistic
        assert c.g2[j] == pytest.approx(g2, rel=1e-9, abs=1e-12)
        assert c.direction[j] == np.sign(table[0, 0] * table[1, 1] - table[0, 1] * table[1, 0])


@settings(max_examples=60, deadline=None)
@given(trained(BernoulliNB))
def test_bernoulli_counts_are_documents(model):
    clf, X, y, view = model
    review = review_vocabulary(view, target="scam", against="ok")
    assert review.counts.kind == "documents"
    c = review.comparisons[0]
    present = X > 0
    np.testing.assert_array_equal(c.documents_target, present[y == "scam"].sum(axis=0))
    np.testing.assert_array_equal(c.table[2], (y == "scam").sum() - present[y == "scam"].sum(axis=0))


@settings(max_examples=60, deadline=None)
@given(trained(ComplementNB))
def test_labelled_data_gives_document_tables(model):
    clf, X, y, view = model
    docs = document_counts(view, sp.csr_matrix(X), y, "labelled.csv")
    review = review_vocabulary(view, target="advert", against=REST, documents=docs)
    assert review.counts.kind == "documents" and "labelled.csv" in review.counts.reason
    c = review.comparisons[0]
    present = X > 0
    mine, theirs = y == "advert", y != "advert"
    np.testing.assert_array_equal(c.table[0], present[mine].sum(axis=0))
    np.testing.assert_array_equal(c.table[1], present[theirs].sum(axis=0))
    np.testing.assert_array_equal(c.table[2], mine.sum() - present[mine].sum(axis=0))
    np.testing.assert_array_equal(c.table[3], theirs.sum() - present[theirs].sum(axis=0))


def _small_view(normal_class=None, classes=("advert", "ok", "scam")):
    X = np.array([[3, 0, 1, 0], [0, 2, 0, 1], [1, 0, 4, 2], [0, 1, 0, 3], [2, 2, 2, 2], [0, 0, 5, 1]])
    y = np.array(classes * 2)
    clf = MultinomialNB().fit(X, y)
    return view_of(clf, ["offer", "berth", "prize", "rota"], "counts", normal_class)


def test_labels_the_model_lacks_are_named():
    view = _small_view()
    X = sp.csr_matrix(np.ones((3, 4)))
    with pytest.raises(NbledgerError, match="labels the model does not have: spam") as err:
        document_counts(view, X, ["ok", "spam", "scam"], "messages.csv")
    assert "advert, ok, scam" in str(err.value)
    with pytest.raises(NbledgerError, match="no messages labelled advert"):
        document_counts(view, X, ["ok", "scam", "scam"], "messages.csv")


def test_plan_with_a_normal_class_compares_every_flagged_class_with_it():
    view = _small_view(normal_class="ok")
    names = [(view.classes[t], [view.classes[o] for o in others]) for t, others in plan_comparisons(view)]
    assert names == [("advert", ["ok"]), ("scam", ["ok"])]
    assert plan_comparisons(view, target="scam") == [(2, (1,))]
    assert plan_comparisons(view, target="ok") == [(1, (0, 2))]


def test_plan_without_a_normal_class():
    view = _small_view()
    assert plan_comparisons(view) == [(0, (1, 2)), (1, (0, 2)), (2, (0, 1))]
    assert plan_comparisons(view, against="ok") == [(0, (1,)), (2, (1,))]
    assert plan_comparisons(view, target="advert", against="scam") == [(0, (2,))]


def test_unknown_or_repeated_class_is_one_line_error():
    view = _small_view()
    with pytest.raises(NbledgerError, match="no class 'spam'.*advert, ok, scam"):
        review_vocabulary(view, target="spam")
    with pytest.raises(NbledgerError, match="both name"):
        review_vocabulary(view, target="ok", against="ok")
    with pytest.raises(NbledgerError, match="unknown ranking"):
        review_vocabulary(view, lens="frequency")


@settings(max_examples=100, deadline=None)
@given(trained(), st.sampled_from(LENSES))
def test_rankings_sort_each_lens_and_top_lists_respect_the_sign(model, lens):
    clf, X, y, view = model
    c = review_vocabulary(view, target="scam", against=REST).comparisons[0]
    l = LENSES.index(lens)
    values = c.values(lens)
    assert np.all(np.diff(values[c.order[l]]) <= 0)
    np.testing.assert_array_equal(c.rank[l][c.order[l]], np.arange(1, len(values) + 1))
    n = max(1, X.shape[1] // 2)
    for side, sign in (("for", 1), ("against", -1)):
        picked = c.top(lens, n, side)
        assert len(picked) <= n and np.all(sign * values[picked] > 0)
        strongest = np.sort(sign * values[sign * values > 0])[::-1][: len(picked)]
        np.testing.assert_array_equal(np.sort(sign * values[picked])[::-1], strongest)


def test_flags_counts_and_watchlist_in_the_review():
    X = np.array([[3, 0, 1, 0, 1], [0, 2, 0, 1, 0], [1, 0, 4, 2, 0], [0, 1, 0, 3, 0]])
    y = np.array(["ok", "scam", "ok", "scam"])
    clf = MultinomialNB(alpha=0.01).fit(X, y)
    tokens = ["the", "prize", "berth", "warden@example.org", "555-0142"]
    view = view_of(clf, tokens, "counts", "ok")
    watch = Watchlist(("Prize", "asylum", "warden@example.org"), "watch.txt")
    review = review_vocabulary(view, watchlist=watch)
    c = review.comparisons[0]
    assert c.flag_counts == {name: int(c.flag(name).sum()) for name in FLAGS}
    assert c.flag("personal").tolist() == [False, False, False, True, True]
    assert c.flag("watchlist").tolist() == [False, True, False, True, False]
    assert [(w.term, w.column) for w in review.watchlist] == [
        ("Prize", 1),
        ("asylum", -1),
        ("warden@example.org", 3),
    ]

    hidden = review_vocabulary(view, watchlist=watch, redact_personal=True)
    assert hidden.redacted and hidden.redacted_count == 2
    shown = list(hidden.tokens) + [w.term for w in hidden.watchlist]
    assert not any("example.org" in s or "555-0142" in s for s in shown)
    np.testing.assert_array_equal(hidden.comparisons[0].zscore, c.zscore)


def test_many_comparisons_are_computed_on_demand_with_the_same_numbers(monkeypatch):
    """A review keeps only some comparisons computed; one asked for again is recomputed, to the bit.

    Common practice, no source: the numbers must not depend on what was kept.
    """
    import explain.analysis.vocab as vocab

    rng = np.random.default_rng(7)
    classes = [f"class{i}" for i in range(9)]
    X = rng.poisson(1.0, (45, 6))
    clf = MultinomialNB().fit(X, classes * 5)
    view = view_of(clf, [f"w{j}" for j in range(6)], "counts")
    whole = review_vocabulary(view)
    monkeypatch.setattr(vocab, "_KEPT_CELLS", 6)  # room for one comparison of 6 tokens: at least 4 kept
    lazy = review_vocabulary(view)
    assert len(lazy.comparisons) == len(whole.comparisons) == 9
    for _ in range(2):  # the second pass recomputes what the first let go
        for a, b in zip(whole.comparisons, lazy.comparisons):
            assert a.label == b.label and list(a.other_classes) == list(b.other_classes)
            for name in ("ratio", "zscore", "mass", "chi2", "g2", "mi", "order", "rank", "flags", "table"):
                np.testing.assert_array_equal(getattr(a, name), getattr(b, name))
        assert len(lazy.comparisons._kept) == 4
    assert lazy.comparisons[-1].target == "class8" and lazy.comparisons[1:3][0].target == "class1"
    with pytest.raises(IndexError):
        lazy.comparisons[9]
