"""The model fingerprint (issue 20, item 4): equal for two trainings alike, different when a decision differs."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
from sklearn.feature_extraction.text import CountVectorizer, TfidfVectorizer
from sklearn.naive_bayes import MultinomialNB
from sklearn.pipeline import make_pipeline

from benchmarks import mailcorpus
from explain.model.fingerprint import of_pipeline
from explain.model.loading import load_model
from tests.clirun import nbledger


@pytest.fixture(scope="module")
def corpus_csv(tmp_path_factory):
    try:
        corpus = mailcorpus.load(view="body")
    except mailcorpus.CorpusUnavailable as exc:
        pytest.skip(f"public mail corpus unavailable (no ../shared copy and npm could not fetch it): {exc}")
    folder = tmp_path_factory.mktemp("fingerprint")
    path = folder / "corpus.csv"
    pd.DataFrame({"id": corpus.ids, "text": corpus.texts, "label": corpus.labels}).to_csv(path, index=False)
    return path


def _train(capsys, data, out, *options):
    outcome = nbledger(capsys, "train", data, "--text-col", "text", "--label-col", "label",
                       "--normal-class", "ham", "--holdout", "0.2", "--seed", "3", "--out", out, *options)
    assert outcome.code == 0, outcome.err
    return json.loads(out.with_name(out.stem + ".card.json").read_text(encoding="utf-8"))["model"]


@pytest.mark.mailcorpus
def test_two_trainings_alike_share_a_fingerprint_and_another_alpha_does_not(corpus_csv, capsys):
    folder = corpus_csv.parent
    first = _train(capsys, corpus_csv, folder / "a.skops")
    second = _train(capsys, corpus_csv, folder / "b.skops")
    other = _train(capsys, corpus_csv, folder / "c.skops", "--alpha", "0.5")
    # The finding: the file's SHA-256 differs between two identical trainings (skops stores object ids)
    # (observed, no source); the fingerprint does not.
    assert first["fingerprint"] == second["fingerprint"]
    assert other["fingerprint"] != first["fingerprint"]
    # The card's fingerprint is the one a loaded model shows.
    assert load_model(folder / "a.skops").fingerprint == first["fingerprint"]
    assert load_model(folder / "b.skops", normal_class="spam").fingerprint == first["fingerprint"]
    compared = nbledger(capsys, "compare", folder / "a.skops", folder / "b.skops")
    assert compared.code == 0 and "decide alike (equal fingerprints)" in " ".join(compared.out.split())


TEXTS = ["pay the fee now", "tea at the harbour", "fee fee pay", "harbour tools to lend", "the workshop at 7"]
LABELS = ["scam", "ok", "scam", "ok", "ok"]


def test_a_vocabulary_stored_in_another_order_decides_alike_and_has_the_same_fingerprint():
    fitted = make_pipeline(CountVectorizer(), MultinomialNB()).fit(TEXTS, LABELS)
    vocabulary = fitted[0].get_feature_names_out().tolist()
    shuffled = list(reversed(vocabulary))
    other = make_pipeline(CountVectorizer(vocabulary=shuffled), MultinomialNB()).fit(TEXTS, LABELS)
    probe = ["pay the harbour fee", "tools at 7"]
    # scikit-learn's own scores agree (the check that the two decide alike, independent of ours).
    np.testing.assert_allclose(fitted.predict_log_proba(probe), other.predict_log_proba(probe), rtol=1e-12)
    assert of_pipeline(fitted, None) == of_pipeline(other, None)


@pytest.mark.parametrize("change", [
    lambda: make_pipeline(CountVectorizer(lowercase=False), MultinomialNB()),
    lambda: make_pipeline(CountVectorizer(binary=True), MultinomialNB()),
    lambda: make_pipeline(TfidfVectorizer(), MultinomialNB()),
    lambda: make_pipeline(CountVectorizer(), MultinomialNB(fit_prior=False)),
])
def test_a_setting_that_changes_scores_changes_the_fingerprint(change):
    base = of_pipeline(make_pipeline(CountVectorizer(), MultinomialNB()).fit(TEXTS, LABELS), None)
    assert of_pipeline(change().fit(TEXTS, LABELS), None) != base


def test_the_card_s_text_view_and_normal_class_are_part_of_it():
    fitted = make_pipeline(CountVectorizer(), MultinomialNB()).fit(TEXTS, LABELS)
    body = {"settings": {"text_view": "body", "normal_class": "ok"}}
    assert of_pipeline(fitted, body) == of_pipeline(fitted, json.loads(json.dumps(body)))
    assert of_pipeline(fitted, {"settings": {"text_view": "subject+body", "normal_class": "ok"}}) != of_pipeline(fitted, body)
    assert of_pipeline(fitted, {"settings": {"text_view": "body", "normal_class": "scam"}}) != of_pipeline(fitted, body)
