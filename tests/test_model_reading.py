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
from hostile import split_words

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
def test_a_custom_analyzer_still_needs_its_exact_type_names(tmp_path, capsys):
    pipeline = make_pipeline(CountVectorizer(analyzer=split_words), MultinomialNB()).fit(
        ["pay the fee", "tea at noon"], ["scam", "ok"]
    )
    path = tmp_path / "custom.skops"
    sio.dump(pipeline, path)
    untrusted = sio.get_untrusted_types(file=path)
    assert untrusted  # skops declares the analyzer's function untrusted
    line = nbledger(capsys, "why", path, "pay the fee", "--no-cache", "--trust", "x").one_error_line()
    assert "not trusted" in line and "--trust" in line, line
    args = [a for t in untrusted for a in ("--trust", t)]
    # A name the file does not declare is refused even beside the right ones.
    line = nbledger(capsys, "why", path, "pay the fee", "--no-cache", *args, "--trust", "x").one_error_line()
    assert "--trust x" in line and "declares no such untrusted type" in line, line
    result = nbledger(capsys, "why", path, "pay the fee", "--no-cache", *args)
    assert result.code == 0, result.err
    assert all(t in result.err for t in untrusted) and "accepted" in result.err
