"""The assessment against scikit-learn, brute force and facts of the trade."""

import numpy as np
import pytest
import scipy.sparse as sp
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st
from scipy.special import expit, logsumexp
from scipy.stats import binomtest
from sklearn.calibration import calibration_curve
from sklearn.metrics import (
    average_precision_score,
    brier_score_loss,
    confusion_matrix,
    precision_recall_curve,
    precision_recall_fscore_support,
    roc_auc_score,
    roc_curve,
)
from sklearn.naive_bayes import BernoulliNB, ComplementNB, MultinomialNB

from explain.analysis.assessment import PER_MESSAGES, assess
from explain.analysis.calibration import calibration_of
from explain.errors import NbledgerError
from explain.model.model_view import ModelView, view_of

CLASSES = ("advert", "ok", "scam")
VARIANTS = {"multinomial": MultinomialNB, "complement": ComplementNB, "bernoulli": BernoulliNB}
SETTINGS = settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])


def random_filter(seed, n_classes, variant="multinomial", n_test=120, n_features=12, normal="ok", weights=False):
    """A filter fitted on random class-dependent counts, and fresh test messages.

    Returns (view, X_test, labels_test, classifier); the classes are
    ``ok``/``scam`` (two) or ``advert``/``ok``/``scam`` (three). With
    ``weights`` the test features are continuous (like TF-IDF), so that no two
    messages score alike.
    """
    rng = np.random.default_rng(seed)
    classes = np.array(CLASSES[1:] if n_classes == 2 else CLASSES)
    rates = rng.gamma(0.6, 1.0, size=(len(classes), n_features))

    def sample(n):
        y = classes[rng.integers(0, len(classes), size=n)]
        counts = rng.poisson(rates[np.searchsorted(classes, y)] * rng.uniform(0.2, 1.5, size=(n, 1)))
        return sp.csr_matrix(counts.astype(np.float64)), y

    X_train, y_train = sample(200)
    y_train[: len(classes)] = classes  # every class is seen in training
    X_test, y_test = sample(n_test)
    if weights:
        X_test = sp.csr_matrix((X_test.toarray() + 0.2) * rng.uniform(0.05, 0.3, size=X_test.shape))
    clf = VARIANTS[variant]().fit(X_train, y_train)
    tokens = [f"t{j}" for j in range(n_features)]
    view = view_of(clf, tokens, "counts", normal_class=normal)
    return view, X_test, y_test, clf


def sklearn_flag_scores(clf, X, normal="ok"):
    """log P(not normal) - log P(normal) from scikit-learn's own joint log-likelihoods."""
    jll = clf.predict_joint_log_proba(X)
    n = list(clf.classes_).index(normal)
    return logsumexp(np.delete(jll, n, axis=1), axis=1) - jll[:, n]


seeds = st.integers(0, 2**32 - 1)
n_classes = st.sampled_from([2, 3])
variants = st.sampled_from(sorted(VARIANTS))


@SETTINGS
@given(seeds, n_classes, variants)
def test_confusion_and_metrics_match_sklearn(seed, k, variant):
    # scikit-learn confusion_matrix and precision_recall_fscore_support (installed version)
    view, X, y, clf = random_filter(seed, k, variant)
    result = assess(view, X, y)
    predicted = clf.predict(X)
    expected = confusion_matrix(y, predicted, labels=clf.classes_)
    np.testing.assert_array_equal(result.confusion.counts, expected)
    p, r, f, support = precision_recall_fscore_support(
        y, predicted, labels=clf.classes_, average=None, zero_division=np.nan
    )
    for c, m in enumerate(result.class_metrics):
        assert m.positive == clf.classes_[c]
        np.testing.assert_allclose(
            [m.precision.value, m.recall.value, m.f1.value], [p[c], r[c], f[c]], rtol=1e-12
        )
        assert m.tp + m.fn == support[c]
        negatives = len(y) - support[c]
        assert m.false_alarm_rate.value == pytest.approx(m.fp / negatives if negatives else np.nan, nan_ok=True)
        assert m.specificity.value == pytest.approx(1 - m.false_alarm_rate.value, nan_ok=True)
        for rate in (m.precision, m.recall, m.specificity, m.false_alarm_rate, m.f1, m.accuracy):
            if rate.denominator:
                assert rate.low <= rate.value <= rate.high
    assert result.accuracy.value == pytest.approx(np.mean(predicted == y))
    rows = expected.sum(axis=1, keepdims=True)
    with np.errstate(invalid="ignore"):
        np.testing.assert_allclose(result.confusion.row_rates, expected / rows)


