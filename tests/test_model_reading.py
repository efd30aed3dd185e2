"""A model never makes nbledger read a file: text steps that read input are refused, --trust cannot open them.

scikit-learn documents ``input='filename'`` / ``'file'`` for its text steps: the
items passed to ``transform`` are then paths (or files) whose contents are read.
"""

from __future__ import annotations

from pathlib import Path

import pytest
import skops.io as sio
from sklearn.feature_extraction.text import CountVectorizer, TfidfVectorizer
from sklearn.naive_bayes import MultinomialNB
from sklearn.pipeline import make_pipeline

from clirun import nbledger

SECRET = "zanzibar quokka secretword"


@pytest.fixture
def reading_model(tmp_path):
    files = []
    for i, (text, label) in enumerate([("pay the fee", "scam"), ("tea at noon", "ok"), ("fee now", "scam"), ("tea party", "ok")]):
        path = tmp_path / f"train{i}.txt"
        path.write_text(text)
        files.append((str(path), label))
    secret = tmp_path / "secret.txt"
    secret.write_text(f"{SECRET} fee fee fee")
    models = {}
    for kind, vectorizer in (("count", CountVectorizer(input="filename")), ("tfidf", TfidfVectorizer(input="file"))):
        pipeline = make_pipeline(vectorizer, MultinomialNB())
        if kind == "count":
            pipeline.fit([f for f, _ in files], [l for _, l in files])
        else:
            handles = [open(f, "rb") for f, _ in files]
            pipeline.fit(handles, [l for _, l in files])
            for h in handles:
                h.close()
        if kind == "count":  # scikit-learn itself reads the file named as the message
            assert pipeline[0].transform([str(secret)]).sum() == 3  # "fee" three times; the other words unknown
        models[kind] = tmp_path / f"{kind}.skops"
        sio.dump(pipeline, models[kind])
    return models, secret


@pytest.mark.parametrize("kind", ["count", "tfidf"])
@pytest.mark.parametrize("trust", [[], ["x"], ["sklearn.feature_extraction.text.CountVectorizer"]])
def test_a_model_that_reads_files_is_refused_with_or_without_trust(reading_model, capsys, kind, trust):
    models, secret = reading_model
    args = [a for t in trust for a in ("--trust", t)]
    result = nbledger(capsys, "why", models[kind], str(secret), "--no-cache", *args)
    line = result.one_error_line()
    assert "input=" in line and "never loads" in line, line
    for word in SECRET.split():
        assert word not in result.out and word not in result.err
