"""Speed of ``compare`` with data, measured side by side in one run.

Two multinomial filters on the public mail corpus (body view): one trained on
the earlier groups (easy-ham-1, spam-1), one on every group. On all 6046
messages, ``compare_models`` (vocabulary changes, both models' decisions,
metrics, McNemar's test, and the ledgers of both models for the first
``--show`` changed messages) is timed against the two pipelines' own
``predict_proba`` calls on the same texts (both include tokenisation). Times
are the best of several repeats (``time.perf_counter``).

Run: ``python -m benchmarks.bench_compare [--show N] [--repeats R]``
"""

from __future__ import annotations

import argparse
import time
from dataclasses import replace
from pathlib import Path

import numpy as np
from sklearn.feature_extraction.text import CountVectorizer
from sklearn.naive_bayes import MultinomialNB
from sklearn.pipeline import make_pipeline

from benchmarks import mailcorpus
from explain.analysis.compare import compare_models
from explain.model.data_io import Messages
from tests.corpora import loaded


def best_of(repeats, fn):
    best = float("inf")
    for _ in range(repeats):
        start = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - start)
    return best


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--show", type=int, default=20)
    parser.add_argument("--repeats", type=int, default=3)
    args = parser.parse_args()
    earlier, every = mailcorpus.load(("easy-ham-1", "spam-1")), mailcorpus.load()
    old = make_pipeline(CountVectorizer(), MultinomialNB()).fit(earlier.texts, earlier.labels)
    new = make_pipeline(CountVectorizer(), MultinomialNB()).fit(every.texts, every.labels)
    a, b = loaded(old, "ham"), replace(loaded(new, "ham"), sha256="new")
    texts = list(every.texts)
    messages = Messages(texts=texts, labels=np.asarray(every.labels, dtype=object), ids=every.ids,
                        replaced_chars=0, source=Path("mail corpus"), sha256="")
    t_sklearn = best_of(args.repeats, lambda: (old.predict_proba(texts), new.predict_proba(texts)))
    t_ours = best_of(args.repeats, lambda: compare_models(a, b, messages, show=args.show))
    t_none = best_of(args.repeats, lambda: compare_models(a, b, messages, show=0))
    result = compare_models(a, b, messages, show=args.show)
    print(f"public mail corpus: {len(texts)} messages, {result.decisions.changed} decisions change")
    print(f"two predict_proba calls:           {t_sklearn:7.3f} s")
    print(f"compare_models, no ledgers shown:  {t_none:7.3f} s  ratio {t_none / t_sklearn:5.2f}")
    print(f"compare_models, {args.show:3d} ledgers shown: {t_ours:7.3f} s  ratio {t_ours / t_sklearn:5.2f}")


if __name__ == "__main__":
    main()
