"""The tokenising helper process of the ledger: the same features, and it never outlives a run."""

from __future__ import annotations

import os
import signal

import numpy as np
import pyarrow.parquet as pq
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import explain.model.feature_worker as feature_worker
from corpora import cases, messages
from explain.errors import NbledgerError
from explain.model.feature_worker import FeatureWorker, featured
from explain.present.ledger_files import write_ledger


def same_csr(a, b) -> bool:
    return (a.shape == b.shape and np.array_equal(a.indptr, b.indptr) and np.array_equal(a.indices, b.indices)
            and np.array_equal(a.data, b.data))


@settings(max_examples=15, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(case=cases(), texts=st.lists(messages, min_size=1, max_size=6))
def test_the_helper_computes_the_features_this_process_would(case, texts):
    featurizer = case.model.featurizer
    with FeatureWorker(featurizer) as worker:
        worker.submit(texts)
        counts, X = worker.result()
    want_counts, want_X = featurizer.counts_and_features(texts)
    assert same_csr(counts, want_counts) and same_csr(X, want_X)


class Chunk:
    def __init__(self, texts):
        self.texts = texts


def test_chunks_come_back_in_order_with_their_own_features(monkeypatch):
    from corpora import loaded, make_pipeline

    texts = [f"tideway rent {i} " + "win prize " * (i % 3) for i in range(12)]
    pipe = make_pipeline("counts", "multinomial").fit(texts, ["ok", "scam", "ok"] * 4)
    featurizer = loaded(pipe).featurizer
    started = []
    monkeypatch.setattr(feature_worker, "can_fork", lambda: True)
    monkeypatch.setattr(feature_worker, "FeatureWorker", lambda f: started.append(1) or FeatureWorker(f))
    chunks = [Chunk(texts[i : i + 5]) for i in range(0, 12, 5)]
    got = list(featured(chunks, featurizer))
    assert started == [1]
    assert [c for c, _ in got] == chunks
    for chunk, (counts, X) in got:
        want = featurizer.counts_and_features(chunk.texts)
        assert same_csr(counts, want[0]) and same_csr(X, want[1])


def test_a_failure_inside_the_helper_is_one_line():
    from corpora import loaded, make_pipeline

    pipe = make_pipeline("counts", "multinomial").fit(["tideway rent", "win prize"], ["ok", "scam"])
    with FeatureWorker(loaded(pipe).featurizer) as worker:
        worker.submit([b"\xff not a text", 7])
        with pytest.raises(NbledgerError, match="^tokenising failed: "):
            worker.result()
        worker.submit(["tideway rent"])  # and it keeps serving
        assert worker.result()[0].sum() == 2


def test_a_helper_that_dies_is_reported_not_waited_for():
    from corpora import loaded, make_pipeline

    pipe = make_pipeline("counts", "multinomial").fit(["tideway rent", "win prize"], ["ok", "scam"])
    with FeatureWorker(loaded(pipe).featurizer) as worker:
        os.kill(worker._process.pid, signal.SIGKILL)
        worker._process.join()
        with pytest.raises(NbledgerError, match=r"stopped unexpectedly \(exit code -9\)"):
            worker.submit(["tideway rent"])
            worker.result()


def test_the_ledger_is_the_same_with_and_without_the_helper(tmp_path, monkeypatch):
    import pandas as pd
    from dataclasses import replace
    from pathlib import Path

    from corpora import loaded, make_pipeline

    corpus = Path(__file__).resolve().parent.parent / "demo_corpus" / "messages.csv"
    frame = pd.read_csv(corpus, dtype=str, keep_default_na=False)
    model = replace(loaded(make_pipeline("counts", "multinomial").fit(frame.text, frame.label), normal_class="ok"),
                    sha256="e" * 64)
    frame.iloc[:500].to_csv(tmp_path / "in.csv", index=False)
    monkeypatch.setattr(feature_worker, "can_fork", lambda: True)
    forked = []
    monkeypatch.setattr(feature_worker, "FeatureWorker", lambda f: forked.append(1) or FeatureWorker(f))
    write_ledger(model, [tmp_path / "in.csv"], "text", tmp_path / "with.parquet", id_col="id", chunk_rows=60)
    write_ledger(model, [tmp_path / "in.csv"], "text", tmp_path / "without.parquet", id_col="id", chunk_rows=60,
                 helper=False)
    assert forked == [1]
    assert pq.read_table(tmp_path / "with.parquet").equals(pq.read_table(tmp_path / "without.parquet"))