@SETTINGS
@given(seeds, n_classes, variants)
def test_flagged_versus_normal_matches_sklearn(seed, k, variant):
    view, X, y, clf = random_filter(seed, k, variant)
    result = assess(view, X, y)
    flag_truth = y != "ok"
    flag_decided = clf.predict(X) != "ok"
    tn, fp, fn, tp = confusion_matrix(flag_truth, flag_decided, labels=[False, True]).ravel()
    m = result.flag_metrics
    assert (m.tp, m.fp, m.fn, m.tn) == (tp, fp, fn, tn)
    np.testing.assert_array_equal(result.flag_confusion.counts, [[tn, fp], [fn, tp]])
    assert result.base_rates.flagged.numerator == flag_truth.sum()


@SETTINGS
@given(seeds, n_classes, variants)
def test_ranking_matches_sklearn(seed, k, variant):
    # scikit-learn roc_auc_score, average_precision_score, roc_curve, precision_recall_curve
    view, X, y, clf = random_filter(seed, k, variant)
    flag_truth = y != "ok"
    assume(0 < flag_truth.sum() < len(y))
    result = assess(view, X, y)
    scores = sklearn_flag_scores(clf, X)
    ranking = result.flag_ranking
    assert ranking.auc.auc == pytest.approx(roc_auc_score(flag_truth, scores), abs=1e-9)
    assert ranking.average_precision == pytest.approx(average_precision_score(flag_truth, scores), abs=1e-9)
    # the kept ROC points lie on scikit-learn's full curve and draw the same area
    fpr, tpr, _ = roc_curve(flag_truth, scores, drop_intermediate=False)
    full = set(zip(np.round(fpr, 12), np.round(tpr, 12)))
    kept = set(zip(np.round(ranking.roc_false_alarm_rate, 12), np.round(ranking.roc_recall, 12)))
    assert kept <= full
    assert np.trapezoid(ranking.roc_recall, ranking.roc_false_alarm_rate) == pytest.approx(
        ranking.auc.auc, abs=1e-9
    )
    precision, recall, _ = precision_recall_curve(flag_truth, scores, drop_intermediate=False)
    full_pr = set(zip(np.round(precision, 12), np.round(recall, 12)))
    kept_pr = set(zip(np.round(ranking.pr_precision, 12), np.round(ranking.pr_recall, 12)))
    assert kept_pr <= full_pr
    if k == 3:
        proba = clf.predict_proba(X)
        for c, per_class in enumerate(result.class_ranking):
            truth_c = y == clf.classes_[c]
            if 0 < truth_c.sum() < len(y):
                jll = clf.predict_joint_log_proba(X)
                ovr = jll[:, c] - logsumexp(np.delete(jll, c, axis=1), axis=1)
                assert per_class.auc.auc == pytest.approx(roc_auc_score(truth_c, ovr), abs=1e-9)
                if len(np.unique(proba[:, c])) == len(np.unique(ovr)):
                    assert per_class.auc.auc == pytest.approx(roc_auc_score(truth_c, proba[:, c]), abs=1e-9)
            else:
                assert per_class is None


