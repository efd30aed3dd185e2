"""The ledger of many messages: the same figures as ``why``, whatever the chunking."""

from __future__ import annotations

import json
import math
from dataclasses import replace

import numpy as np
import pandas as pd
import pyarrow.parquet as pq
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from corpora import cases, loaded, make_pipeline, messages
from explain.analysis.drivers import flag_margin
from explain.analysis.evidence import explain_message
from explain.analysis.ledger import ledger_of
from explain.analysis.ledger_rows import ledger_rows
from explain.model.decision import DecisionRule
from explain.present.ledger_files import ledger_table
from explain.runs.ledger_local import write_ledger

PROPERTY = settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
TOP = 4


def ledger_dicts(model, texts, threshold=None, top=TOP):
    rule = DecisionRule.for_view(model.view, threshold)
    rows, _ = ledger_rows(model, texts, [str(i) for i in range(len(texts))], rule, top)
    return ledger_table(rows, "sha", fingerprint="fp").to_pylist(), rule


def check_rows_equal_why(model, texts, threshold):
    got, rule = ledger_dicts(model, texts, threshold)
    close = dict(rel_tol=1e-12, abs_tol=1e-12)
    for text, row in zip(texts, got):
        if not text.strip():
            assert row["flip_size"] is None and row["top_for"] == [] and row["top_against"] == []
            continue
        e = explain_message(model, text, threshold)
        assert (row["decided"], row["predicted"], row["runner_up"]) == (e.decision, e.predicted, e.runner_up)
        assert math.isclose(row["probability"], float(e.probabilities[list(e.classes).index(e.predicted)]), **close)
        assert math.isclose(row["log_odds"], e.log_odds, **close)
        if e.flag_probability is None:
            assert row["flag_probability"] is None and row["margin"] is None and row["flagged"] is None
        else:
            assert math.isclose(row["flag_probability"], e.flag_probability, **close)
            assert row["flagged"] == (e.decision != model.view.classes[rule.normal_index])
            assert math.isclose(row["margin"], float(flag_margin(rule, e.jll[None, :])[0]), **close)
        # The top tokens are the entries of why's ledger (its comparison: credit_class against debit_class).
        book = ledger_of(model, text, threshold)
        assert (row["credit_class"], row["debit_class"]) == (book.credit_class, book.debit_class)
        assert row["text_view"] == "raw"
        own = {x.token: x.amount for x in book.entries}
        if not book.exact:
            # A threshold over several flagged classes: the ledger's entries are changes in order; the rows
            # give each token's exact share of credit_class against debit_class instead.
            c, d = (list(book.classes).index(k) for k in (book.credit_class, book.debit_class))
            W = model.view.weights
            own = {t.token: t.value * (W[c, t.column] - W[d, t.column]) for t in e.tokens}
        amounts = sorted(own.values())
        for key, want in (("top_for", [a for a in amounts[::-1] if a > 0][:TOP]),
                          ("top_against", [a for a in amounts if a < 0][:TOP])):
            assert len(row[key]) == len(want)
            # Tokens of equal evidence may come in either order; each listed token carries its own entry.
            np.testing.assert_allclose(row[key + "_evidence"], want, rtol=1e-12, atol=1e-12)
            for token, value in zip(row[key], row[key + "_evidence"]):
                assert math.isclose(own[token], value, **close)
        if e.flip.exact and e.flip.removals:
            assert row["flip_size"] == e.flip.size
        else:
            assert row["flip_size"] is None
        assert row["model_sha256"] == "sha" and row["model_fingerprint"] == "fp"


@PROPERTY
@given(case=cases(), texts=st.lists(messages, min_size=1, max_size=8))
def test_rows_equal_why_with_the_most_probable_class(case, texts):
    check_rows_equal_why(case.model, texts, None)


@PROPERTY
@given(case=cases(n_classes=2, kind="counts"), texts=st.lists(messages, min_size=1, max_size=8), t=st.floats(0.02, 0.98))
def test_rows_equal_why_with_a_threshold_on_two_classes(case, texts, t):
    check_rows_equal_why(case.model, texts, t)


@PROPERTY
@given(case=cases(n_classes=3, kind="binary"), texts=st.lists(messages, min_size=1, max_size=8), t=st.floats(0.05, 0.95))
def test_rows_equal_why_with_a_threshold_over_several_flagged_classes(case, texts, t):
    model = replace(case.model, view=case.model.view.with_normal_class("class0"))
    check_rows_equal_why(model, texts, t)


@pytest.fixture(scope="module")
def tideway():
    """A filter trained on the demo corpus, and that corpus as a CSV."""
    from pathlib import Path

    path = Path(__file__).resolve().parent.parent / "demo_corpus" / "messages.csv"
    frame = pd.read_csv(path, dtype=str, keep_default_na=False)
    pipe = make_pipeline("counts", "multinomial").fit(frame.text, frame.label)
    model = replace(loaded(pipe, normal_class="ok"), sha256="f" * 64)
    return model, path, frame


@pytest.mark.parametrize("chunk", [1, 7, 1000, 10**6])
def test_chunk_size_does_not_change_the_output(tideway, tmp_path, chunk):
    model, path, frame = tideway
    small = tmp_path / "small.csv"
    frame.iloc[:300].to_csv(small, index=False)
    write_ledger(model, [small], "text", tmp_path / "one.parquet", id_col="id", chunk_rows=300)
    write_ledger(model, [small], "text", tmp_path / "other.parquet", id_col="id", chunk_rows=chunk)
    assert pq.read_table(tmp_path / "one.parquet").equals(pq.read_table(tmp_path / "other.parquet"))


