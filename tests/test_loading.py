"""Loading model files that may be hostile."""

from __future__ import annotations

import json
import os
import pickle

import joblib
import numpy as np
import pytest
import skops.io as sio
from sklearn.base import BaseEstimator, TransformerMixin
from sklearn.feature_extraction.text import CountVectorizer
from sklearn.linear_model import LogisticRegression
from sklearn.naive_bayes import MultinomialNB
from sklearn.pipeline import make_pipeline

from clirun import nbledger
from explain.errors import NbledgerError
from explain.model.loading import load_model
from explain.model.model_files import card_path_for

TEXTS = ["pay the parcel fee", "fee link now", "tea at the workshop", "kids tea party"]
LABELS = ["scam", "scam", "ok", "ok"]


class Sentinel:
    """A pickle payload that creates a file when unpickled (what a hostile file would do)."""

    def __init__(self, path):
        self.path = path

    def __reduce__(self):
        return (open, (self.path, "w"))


class Shout(BaseEstimator, TransformerMixin):
    """A custom transformer: skops does not trust it by default."""

    def fit(self, X, y=None):
        return self

    def transform(self, X):
        return [t.upper() for t in X]


def test_pickle_is_refused_before_it_is_opened(tmp_path, capsys):
    sentinel = tmp_path / "sentinel"
    model = tmp_path / "model.pkl"
    model.write_bytes(pickle.dumps(Sentinel(str(sentinel))))
    with pytest.raises(NbledgerError, match="--allow-pickle"):
        load_model(model)
    assert not sentinel.exists()
    line = nbledger(capsys, "why", model, "fee").one_error_line()
    assert "pickle" in line and not sentinel.exists()
    # Even under another name: the first bytes give it away.
    disguised = tmp_path / "model.bin"
    disguised.write_bytes(model.read_bytes())
    with pytest.raises(NbledgerError, match="pickle"):
        load_model(disguised)
    assert not sentinel.exists()


def test_allowed_pickle_loads_and_warns(tmp_path, capsys):
    pipe = make_pipeline(CountVectorizer(), MultinomialNB()).fit(TEXTS, LABELS)
    path = tmp_path / "model.joblib"
    joblib.dump(pipe, path)
    warnings = []
    model = load_model(path, allow_pickle=True, on_warning=warnings.append)
    assert list(model.classes) == ["ok", "scam"] and "runs any code" in warnings[0]
    result = nbledger(capsys, "why", path, "parcel fee", "--allow-pickle")
    assert result.code == 0 and "warning:" in result.err and "decision: scam" in result.out


def test_untrusted_skops_type_is_refused_then_accepted_by_name(tmp_path):
    pipe = make_pipeline(Shout(), CountVectorizer(), MultinomialNB()).fit(TEXTS, LABELS)
    path = tmp_path / "model.skops"
    sio.dump(pipe, path)
    with pytest.raises(NbledgerError) as err:
        load_model(path)
    untrusted = sio.get_untrusted_types(file=path)
    assert untrusted and all(t in str(err.value) for t in untrusted)
    # Trusted by name, it loads, and is then refused as a pipeline we do not support.
    with pytest.raises(NbledgerError, match="found Shout -> CountVectorizer -> MultinomialNB"):
        load_model(path, trust=tuple(untrusted))


@pytest.mark.parametrize(
    "content, expected",
    [
        (b"", "not a model file"),
        (b"id,text\n1,hello\n", "not a model file"),
        (b"PK\x03\x04 truncated", "not a readable skops file"),
    ],
)
def test_files_that_are_not_models(tmp_path, content, expected):
    path = tmp_path / "model.skops"
    path.write_bytes(content)
    with pytest.raises(NbledgerError, match=expected):
        load_model(path)


def test_truncated_skops_file(tmp_path, capsys):
    pipe = make_pipeline(CountVectorizer(), MultinomialNB()).fit(TEXTS, LABELS)
    path = tmp_path / "model.skops"
    sio.dump(pipe, path)
    path.write_bytes(path.read_bytes()[: os.path.getsize(path) // 2])
    assert "skops" in nbledger(capsys, "why", path, "fee").one_error_line()


def test_a_classifier_that_is_not_naive_bayes(tmp_path, capsys):
    pipe = make_pipeline(CountVectorizer(), LogisticRegression()).fit(TEXTS, LABELS)
    path = tmp_path / "model.skops"
    sio.dump(pipe, path, )
    untrusted = sio.get_untrusted_types(file=path)
    args = [a for t in untrusted for a in ("--trust", t)]
    line = nbledger(capsys, "why", path, "fee", *args).one_error_line()
    assert "LogisticRegression" in line and "MultinomialNB" in line


def test_separate_vectorizer_and_classifier_files(tmp_path):
    vec = CountVectorizer().fit(TEXTS)
    clf = MultinomialNB().fit(vec.transform(TEXTS), LABELS)
    sio.dump(vec, tmp_path / "vec.skops")
    sio.dump(clf, tmp_path / "clf.skops")
    with pytest.raises(NbledgerError, match="vectorizer"):
        load_model(tmp_path / "clf.skops")
    model = load_model(tmp_path / "clf.skops", vectorizer_path=tmp_path / "vec.skops")
    np.testing.assert_allclose(
        model.view.joint_log_likelihood(model.featurizer.transform(TEXTS)),
        clf.predict_joint_log_proba(vec.transform(TEXTS)),
        rtol=1e-12,
    )


def test_train_writes_a_card_the_loader_reads(tmp_path, capsys):
    data = tmp_path / "train.csv"
    data.write_text("id,body,kind\n" + "".join(f"{i},{t},{l}\n" for i, (t, l) in enumerate(zip(TEXTS * 3, LABELS * 3))))
    out = tmp_path / "filter.skops"
    result = nbledger(capsys, "train", data, "--text-col", "body", "--label-col", "kind", "--out", out,
                      "--normal-class", "ok", "--holdout", "0.5", "--seed", "3")
    assert result.code == 0, result.err
    card = json.loads(card_path_for(out).read_text())
    import hashlib

    assert card["model"]["sha256"] == hashlib.sha256(out.read_bytes()).hexdigest()
    assert card["data"]["sha256"] == hashlib.sha256(data.read_bytes()).hexdigest()
    assert card["data"]["rows_per_class"] == {"ok": 6, "scam": 6}
    assert card["settings"]["normal_class"] == "ok" and card["holdout"]["rows"] == 6
    assert 0 <= card["holdout"]["accuracy"] <= 1
    model = load_model(out)
    assert model.view.normal_class == "ok"
    # A card that does not match the model file is ignored, with a warning.
    card["model"]["sha256"] = "0" * 64
    card_path_for(out).write_text(json.dumps(card))
    warnings = []
    assert load_model(out, on_warning=warnings.append).view.normal_class is None
    assert "does not match" in warnings[0]