@SETTINGS
@given(seeds, n_classes, st.sampled_from([2, 5, 10]))
def test_calibration_matches_sklearn(seed, k, n_bins):
    # scikit-learn brier_score_loss and calibration_curve(strategy="quantile"); the
    # binnings match when the probabilities are distinct and the bins equally full
    view, X, y, clf = random_filter(seed, k, n_test=100, weights=True)
    flag_truth = y != "ok"
    result = assess(view, X, y, n_bins=n_bins)
    cal = result.calibration
    probability = expit(sklearn_flag_scores(clf, X))
    np.testing.assert_allclose(probability, 1 - clf.predict_proba(X)[:, list(clf.classes_).index("ok")], atol=1e-12)
    assert cal.brier_score == pytest.approx(brier_score_loss(flag_truth, probability), abs=1e-12)
    assert cal.counts.sum() == len(y) and cal.counts.max() - cal.counts.min() <= 1
    expected_ece = np.sum(cal.counts / len(y) * np.abs(cal.observed - cal.mean_predicted))
    assert cal.expected_calibration_error == pytest.approx(expected_ece)
    assume(len(np.unique(probability)) == len(y) and 0 < flag_truth.sum() < len(y))
    observed, predicted = calibration_curve(flag_truth, probability, n_bins=n_bins, strategy="quantile")
    np.testing.assert_allclose(cal.observed, observed, atol=1e-12)
    np.testing.assert_allclose(cal.mean_predicted, predicted, atol=1e-12)
    # maximum calibration error (Naeini, Cooper & Hauskrecht 2015) over scikit-learn's own bins
    assert cal.maximum_calibration_error == pytest.approx(np.max(np.abs(observed - predicted)), abs=1e-12)
    assert cal.maximum_calibration_error >= cal.expected_calibration_error - 1e-12
    # overconfident: mean P(flag) beyond the Wilson interval (scipy's binomtest), on the side away from 1/2
    for b in range(cal.n_bins):
        ci = binomtest(int(round(observed[b] * cal.counts[b])), int(cal.counts[b])).proportion_ci(method="wilson")
        p = predicted[b]
        assert bool(cal.overconfident[b]) == bool((p > 0.5 and p > ci.high) or (p < 0.5 and p < ci.low)), b


def test_overconfident_bins_are_named():
    # 40 messages at P(flag) ~ 0.9999 of which half are flagged-class, 40 at ~1e-4 all normal:
    # the top bin is overconfident, the bottom one is not (common practice, no source)
    scores = np.concatenate([np.full(40, -9.2), np.full(40, 9.2)])
    truth = np.concatenate([np.zeros(40, bool), np.arange(40) % 2 == 0])
    cal = calibration_of(scores, truth, 2, 0.95)
    assert cal.overconfident.tolist() == [False, True]
    assert cal.maximum_calibration_error == pytest.approx(abs(0.5 - expit(9.2)), abs=1e-12)


def brute_force(scores, truth, tau):
    flagged = scores >= tau
    return int((flagged & truth).sum()), int((flagged & ~truth).sum())


