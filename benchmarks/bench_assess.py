"""How long the assessment of 100,000 scored messages takes, against ``roc_auc_score`` alone.

Both are measured side by side in one run on the same scores: the whole
assessment (confusion matrices, Wilson intervals, ROC and PR curves, AUC with
DeLong's interval, operating points, least-cost threshold, calibration, score
distribution and error review with drivers) against scikit-learn's
``roc_auc_score`` on the flag log-odds, which gives the AUC and nothing else.
Scoring (one sparse product) is timed too, for scale, but is not part of the
ratio: the messages arrive scored.

    python -m benchmarks.bench_assess [--messages 100000] [--repeat 5]
"""

from __future__ import annotations

import argparse
import time

import numpy as np
import scipy.sparse as sp
from sklearn.metrics import roc_auc_score
from sklearn.naive_bayes import MultinomialNB

from explain.analysis.assessment import assess
from explain.analysis.batch import batch_evidence
from explain.model.decision import DecisionRule
from explain.model.model_view import view_of
from explain.analysis.stats import delong_auc


def synthetic(n: int, n_features: int = 5000, seed: int = 0):
    """A Tideway Commons-shaped filter (ok, scam, advert; mostly ok) and n messages for it."""
    rng = np.random.default_rng(seed)
    classes = np.array(["advert", "ok", "scam"])
    shares = np.array([0.05, 0.90, 0.05])
    # classes share most of their vocabulary, so that the filter makes mistakes
    base = rng.gamma(0.3, 1.0, size=n_features)
    p = base * rng.lognormal(0.0, 0.6, size=(3, n_features))
    p /= p.sum(axis=1, keepdims=True)

    def sample(size):
        y = rng.choice(3, size=size, p=shares)
        length = rng.integers(5, 60, size=size)
        rows = np.repeat(np.arange(size), length)
        cols = np.empty(len(rows), dtype=np.int64)
        owner = y[rows]
        for c in range(3):
            mine = owner == c
            cols[mine] = rng.choice(n_features, size=int(mine.sum()), p=p[c])
        X = sp.csr_matrix((np.ones(len(rows)), (rows, cols)), shape=(size, n_features))
        X.sum_duplicates()
        return X, classes[y]

    X_train, y_train = sample(5000)
    clf = MultinomialNB().fit(X_train, y_train)
    view = view_of(clf, [f"w{j}" for j in range(n_features)], "counts", normal_class="ok")
    X, y = sample(n)
    return view, X, y


def best_of(repeat: int, fn) -> float:
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        fn()
        times.append(time.perf_counter() - start)
    return min(times)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--messages", type=int, default=100_000)
    parser.add_argument("--repeat", type=int, default=5)
    args = parser.parse_args()

    view, X, labels = synthetic(args.messages)
    rule = DecisionRule.for_view(view)
    evidence = batch_evidence(view, X, rule, top_k=0)
    truth = labels != "ok"
    scores = evidence.flag_log_odds

    scoring = best_of(args.repeat, lambda: batch_evidence(view, X, rule, top_k=0))
    full = best_of(args.repeat, lambda: assess(view, X, labels, evidence=evidence, costs=(1, 20)))
    auc_only = best_of(args.repeat, lambda: roc_auc_score(truth, scores))
    interval_only = best_of(args.repeat, lambda: delong_auc(scores, truth))

    result = assess(view, X, labels, evidence=evidence, costs=(1, 20))
    auc = result.flag_ranking.auc
    assert abs(auc.auc - roc_auc_score(truth, scores)) < 1e-9
    print(f"messages: {args.messages}, features: {view.n_features}, flagged share {truth.mean():.3f}, "
          f"errors reviewed: {result.errors.n_false_alarms + result.errors.n_missed}")
    print(f"AUC {auc.auc:.4f} ({auc.low:.4f} to {auc.high:.4f}, 95 % DeLong interval)")
    print(f"scoring (batch_evidence, not in the ratio): {scoring * 1000:8.1f} ms")
    print(f"whole assessment incl. AUC interval:        {full * 1000:8.1f} ms")
    print(f"AUC with DeLong interval alone:             {interval_only * 1000:8.1f} ms")
    print(f"roc_auc_score alone:                        {auc_only * 1000:8.1f} ms")
    print(f"ratio assessment / roc_auc_score:           {full / auc_only:8.1f} x   (best of {args.repeat} each)")
    print(f"ratio AUC interval / roc_auc_score:         {interval_only / auc_only:8.1f} x")


if __name__ == "__main__":
    main()
