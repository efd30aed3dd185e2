"""The Dask engine gives the local engine's rows, on a LocalCluster of two worker processes."""

from __future__ import annotations

import socket
import time
from pathlib import Path

import pandas as pd
import pyarrow.parquet as pq
import pytest

pytest.importorskip("distributed", reason="the dask extra is not installed")

from clirun import nbledger  # noqa: E402
import skops.io as sio  # noqa: E402
from corpora import make_pipeline  # noqa: E402
from explain.model.loading import load_model  # noqa: E402
from explain.runs.ledger_dask import write_ledger_dask  # noqa: E402
from explain.runs.ledger_local import write_ledger  # noqa: E402

CORPUS = Path(__file__).resolve().parent.parent / "demo_corpus" / "messages.csv"


@pytest.fixture(scope="module")
def setup(tmp_path_factory):
    frame = pd.read_csv(CORPUS, dtype=str, keep_default_na=False)
    pipe = make_pipeline("counts", "multinomial").fit(frame.text, frame.label)
    folder = tmp_path_factory.mktemp("dask")
    sio.dump(pipe, folder / "m.skops")
    model = load_model(folder / "m.skops", normal_class="ok")
    small = frame.iloc[:900]
    # Several files and row groups, so that two workers share the partitions.
    small.iloc[:300].to_csv(folder / "a.csv", index=False)
    small.iloc[300:500].to_json(folder / "b.jsonl", orient="records", lines=True)
    small.iloc[500:].to_parquet(folder / "c.parquet", row_group_size=150)
    return model, [folder / "a.csv", folder / "b.jsonl", folder / "c.parquet"], folder


@pytest.fixture(scope="module")
def cluster():
    """Two worker processes, shared by the tests that give a scheduler address."""
    import logging

    from distributed import LocalCluster

    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None,
                      silence_logs=logging.ERROR) as running:
        yield running


def sorted_by_id(table):
    return table.sort_by("id")


@pytest.mark.parametrize("id_col", [None, "id"])
def test_dask_rows_equal_local_rows(setup, cluster, tmp_path, id_col):
    model, inputs, _ = setup
    options = dict(id_col=id_col, top_k=4, chunk_rows=64, summary=tmp_path / "local.csv")
    local = write_ledger(model, inputs, "text", tmp_path / "local.parquet", **options)
    options["summary"] = tmp_path / "dask.csv"
    remote = write_ledger_dask(model, inputs, "text", tmp_path / "dataset", scheduler=cluster.scheduler_address, **options)
    want = pq.read_table(tmp_path / "local.parquet")
    got = pq.read_table(tmp_path / "dataset")
    assert len(list((tmp_path / "dataset").glob("part.*.parquet"))) == 5  # two whole files, three row groups
    assert sorted_by_id(got).equals(sorted_by_id(want))
    assert (remote.messages, remote.flagged, remote.empty) == (local.messages, local.flagged, local.empty)
    a, b = pd.read_csv(tmp_path / "local.csv", keep_default_na=False), pd.read_csv(tmp_path / "dask.csv", keep_default_na=False)
    key = ["flagged_class", "token"]
    a, b = a.sort_values(key).reset_index(drop=True), b.sort_values(key).reset_index(drop=True)
    pd.testing.assert_frame_equal(a[key + ["messages", "tipped"]], b[key + ["messages", "tipped"]])
    # Sums over different chunkings agree to rounding.
    pd.testing.assert_series_equal(a.total_evidence, b.total_evidence, rtol=1e-9)


def test_dask_single_file_keeps_input_order(capsys, setup, tmp_path):
    """From the command line, with the engine's own local cluster of two worker processes."""
    model, inputs, _ = setup
    write_ledger(model, inputs, "text", tmp_path / "local.parquet", chunk_rows=100)
    r = nbledger(capsys, "ledger", model.path, *inputs, "--text-col", "text", "--out", tmp_path / "dask.parquet",
                 "--engine", "dask", "--workers", "2", "--chunk-rows", "100", "--normal-class", "ok")
    assert r.code == 0, r.err
    assert r.out.startswith("ledger: 900 messages in ")
    assert pq.read_table(tmp_path / "dask.parquet").equals(pq.read_table(tmp_path / "local.parquet"))


def test_a_scheduler_that_does_not_answer_ends_in_one_line_within_the_timeout(capsys, setup, tmp_path):
    model, inputs, folder = setup
    with socket.socket() as s:  # a port nobody listens on
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    start = time.monotonic()
    r = nbledger(capsys, "ledger", model.path, inputs[0], "--text-col", "text", "--out", tmp_path / "l.parquet",
                 "--engine", "dask", "--scheduler", f"tcp://127.0.0.1:{port}", "--connect-timeout", "2")
    assert time.monotonic() - start < 30
    assert f"no Dask scheduler answered at tcp://127.0.0.1:{port} within 2 s" in r.one_error_line()
    assert not (tmp_path / "l.parquet").exists()


def test_a_bad_row_on_a_worker_ends_as_the_same_one_line_error(setup, cluster, tmp_path):
    from explain.errors import NbledgerError

    model, inputs, _ = setup
    lines = inputs[0].read_text().splitlines()
    lines.insert(100, 'tc-x,2026-01-01T00:00:00Z,"private words",ok,surplus')
    (tmp_path / "bad.csv").write_text("\n".join(lines) + "\n")
    with pytest.raises(NbledgerError, match="bad.csv: data row 100 has 5 fields, the header has 4"):
        write_ledger_dask(model, [inputs[2], tmp_path / "bad.csv"], "text", tmp_path / "l.parquet",
                          scheduler=cluster.scheduler_address, id_col="id")
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(("l.parquet", ".l.parquet"))]