@SETTINGS
@given(
    seeds,
    n_classes,
    st.lists(st.floats(0, 0.3), min_size=1, max_size=3),
    st.lists(st.floats(0.5, 1.0), min_size=1, max_size=3),
    st.tuples(st.floats(0.1, 50), st.floats(0.1, 50)),
)
def test_operating_points_by_brute_force(seed, k, fprs, recalls, costs):
    view, X, y, clf = random_filter(seed, k)
    truth = y != "ok"
    assume(0 < truth.sum() < len(y))
    result = assess(view, X, y, target_fpr=fprs, target_recall=recalls, costs=costs)
    scores = sklearn_flag_scores(clf, X)
    n_pos, n_neg, n = truth.sum(), (~truth).sum(), len(y)
    candidates = np.concatenate([[np.inf], np.unique(scores)])
    by_kind = {}
    for point in result.operating_points:
        by_kind.setdefault(point.kind, []).append(point)
    for point in by_kind["fpr"] + by_kind["recall"]:
        if not point.met:
            assert point.figures is None and point.note
            continue
        f = point.figures
        tp, fp = brute_force(scores, truth, f.threshold_log_odds)
        assert (f.tp, f.fp, f.fn, f.tn) == (tp, fp, n_pos - tp, n_neg - fp)
        assert f.threshold_probability == pytest.approx(expit(f.threshold_log_odds))
        assert f.false_alarms_per_10k == pytest.approx(PER_MESSAGES * fp / n)
        assert f.missed_per_10k == pytest.approx(PER_MESSAGES * (n_pos - tp) / n)
        assert f.flagged_per_10k == pytest.approx(PER_MESSAGES * (tp + fp) / n)
        lower = candidates[candidates < f.threshold_log_odds]
        higher = candidates[candidates > f.threshold_log_odds]
        if point.kind == "fpr":
            assert fp / n_neg <= point.target
            # no lower threshold keeps the target
            assert all(brute_force(scores, truth, t)[1] / n_neg > point.target for t in lower)
        else:
            assert tp / n_pos >= point.target
            assert all(brute_force(scores, truth, t)[0] / n_pos < point.target for t in higher)
    for point in by_kind["fpr"]:
        if not point.met:
            # only flagging nothing keeps the target
            assert all(brute_force(scores, truth, t)[1] / n_neg > point.target for t in candidates[1:])
    cost_fp, cost_fn = costs
    cost = [(cost_fp * fp + cost_fn * (n_pos - tp)) / n for tp, fp in (brute_force(scores, truth, t) for t in candidates)]
    (least,) = by_kind["least cost"]
    assert least.figures.expected_cost == pytest.approx(min(cost))
    (calibrated,) = by_kind["cost if calibrated"]
    tau = np.log(cost_fp / cost_fn)
    assert calibrated.figures.threshold_log_odds == pytest.approx(tau)
    assert (calibrated.figures.tp, calibrated.figures.fp) == brute_force(scores, truth, calibrated.figures.threshold_log_odds)
    assert calibrated.figures.expected_cost >= least.figures.expected_cost - 1e-12


@SETTINGS
@given(seeds, st.floats(0.05, 0.95))
def test_threshold_in_use_and_margins(seed, threshold):
    view, X, y, clf = random_filter(seed, 2)
    result = assess(view, X, y, threshold=threshold, top=1000)
    scores = sklearn_flag_scores(clf, X)
    flagged = scores >= np.log(threshold / (1 - threshold))
    truth = y != "ok"
    (in_use,) = [p for p in result.operating_points if p.kind == "in use"]
    assert in_use.figures.tp == (flagged & truth).sum()
    assert in_use.figures.fp == (flagged & ~truth).sum()
    assert result.threshold_log_odds == pytest.approx(np.log(threshold / (1 - threshold)))
    errors = result.errors
    assert errors.n_false_alarms == (flagged & ~truth).sum()
    assert errors.n_missed == (~flagged & truth).sum()
    assert [m.margin for m in errors.false_alarms] == sorted((m.margin for m in errors.false_alarms), reverse=True)
    assert [m.margin for m in errors.missed] == sorted(m.margin for m in errors.missed)
    assert all(m.margin >= 0 and m.true_class == "ok" for m in errors.false_alarms)
    assert all(m.margin < 0 and m.true_class == "scam" for m in errors.missed)
    for m in errors.false_alarms + errors.missed:
        assert m.flag_log_odds - result.threshold_log_odds == pytest.approx(m.margin)
    borderline = [abs(m.margin) for m in errors.borderline]
    assert borderline == sorted(borderline)
    assert borderline[-1] <= np.sort(np.abs(scores - result.threshold_log_odds))[len(borderline) - 1] + 1e-9


