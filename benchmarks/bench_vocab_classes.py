"""The vocabulary review of a filter with many classes: time and peak memory (target: 10,000 classes
in under a minute and 1 GB).

Builds a ``MultinomialNB`` view of ``--classes`` classes over ``--features`` tokens (random counts,
no normal class, so every class is compared with the rest), then, in a fresh process each:

- ``review``: :func:`explain.analysis.vocab.review_vocabulary` alone (every comparison, lens, ranking, flag);
- ``render``: the review rendered as the terminal shows it, to a null console.

Peak memory is ``resource.getrusage(RUSAGE_SELF).ru_maxrss`` of that process (Linux: KiB).
Run: ``python -m benchmarks.bench_vocab_classes [--classes C] [--features F] [--parts review,render]``
(``--render-classes`` sets the classes of the render part, which is far slower per class).
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys

CHILD = r"""
import io, json, resource, sys, time
import numpy as np
from sklearn.naive_bayes import MultinomialNB
from explain.model.model_view import view_of
from explain.analysis.vocab import review_vocabulary
C, F, part = int(sys.argv[1]), int(sys.argv[2]), sys.argv[3]
rng = np.random.default_rng(0)
clf = MultinomialNB()
clf.fit(np.zeros((1, F)), [0])  # shapes only; the counts are set below
clf.classes_ = np.array([f"class{c:05d}" for c in range(C)], dtype=object)
clf.feature_count_ = rng.poisson(0.5, (C, F)).astype(np.float64)
clf.class_count_ = np.full(C, 2.0)
clf._update_feature_log_prob(1.0)
clf._update_class_log_prior()
view = view_of(clf, [f"w{j}" for j in range(F)], "counts")
start = time.perf_counter()
review = review_vocabulary(view)
flagged = sum(sum(c.flag_counts.values()) for c in review.comparisons)  # every comparison computed
seconds = time.perf_counter() - start
if part == "render":
    from explain.present.token_display import make_console
    from explain.present.vocab import render
    start = time.perf_counter()
    render(review, make_console(file=io.StringIO(), width=100, no_color=True))
    seconds = time.perf_counter() - start
print(json.dumps({"seconds": seconds, "peak_mib": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024}))
"""


def measure(classes: int, features: int, part: str) -> dict:
    done = subprocess.run([sys.executable, "-c", CHILD, str(classes), str(features), part],
                          capture_output=True, text=True, timeout=3600)
    if done.returncode != 0:
        return {"error": done.stderr.strip().splitlines()[-1:]}
    return json.loads(done.stdout)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--classes", type=int, default=10_000)
    parser.add_argument("--features", type=int, default=1_000)
    parser.add_argument("--parts", default="review,render")
    parser.add_argument("--render-classes", type=int, default=None)
    args = parser.parse_args()
    for part in args.parts.split(","):
        classes = args.render_classes if part == "render" and args.render_classes else args.classes
        result = measure(classes, args.features, part)
        print(f"{part}: {classes:,} classes x {args.features:,} features: {result}", flush=True)


if __name__ == "__main__":
    main()
