"""Numbers no trained naive Bayes filter has are refused with one line (common practice, no source:
counts of messages and tokens are finite and non-negative; scikit-learn's own fit never yields them)."""

from __future__ import annotations

import numpy as np
import pytest
import skops.io as sio
from sklearn.feature_extraction.text import CountVectorizer
from sklearn.naive_bayes import BernoulliNB, MultinomialNB
from sklearn.pipeline import make_pipeline

from clirun import nbledger

TEXTS = ["pay the parcel fee", "fee link now", "tea at the workshop", "kids tea party", "sofa for sale", "sofa deal"]
LABELS = ["scam", "scam", "ok", "ok", "advert", "advert"]


def _nan_count(clf):
    clf.feature_count_[0, 0] = np.nan


def _negative_count(clf):
    clf.feature_count_[1, 2] = -3.0


def _infinite_class_count(clf):
    clf.class_count_[0] = np.inf


def _negative_class_count(clf):
    clf.class_count_[2] = -1.0


def _empty_class(clf):
    clf.class_count_[1] = 0.0


def _overflowing_sum(clf):
    clf.feature_log_prob_[0, :] = -1e300  # finite, but their sum overflows float64


CASES = {
    "nan feature count": (_nan_count, "not finite"),
    "negative feature count": (_negative_count, "negative"),
    "infinite class count": (_infinite_class_count, "not finite"),
    "negative class count": (_negative_class_count, "negative"),
    "class with no messages": (_empty_class, "no training messages"),
    "overflowing sum": (_overflowing_sum, "overflow"),
}


@pytest.mark.parametrize("case", sorted(CASES))
@pytest.mark.parametrize("nb", [MultinomialNB, BernoulliNB])
def test_impossible_numbers_are_refused_in_one_line(tmp_path, capsys, case, nb):
    change, expected = CASES[case]
    pipeline = make_pipeline(CountVectorizer(), nb()).fit(TEXTS, LABELS)
    change(pipeline[-1])
    path = tmp_path / "m.skops"
    sio.dump(pipeline, path)
    for args in (("vocab", path), ("why", path, "pay the fee")):
        result = nbledger(capsys, *args, "--no-cache")
        line = result.one_error_line()
        assert expected in line, line
        assert "warning" not in result.err, result.err


def test_a_sound_model_passes(tmp_path, capsys):
    path = tmp_path / "m.skops"
    sio.dump(make_pipeline(CountVectorizer(), MultinomialNB()).fit(TEXTS, LABELS), path)
    assert nbledger(capsys, "vocab", path, "--no-cache").code == 0