@SETTINGS
@given(seeds, variants)
def test_error_evidence_adds_up_to_the_log_odds(seed, variant):
    # two classes: the flag log-odds is baseline difference plus every token's evidence
    view, X, y, clf = random_filter(seed, 2, variant)
    result = assess(view, X, y, top=1000, top_tokens=view.n_features)
    scores = sklearn_flag_scores(clf, X)
    base = view.baseline[2 - 1] - view.baseline[0]
    for m in result.errors.false_alarms + result.errors.missed + result.errors.borderline:
        total = base + sum(p.evidence for p in m.toward_flag) + sum(p.evidence for p in m.toward_normal)
        assert total == pytest.approx(scores[m.index], abs=1e-9)
        assert all(p.evidence > 0 for p in m.toward_flag) and all(p.evidence < 0 for p in m.toward_normal)
        assert m.id == str(m.index + 1)


@SETTINGS
@given(seeds, n_classes)
def test_error_drivers_by_brute_force(seed, k):
    view, X, y, clf = random_filter(seed, k)
    result = assess(view, X, y, top=view.n_features)
    jll = clf.predict_joint_log_proba(X)
    decided = clf.predict(X)
    normal = list(clf.classes_).index("ok")
    flagged_cols = [c for c in range(k) if c != normal]
    best = np.array(flagged_cols)[np.argmax(jll[:, flagged_cols], axis=1)]
    margin = jll[np.arange(len(y)), best] - jll[:, normal]
    dense = view.prepare(X).toarray()
    evidence = dense * (view.weights[best] - view.weights[normal])
    for rows, sign, drivers in (
        ((y == "ok") & (decided != "ok"), 1, result.errors.false_alarm_drivers),
        ((y != "ok") & (decided == "ok"), -1, result.errors.missed_drivers),
    ):
        push = np.maximum(sign * evidence[rows], 0)
        totals = push.sum(axis=0)
        expected = {view.tokens[j]: totals[j] for j in range(view.n_features) if totals[j] > 0}
        assert {d.token: pytest.approx(d.evidence) for d in drivers} == expected
        tipped = (push > np.abs(margin[rows])[:, None]).sum(axis=0)
        for d in drivers:
            j = list(view.tokens).index(d.token)
            assert d.pushed == (push[:, j] > 0).sum() and d.tipped == tipped[j]
        assert [d.evidence for d in drivers] == sorted((d.evidence for d in drivers), reverse=True)


def constant_filter(prior_ok: float) -> ModelView:
    """A filter whose tokens carry no evidence: it always says the more likely class."""
    tokens = np.array(["tide", "fee"], dtype=object)
    prior = np.log([prior_ok, 1 - prior_ok])
    return ModelView(
        classes=np.array(["ok", "scam"], dtype=object),
        variant="multinomial",
        tokens=tokens,
        weights=np.log(np.full((2, 2), 0.5)),
        baseline=prior,
        prior=prior,
        absence=np.zeros(2),
        feature_count=np.ones((2, 2)),
        class_count=np.ones(2),
        feature_kind="counts",
        normal_class="ok",
    )


def test_always_normal_filter_at_one_in_a_thousand():
    # common practice, no source: a filter that never flags is 99.9 % accurate
    # when 0.1 % of traffic is abuse, with sensitivity 0 and specificity 1
    n = 20_000
    labels = np.full(n, "ok", dtype=object)
    labels[:20] = "scam"
    X = sp.csr_matrix(np.random.default_rng(0).poisson(1.0, size=(n, 2)).astype(float))
    result = assess(constant_filter(0.99), X, labels)
    m = result.flag_metrics
    assert result.accuracy.value == pytest.approx(0.999)
    assert m.recall.value == 0.0 and m.specificity.value == 1.0
    assert result.base_rates.flagged.value == pytest.approx(0.001)
    in_use = result.operating_points[0].figures
    assert in_use.missed_per_10k == pytest.approx(10.0) and in_use.false_alarms_per_10k == 0.0


@settings(max_examples=20, deadline=None)
@given(seeds)
def test_random_scores_rank_at_chance(seed):
    # common practice, no source: scores unrelated to the truth give an AUC near 0.5
    view, X, _, _ = random_filter(seed, 2, n_test=3000)
    labels = np.random.default_rng(seed).choice(["ok", "scam"], size=3000)
    auc = assess(view, X, labels).flag_ranking.auc
    assert abs(auc.auc - 0.5) < 0.06
    assert auc.high - auc.low < 0.1


