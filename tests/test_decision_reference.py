"""The one P(flag) function and exact thresholds, against scipy and scikit-learn.

References: ``scipy.special.expit`` (the logistic function) and ``scipy.special.logsumexp``;
scikit-learn's ``predict_joint_log_proba`` and ``predict_proba`` (``sklearn.naive_bayes``).
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from scipy.special import expit, logsumexp

from clirun import nbledger
from corpora import loaded, make_pipeline
from explain.analysis.ledger_rows import ledger_rows
from explain.model.decision import DecisionRule, check_threshold, flag_probability
from explain.errors import NbledgerError


def test_flag_probability_equals_scipy_expit_bit_for_bit():
    """10^6 random log-odds in [-800, 800]: the same 64 bits as scipy.special.expit (reference: scipy)."""
    x = np.random.default_rng(17).uniform(-800.0, 800.0, 1_000_000)
    ours = flag_probability(x)
    assert ours.dtype == np.float64
    assert np.array_equal(ours.view(np.int64), expit(x).view(np.int64))


TEXTS = ["pay the parcel fee now link", "tea at the workshop thanks", "solar window offer call now",
         "parcel fee unpaid pay today", "borrow the ladder thanks", "window cleaning offer"]
LABELS = ["scam", "ok", "advert", "scam", "ok", "advert"]


def test_ledger_rows_flag_probability_is_scikit_learns():
    """P(flag) of the batch rows: 1 - predict_proba[normal] to rounding, expit of the flag log-odds to the bit."""
    pipeline = make_pipeline("counts", "multinomial").fit(TEXTS, LABELS)
    model = loaded(pipeline, normal_class="ok")
    rule = DecisionRule.for_view(model.view)
    texts = ["fee fee parcel offer", "thanks tea", "window offer now link", "the"]
    rows, _ = ledger_rows(model, texts, np.arange(len(texts)), rule)
    normal = list(pipeline.classes_).index("ok")
    assert np.allclose(rows.flag_probability, 1 - pipeline.predict_proba(texts)[:, normal], rtol=1e-12, atol=1e-15)
    jll = pipeline[-1].predict_joint_log_proba(pipeline[:-1].transform(texts))
    flagged = [c for c in range(3) if c != normal]
    reference = expit(logsumexp(jll[:, flagged], axis=1) - jll[:, normal])
    assert np.allclose(rows.flag_probability, reference, rtol=1e-12, atol=0)


@pytest.mark.parametrize("threshold, log_odds", [(1.5, None), (-0.1, None), (float("nan"), None), (None, float("nan")),
                                                 (0.5, 0.0)])
def test_threshold_is_checked_in_one_place(threshold, log_odds):
    with pytest.raises(NbledgerError):
        check_threshold(threshold, log_odds)
    with pytest.raises(NbledgerError):
        DecisionRule(2, 0, threshold, log_odds)


def test_ledger_threshold_log_odds_flags_exactly_by_logsumexp(tmp_path, capsys):
    """``ledger --threshold-log-odds L``: flagged exactly when logsumexp(jll[flagged]) - jll[normal] >= L.

    Reference: the model file's own pipeline, scored by scikit-learn (``predict_joint_log_proba``),
    and ``scipy.special.logsumexp``.
    """
    import skops.io as sio

    train = tmp_path / "train.csv"
    rows = [(t, l) for t, l in zip(TEXTS * 3, LABELS * 3)]
    train.write_text("text,label\n" + "".join(f"{t},{l}\n" for t, l in rows))
    model = tmp_path / "m.skops"
    assert nbledger(capsys, "train", train, "--text-col", "text", "--label-col", "label", "--normal-class", "ok",
                    "--out", model).code == 0
    pipeline = sio.load(model, trusted=sio.get_untrusted_types(file=model))
    texts = ["pay fee now", "offer window", "tea thanks", "fee offer tea", "ladder link fee", "solar the now",
             "parcel thanks offer", "workshop fee", "call now", "the the fee"]
    data = tmp_path / "data.jsonl"
    data.write_text("".join(json.dumps({"text": t}) + "\n" for t in texts))
    classes = list(pipeline.classes_)
    normal = classes.index("ok")
    flagged = [c for c in range(len(classes)) if c != normal]
    jll = pipeline[-1].predict_joint_log_proba(pipeline[:-1].transform(texts))
    flag_lo = logsumexp(jll[:, flagged], axis=1) - jll[:, normal]
    ranked = np.sort(flag_lo)
    level = float((ranked[4] + ranked[5]) / 2)  # between two messages: rounding cannot move either
    out = tmp_path / "ledger.jsonl"
    result = nbledger(capsys, "ledger", model, data, "--text-col", "text", "--out", out,
                      "--threshold-log-odds", repr(level))
    assert result.code == 0, result.err
    got = [json.loads(line) for line in out.read_text().splitlines()]
    assert [r["flagged"] for r in got] == list(flag_lo >= level)
    assert sum(r["flagged"] for r in got) >= 1 and not all(r["flagged"] for r in got)
    both = nbledger(capsys, "ledger", model, data, "--text-col", "text", "--out", tmp_path / "x.jsonl",
                    "--threshold", "0.5", "--threshold-log-odds", "0")
    assert "not both" in both.one_error_line()