def test_rows_come_out_in_input_order_across_files_and_formats(tideway, tmp_path):
    model, _, frame = tideway
    part = frame.iloc[:50]
    part.iloc[:20].to_csv(tmp_path / "a.csv.gz", index=False)
    part.iloc[20:35].to_json(tmp_path / "b.jsonl", orient="records", lines=True)
    part.iloc[35:].to_parquet(tmp_path / "c.parquet")
    done = write_ledger(model, [tmp_path / "a.csv.gz", tmp_path / "b.jsonl", tmp_path / "c.parquet"], "text", tmp_path / "l.parquet", chunk_rows=6)
    table = pq.read_table(tmp_path / "l.parquet")
    assert table.column("id").to_pylist() == [str(i) for i in range(1, 51)]
    assert done.messages == 50
    whole, _ = ledger_dicts(model, part.text.tolist(), top=5)
    assert [r["log_odds"] for r in table.to_pylist()] == [r["log_odds"] for r in whole]


def test_jsonl_and_csv_outputs_hold_the_parquet_values(tideway, tmp_path):
    model, _, frame = tideway
    small = tmp_path / "small.csv"
    frame.iloc[:40].to_csv(small, index=False)
    for name in ("l.parquet", "l.jsonl", "l.csv.gz"):
        write_ledger(model, [small], "text", tmp_path / name, id_col="id", top_k=3)
    want = pq.read_table(tmp_path / "l.parquet").to_pylist()
    as_json = [json.loads(line) for line in (tmp_path / "l.jsonl").read_text("utf-8").splitlines()]
    as_csv = pd.read_csv(tmp_path / "l.csv.gz", dtype={"id": str}, keep_default_na=False).to_dict("records")
    for w, j, c in zip(want, as_json, as_csv):
        assert j == w
        pairs = [p.rsplit(":", 1) for p in c["top_against"].split(";")] if c["top_against"] else []
        assert [t for t, _ in pairs] == w["top_against"]
        assert [float(v) for _, v in pairs] == w["top_against_evidence"]  # repr round-trips exactly
        assert c["log_odds"] == w["log_odds"] and c["decided"] == w["decided"]


@pytest.mark.parametrize("threshold", [None, 0.7])
def test_flag_driver_totals_equal_sums_over_the_ledger(tmp_path, threshold):
    texts = ["pay the parcel fee now", "fee link fee", "tea at the workshop", "kids tea club", "parcel link now", "drill ladder"]
    pipe = make_pipeline("counts", "multinomial").fit(texts, ["scam", "scam", "ok", "ok", "scam", "ok"])
    model = loaded(pipe, normal_class="ok")
    stream = pd.DataFrame({"text": [" ".join(np.random.default_rng(i).choice(
        "pay the parcel fee now link tea at workshop kids club drill ladder".split(), 6)) for i in range(400)]})
    stream.to_csv(tmp_path / "in.csv", index=False)
    n_tokens = len(model.view.tokens)
    done = write_ledger(model, [tmp_path / "in.csv"], "text", tmp_path / "l.parquet", top_k=n_tokens,
                        threshold=threshold, summary=tmp_path / "d.csv", chunk_rows=37)
    rows = [r for r in pq.read_table(tmp_path / "l.parquet").to_pylist() if r["flagged"]]
    drivers = pd.read_csv(tmp_path / "d.csv", keep_default_na=False)
    assert done.flagged == {"scam": len(rows)}
    for d in drivers.itertuples():
        evidence = [dict(zip(r["top_for"] + r["top_against"], r["top_for_evidence"] + r["top_against_evidence"])).get(d.token)
                    for r in rows]
        margins = [r["margin"] for r, v in zip(rows, evidence) if v is not None]
        evidence = [v for v in evidence if v is not None]
        # Two classes, the flagged class predicted: flag evidence is the ledger's evidence.
        assert d.messages == len(evidence)
        assert math.isclose(d.total_evidence, sum(evidence), rel_tol=1e-9, abs_tol=1e-9)
        assert d.tipped == sum(v > m for v, m in zip(evidence, margins))
        assert math.isclose(d.share_of_flagged, d.messages / len(rows))
    assert set(drivers.token) == {t for r in rows for t in r["top_for"] + r["top_against"]}


@PROPERTY
@given(
    rows=st.lists(st.integers(0, 30), max_size=300).map(sorted),
    data=st.data(),
    non_negative=st.booleans(),
    wide=st.booleans(),
)
def test_row_then_value_order_equals_a_stable_lexsort(rows, data, non_negative, wide):
    from explain.analysis.batch import by_row_then_value

    # Few distinct values, so that ties are common; ``wide`` row numbers take the int64-overflow path.
    values = np.array(data.draw(st.lists(st.sampled_from([-1.5, 0.0, 0.25, 2.0, 3.5]), min_size=len(rows), max_size=len(rows))))
    rows = np.array(rows, dtype=np.int64) * (2**56 if wide else 1)
    order = np.flatnonzero(values >= 0) if non_negative else np.arange(len(values))
    want = order[np.lexsort((-values[order], rows[order]))]  # numpy's lexsort is stable
    assert np.array_equal(by_row_then_value(rows, values, non_negative), want)