def test_unknown_labels_are_named():
    view, X, y, _ = random_filter(1, 2)
    y = y.copy()
    y[:3] = "spam"
    y[3] = "junk"
    with pytest.raises(NbledgerError, match=r"labels not among the model's classes \(ok, scam\): 'junk' \(1 message\), 'spam' \(3 messages\)"):
        assess(view, X, y)


def test_missing_labels_and_length_mismatch_are_refused():
    view, X, y, _ = random_filter(1, 2)
    with pytest.raises(NbledgerError, match="needs the true label"):
        assess(view, X, None)
    with pytest.raises(NbledgerError, match="119 labels for 120 messages"):
        assess(view, X, y[:-1])


@pytest.mark.parametrize("only", ["ok", "scam"])
def test_single_class_data_reports_what_it_can(only):
    view, X, _, clf = random_filter(2, 2)
    labels = np.full(X.shape[0], only, dtype=object)
    result = assess(view, X, labels)
    assert result.flag_ranking is None
    assert any("AUC and precision-recall curve undefined" in note for note in result.notes)
    other = "scam" if only == "ok" else "ok"
    assert any(f"no {other!r} messages" in note for note in result.notes)
    decided_flag = clf.predict(X) == "scam"
    m = result.flag_metrics
    if only == "ok":
        assert m.false_alarm_rate.value == decided_flag.mean()
        assert np.isnan(m.recall.value)
        assert all(not p.met for p in result.operating_points if p.kind == "recall")
        assert all(p.met or "flags anything" in p.note for p in result.operating_points if p.kind == "fpr")
    else:
        assert m.recall.value == decided_flag.mean()
        assert np.isnan(m.false_alarm_rate.value)
        assert all(not p.met and "undefined" in p.note for p in result.operating_points if p.kind == "fpr")
    assert result.calibration is not None and result.errors is not None


def test_unreachable_target_is_reported_not_raised():
    view, X, y, clf = random_filter(3, 2)
    scores = sklearn_flag_scores(clf, X)
    # make the highest-scored message normal, so any flagging costs a false alarm
    y = y.copy()
    y[np.argmax(scores)] = "ok"
    result = assess(view, X, y, target_fpr=[0.0], target_recall=[0.9])
    (fpr_point,) = [p for p in result.operating_points if p.kind == "fpr"]
    assert not fpr_point.met and fpr_point.figures is None
    assert any("target false-alarm rate at most 0 % not met" in note for note in result.notes)


def test_bad_targets_and_costs_are_refused():
    view, X, y, _ = random_filter(1, 2)
    with pytest.raises(NbledgerError, match="target recalls must be a fraction"):
        assess(view, X, y, target_recall=[95])
    with pytest.raises(NbledgerError, match="costs must be positive"):
        assess(view, X, y, costs=(0, 1))


def test_without_normal_class_three_classes_give_per_class_figures_only():
    view, X, y, clf = random_filter(5, 3, normal=None)
    result = assess(view, X, y)
    assert result.normal_class is None and result.flag_metrics is None and result.errors is None
    assert result.operating_points == () and len(result.class_ranking) == 3
    assert any("--normal-class" in note for note in result.notes)
    np.testing.assert_array_equal(result.confusion.counts, confusion_matrix(y, clf.predict(X), labels=clf.classes_))


def test_two_classes_without_normal_take_the_first_as_normal():
    view, X, y, _ = random_filter(5, 2, normal=None)
    result = assess(view, X, y)
    assert result.normal_class == "ok"
    assert any("taken as normal" in note for note in result.notes)


def test_result_is_frozen():
    view, X, y, _ = random_filter(6, 2)
    result = assess(view, X, y)
    with pytest.raises(AttributeError):
        result.accuracy = None
    with pytest.raises(ValueError):
        result.confusion.counts[0, 0] = 7
