"""The reading and tokenising helper of the ledger: the same chunks and features, and it never outlives a run."""

from __future__ import annotations

import os
import signal
from dataclasses import replace
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow.parquet as pq
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import explain.model.feature_worker as feature_worker
from corpora import cases, loaded, make_pipeline, messages
from explain.errors import NbledgerError
from explain.model.feature_worker import StreamWorker, featured
from explain.runs.ledger_local import write_ledger

CORPUS = Path(__file__).resolve().parent.parent / "demo_corpus" / "messages.csv"


def same_csr(a, b) -> bool:
    return (a.shape == b.shape and np.array_equal(a.indptr, b.indptr) and np.array_equal(a.indices, b.indices)
            and np.array_equal(a.data, b.data))


class Chunk:
    def __init__(self, texts):
        self.texts = texts


@settings(max_examples=15, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(case=cases(), texts=st.lists(st.lists(messages, min_size=1, max_size=4), min_size=1, max_size=3))
def test_the_helper_computes_the_chunks_and_features_this_process_would(case, texts):
    featurizer = case.model.featurizer
    make = lambda: (Chunk(t) for t in texts)  # noqa: E731
    with StreamWorker(make, featurizer) as worker:
        got = list(worker)
    assert [c.texts for c, _ in got] == texts
    for chunk, (counts, X) in got:
        want_counts, want_X = featurizer.counts_and_features(chunk.texts)
        assert same_csr(counts, want_counts) and same_csr(X, want_X)


def small_featurizer():
    return loaded(make_pipeline("counts", "multinomial").fit(["tideway rent", "win prize"], ["ok", "scam"])).featurizer


def test_an_error_while_reading_reaches_the_caller_after_the_chunks_before_it():
    def make():
        yield Chunk(["tideway rent"])
        raise NbledgerError("in.csv: data row 2 is malformed (expected 2 columns, found 3)")

    seen = []
    with StreamWorker(make, small_featurizer()) as worker:
        with pytest.raises(NbledgerError, match="^in.csv: data row 2 is malformed"):
            for chunk, _ in worker:
                seen.append(chunk.texts)
    assert seen == [["tideway rent"]]


def test_a_defect_inside_the_helper_is_one_line():
    with StreamWorker(lambda: [Chunk([b"\xff not a text", 7])], small_featurizer()) as worker:
        with pytest.raises(RuntimeError, match="^UnicodeDecodeError: "):
            list(worker)


def test_a_helper_that_dies_is_reported_not_waited_for():
    def endless():
        while True:
            yield Chunk(["tideway rent"] * 100)

    with StreamWorker(endless, small_featurizer()) as worker:
        chunks = iter(worker)
        next(chunks)
        os.kill(worker._process.pid, signal.SIGKILL)
        with pytest.raises(NbledgerError, match=r"stopped unexpectedly \(exit code -9\)"):
            for _ in chunks:
                pass


def test_leaving_early_ends_the_helper():
    def endless():
        while True:
            yield Chunk(["tideway rent"] * 100)

    with StreamWorker(endless, small_featurizer()) as worker:
        next(iter(worker))
        process = worker._process
    assert not process.is_alive()


def test_the_ledger_is_the_same_with_and_without_the_helper(tmp_path, monkeypatch):
    frame = pd.read_csv(CORPUS, dtype=str, keep_default_na=False)
    model = replace(loaded(make_pipeline("counts", "multinomial").fit(frame.text, frame.label), normal_class="ok"),
                    sha256="e" * 64)
    frame.iloc[:500].to_csv(tmp_path / "in.csv", index=False)
    monkeypatch.setattr(feature_worker, "can_fork", lambda: True)
    forked = []
    monkeypatch.setattr(feature_worker, "StreamWorker", lambda *a: forked.append(1) or StreamWorker(*a))
    write_ledger(model, [tmp_path / "in.csv"], "text", tmp_path / "with.parquet", id_col="id", chunk_rows=60)
    write_ledger(model, [tmp_path / "in.csv"], "text", tmp_path / "without.parquet", id_col="id", chunk_rows=60,
                 helper=False)
    assert forked == [1]
    assert pq.read_table(tmp_path / "with.parquet").equals(pq.read_table(tmp_path / "without.parquet"))
    # the helper reads quarter chunks, yet the row groups stay one chunk each
    groups = [[f.metadata.row_group(i).num_rows for i in range(f.metadata.num_row_groups)]
              for f in (pq.ParquetFile(tmp_path / "with.parquet"), pq.ParquetFile(tmp_path / "without.parquet"))]
    assert groups[0] == groups[1] == [60] * 8 + [20]
