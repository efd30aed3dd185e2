"""How long the vocabulary review takes on a vocabulary of 10^6 features, next to loading the model.

Builds a synthetic Tideway Commons filter (``CountVectorizer`` -> ``MultinomialNB``,
classes ``advert``, ``ok``, ``scam``, normal class ``ok``) whose vocabulary has
10^6 tokens, writes it with skops, then times in one run:

- ``load_model`` on the skops file (the cost every command pays first);
- ``review_vocabulary``: both comparisons with the normal class, every lens
  (ratio, z-score, mass, chi2, G2, MI), every ranking, the risk flags and a
  watchlist;
- the token traits alone (personal data, numeric, mixed script, stop words),
  the part that looks at characters rather than arrays.

Run: ``python -m benchmarks.bench_vocab [--features N] [--repeat R]``; it prints
the best of ``R`` runs of each and the ratio of the review to the load.
"""

from __future__ import annotations

import argparse
import tempfile
import time
from pathlib import Path

import numpy as np
import scipy.sparse as sp

CLASSES = np.array(["advert", "ok", "scam"])


def synthetic_tokens(n: int, rng: np.random.Generator) -> list[str]:
    """``n`` distinct tokens: mostly letter words of 3-12 letters, 2% numbers, a few with a Cyrillic letter."""
    letters = np.array(list("abcdefghijklmnopqrstuvwxyz"))
    out: dict[str, None] = {}
    while len(out) < n:
        lengths = rng.integers(3, 13, size=n)
        for length, word in zip(lengths, rng.choice(letters, size=(n, 12))):
            out.setdefault("".join(word[:length]), None)
            if len(out) == n:
                break
    tokens = list(out)
    for j in rng.choice(n, size=n // 50, replace=False):
        tokens[j] = str(1_000_000 + j)  # unique, and seven digits or more: a long digit run
    for j in rng.choice(n, size=n // 1000, replace=False):
        tokens[j] = tokens[j][:1] + "\u0430" + tokens[j][2:]  # Cyrillic a
    return list(dict.fromkeys(tokens))


def build_model(n_features: int, folder: Path, seed: int = 0) -> Path:
    import skops.io as sio
    from sklearn.feature_extraction.text import CountVectorizer
    from sklearn.naive_bayes import MultinomialNB
    from sklearn.pipeline import Pipeline

    rng = np.random.default_rng(seed)
    tokens = synthetic_tokens(n_features, rng)
    chunks = [" ".join(tokens[i : i + 1000]) for i in range(0, len(tokens), 1000)]
    vectorizer = CountVectorizer().fit(chunks)
    n_docs, per_doc = 30_000, 60
    # Zipf-like columns: a few tokens common, most rare, as in real mail
    columns = np.minimum(rng.zipf(1.3, size=n_docs * per_doc) - 1, len(tokens) - 1)
    columns = rng.permutation(len(tokens))[columns]
    rows = np.repeat(np.arange(n_docs), per_doc)
    X = sp.csr_matrix((np.ones(len(rows)), (rows, columns)), shape=(n_docs, len(tokens)))
    y = CLASSES[rng.choice(3, size=n_docs, p=[0.1, 0.75, 0.15])]
    clf = MultinomialNB().fit(X, y)
    path = folder / "bench.skops"
    sio.dump(Pipeline([("v", vectorizer), ("nb", clf)]), path)
    return path


def best_of(repeat: int, fn):
    times, result = [], None
    for _ in range(repeat):
        started = time.perf_counter()
        result = fn()
        times.append(time.perf_counter() - started)
    return min(times), result


def main() -> None:
    from explain.model.loading import LoadLimits, load_model
    from explain.analysis.risk import Watchlist, token_traits
    from explain.analysis.vocab import review_vocabulary

    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--features", type=int, default=1_000_000)
    parser.add_argument("--repeat", type=int, default=3)
    args = parser.parse_args()

    with tempfile.TemporaryDirectory() as scratch:
        started = time.perf_counter()
        path = build_model(args.features, Path(scratch))
        built = time.perf_counter() - started
        size = path.stat().st_size
        # Without the cache: the cost of a model file's first load (see bench_load for the second).
        load_s, loaded = best_of(
            args.repeat, lambda: load_model(path, normal_class="ok", limits=LoadLimits(cache=False))
        )
    view = loaded.view
    watch = Watchlist(("harbour", "roma", "traveller", str(view.tokens[0])), "benchmark")
    review_s, review = best_of(args.repeat, lambda: review_vocabulary(view, watchlist=watch))
    traits_s, _ = best_of(args.repeat, lambda: token_traits(view.tokens))

    print(f"model: {view.n_features:,} features, {view.n_classes} classes, skops file {size / 2**20:.1f} MiB "
          f"(built in {built:.1f} s)")
    print(f"comparisons: {', '.join(c.label for c in review.comparisons)}; lenses ranked per comparison: 5")
    print(f"best of {args.repeat}:")
    print(f"  load_model                       {load_s:8.3f} s")
    print(f"  review_vocabulary (every lens)   {review_s:8.3f} s")
    print(f"    of which token traits          {traits_s:8.3f} s")
    print(f"  review / load                    {review_s / load_s:8.3f}")


if __name__ == "__main__":
    main()
