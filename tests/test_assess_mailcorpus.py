"""The assessment on real mail: the public corpus described in ../shared/README.md.

A multinomial filter is trained on ``easy-ham-1`` + ``spam-1`` and assessed on
messages collected later (``easy-ham-2`` + ``spam-2``) and on ``hard-ham-1``,
legitimate mail that the corpus's own README calls harder to tell from spam.
The figures are printed with the test results.
"""

import numpy as np
import pytest
from scipy.special import expit
from sklearn.feature_extraction.text import CountVectorizer
from sklearn.metrics import (
    average_precision_score,
    brier_score_loss,
    confusion_matrix,
    precision_recall_fscore_support,
    roc_auc_score,
)
from sklearn.naive_bayes import MultinomialNB

from benchmarks import mailcorpus
from explain.analysis.assessment import assess
from explain.model.model_view import view_of

pytestmark = pytest.mark.mailcorpus


@pytest.fixture(scope="module")
def trained():
    try:
        train = mailcorpus.load(["easy-ham-1", "spam-1"])
        later = mailcorpus.load(["easy-ham-2", "spam-2"])
        hard = mailcorpus.load(["hard-ham-1"])
        hard_and_spam = mailcorpus.load(["hard-ham-1", "spam-2"])
    except mailcorpus.CorpusUnavailable as exc:
        pytest.skip(f"public mail corpus unavailable: {exc}")
    vectorizer = CountVectorizer(min_df=2).fit(train.texts)
    clf = MultinomialNB().fit(vectorizer.transform(train.texts), train.labels)
    view = view_of(clf, vectorizer.get_feature_names_out(), "counts", normal_class="ham")
    sets = {"easy-ham-2 + spam-2": later, "hard-ham-1": hard, "hard-ham-1 + spam-2": hard_and_spam}
    results = {
        name: (data, vectorizer.transform(data.texts), assess(view, vectorizer.transform(data.texts), data.labels, ids=data.ids))
        for name, data in sets.items()
    }
    return clf, results


def _line(name, result):
    m = result.flag_metrics
    fpr = m.false_alarm_rate
    text = f"{name:<22} n={result.base_rates.n_messages:<5} FPR {100 * fpr.value:6.2f} % ({100 * fpr.low:.2f} to {100 * fpr.high:.2f})"
    if m.recall.denominator:
        text += f"  recall {100 * m.recall.value:6.2f} % ({100 * m.recall.low:.2f} to {100 * m.recall.high:.2f})"
    if result.flag_ranking is not None:
        auc = result.flag_ranking.auc
        text += f"  AUC {auc.auc:.4f} ({auc.low:.4f} to {auc.high:.4f})  AP {result.flag_ranking.average_precision:.4f}"
    text += f"  Brier {result.calibration.brier_score:.4f}  ECE {result.calibration.expected_calibration_error:.4f}"
    return text


def test_hard_ham_raises_more_false_alarms_than_later_easy_ham(trained, capsys):
    _, results = trained
    later = results["easy-ham-2 + spam-2"][2]
    hard = results["hard-ham-1"][2]
    with capsys.disabled():
        print("\nmail corpus: multinomial NB trained on easy-ham-1 + spam-1 (body text, CountVectorizer min_df=2)")
        for name, (_, _, result) in results.items():
            print("  " + _line(name, result))
    # the corpus README calls hard-ham-1 harder to tell from spam
    assert hard.flag_metrics.false_alarm_rate.value > later.flag_metrics.false_alarm_rate.value
    assert hard.flag_metrics.false_alarm_rate.low > later.flag_metrics.false_alarm_rate.high
    # hard ham alone holds one class: no AUC, the rest is reported
    assert hard.flag_ranking is None and hard.calibration is not None
    assert results["hard-ham-1 + spam-2"][2].flag_ranking.auc.auc < later.flag_ranking.auc.auc


@pytest.mark.parametrize("name", ["easy-ham-2 + spam-2", "hard-ham-1 + spam-2"])
def test_real_data_parity_with_sklearn(trained, name, capsys):
    # scikit-learn confusion_matrix, precision_recall_fscore_support, roc_auc_score,
    # average_precision_score and brier_score_loss, installed version
    clf, results = trained
    data, X, result = results[name]
    y = np.asarray(data.labels)
    predicted = clf.predict(X)
    np.testing.assert_array_equal(result.confusion.counts, confusion_matrix(y, predicted, labels=clf.classes_))
    p, r, f, _ = precision_recall_fscore_support(y, predicted, labels=clf.classes_, average=None)
    for c, m in enumerate(result.class_metrics):
        np.testing.assert_allclose([m.precision.value, m.recall.value, m.f1.value], [p[c], r[c], f[c]], rtol=1e-12)
    jll = clf.predict_joint_log_proba(X)
    log_odds = jll[:, 1] - jll[:, 0]
    truth = y == "spam"
    assert result.flag_ranking.auc.auc == pytest.approx(roc_auc_score(truth, log_odds), abs=1e-12)
    assert result.flag_ranking.average_precision == pytest.approx(average_precision_score(truth, log_odds), abs=1e-12)
    proba = clf.predict_proba(X)[:, 1]
    assert result.calibration.brier_score == pytest.approx(brier_score_loss(truth, proba), abs=1e-12)
    np.testing.assert_allclose(expit(log_odds), proba, atol=1e-12)
    # probabilities round to exactly 0 or 1 for many messages; their log-odds stay apart
    saturated = int(np.sum((proba == 0) | (proba == 1)))
    auc_from_rounded = roc_auc_score(truth, proba)
    with capsys.disabled():
        print(
            f"\n  {name}: {saturated} of {len(y)} probabilities are exactly 0 or 1; AUC from log-odds "
            f"{result.flag_ranking.auc.auc:.6f}, from predict_proba {auc_from_rounded:.6f}"
        )
    assert saturated > 0 and len(np.unique(log_odds)) > len(np.unique(proba))
