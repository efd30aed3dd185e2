"""Loading a model file: first load (separate process) vs second load (cache), and the process's cost.

Builds the synthetic 10^6-feature Tideway Commons filter of
:mod:`benchmarks.bench_vocab` (``CountVectorizer`` -> ``MultinomialNB``), then
times, in one run, with the model cache in a temporary folder:

- the first ``load_model``: the zip check, the separate loading process
  (skops load, pipeline checks, plain form), the rebuild and probe check in
  this process, and writing the cache entry; the loading process's peak
  memory is printed too;
- the second ``load_model`` of the same file: hash, cache read, rebuild and
  probe check (target: <= 0.05 x the first);
- on a small model (the demo-sized one built here), the old way of loading in
  this process (``read_object`` + ``split_pipeline`` + ``view_of``) against
  ``load_model`` without the cache, best of ``R`` each: the difference is what
  the separate process adds (target: under 0.3 s); and the whole command
  ``nbledger why`` in a fresh process with ``--no-cache`` against a cached load,
  where the process's start overlaps this process's own imports.

Run: ``python -m benchmarks.bench_load [--features N] [--repeat R]``.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from benchmarks.bench_vocab import best_of, build_model


def small_model(folder: Path) -> Path:
    import skops.io as sio
    from sklearn.feature_extraction.text import CountVectorizer
    from sklearn.naive_bayes import MultinomialNB
    from sklearn.pipeline import make_pipeline

    texts = ["can I borrow your ladder on Saturday", "pay the parcel fee now", "sofa for sale, collect"] * 50
    labels = ["ok", "scam", "advert"] * 50
    path = folder / "small.skops"
    sio.dump(make_pipeline(CountVectorizer(), MultinomialNB()).fit(texts, labels), path)
    return path


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--features", type=int, default=1_000_000)
    parser.add_argument("--repeat", type=int, default=5)
    args = parser.parse_args()

    with tempfile.TemporaryDirectory() as scratch:
        scratch = Path(scratch)
        os.environ["XDG_CACHE_HOME"] = str(scratch / "cache")
        from explain.model.load_process import load_in_child
        from explain.model.loading import LoadLimits, load_model
        from explain.model.model_files import read_object, split_pipeline
        from explain.model.model_view import view_of

        started = time.perf_counter()
        big = build_model(args.features, scratch)
        built = time.perf_counter() - started

        first_s, loaded = best_of(1, lambda: load_model(big))
        second_s, again = best_of(1, lambda: load_model(big))
        assert again.view.n_features == loaded.view.n_features == args.features
        peak = load_in_child([big], allow_pickle=False, trust=(), limits=LoadLimits())["peak_bytes"]

        small = small_model(scratch)

        def in_process():
            featurizer, classifier = split_pipeline(read_object(small)[0])
            return view_of(classifier, featurizer.tokens, featurizer.feature_kind)

        old_s, _ = best_of(args.repeat, in_process)
        child_s, _ = best_of(args.repeat, lambda: load_model(small, limits=LoadLimits(cache=False)))
        cached_small_s, _ = best_of(args.repeat, lambda: load_model(small))
        command = [sys.executable, "-m", "explain", "why", str(small), "pay the fee"]
        run = lambda *extra: subprocess.run([*command, *extra], check=True, capture_output=True)  # noqa: E731
        cli_child_s, _ = best_of(args.repeat, lambda: run("--no-cache"))
        cli_cached_s, _ = best_of(args.repeat, run)
        # The same in fresh interpreters: loading in the interpreter itself (the old way, skops imported
        # there too) against loading in a separate process, imports included in both.
        fresh = lambda code: subprocess.run([sys.executable, "-c", code], check=True, capture_output=True)  # noqa: E731
        fresh_old_s, _ = best_of(args.repeat, lambda: fresh(
            "from explain.model.model_files import read_object, split_pipeline; from explain.model.model_view import view_of; "
            f"f, c = split_pipeline(read_object({str(small)!r})[0]); view_of(c, f.tokens, f.feature_kind)"))
        fresh_child_s, _ = best_of(args.repeat, lambda: fresh(
            "from explain.model.loading import load_model, LoadLimits; "
            f"load_model({str(small)!r}, limits=LoadLimits(cache=False))"))
        big_mib = big.stat().st_size / 2**20

    print(f"model: {args.features:,} features, skops file {big_mib:.1f} MiB "
          f"(built in {built:.1f} s)")
    print(f"  first load (separate process)     {first_s:8.3f} s   peak memory of the process {peak / 2**20:,.0f} MiB")
    print(f"  second load (cache)               {second_s:8.3f} s")
    print(f"  second / first                    {second_s / first_s:8.4f}   (target <= 0.05)")
    print(f"small model, best of {args.repeat}:")
    print(f"  in this process (old way)         {old_s:8.3f} s")
    print(f"  separate process, no cache        {child_s:8.3f} s")
    print(f"  added by the separate process     {child_s - old_s:8.3f} s   (target < 0.3)")
    print(f"  cached                            {cached_small_s:8.3f} s")
    print(f"  'nbledger why' fresh, --no-cache  {cli_child_s:8.3f} s")
    print(f"  'nbledger why' fresh, cached      {cli_cached_s:8.3f} s")
    print(f"  added by the separate process     {cli_child_s - cli_cached_s:8.3f} s   (whole command; the cached "
          "load imports neither skops nor the classifier's module)")
    print(f"  fresh interpreter, in-process     {fresh_old_s:8.3f} s")
    print(f"  fresh interpreter, separate       {fresh_child_s:8.3f} s")
    print(f"  added by the separate process     {fresh_child_s - fresh_old_s:8.3f} s   (target < 0.3, imports included)")


if __name__ == "__main__":
    main()
