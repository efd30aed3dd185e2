"""Without a model card every input is explained exactly as given (the raw text view).

A pipeline trained outside nbledger on whole raw messages of the public mail corpus (headers
included, no model card) is explained on the file's exact text: ``why --file``, ``why --data``
and ``ledger`` give scikit-learn's ``predict`` decision and ``predict_joint_log_proba``'s
log-odds, also for messages whose body-view decision differs (reference: scikit-learn).
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest

from benchmarks import mailcorpus
from clirun import nbledger
from explain.model.data_io import decode_utf8

pytestmark = pytest.mark.mailcorpus


@pytest.fixture(scope="module")
def raw_filter(tmp_path_factory):
    import skops.io as sio
    from sklearn.feature_extraction.text import CountVectorizer
    from sklearn.naive_bayes import MultinomialNB
    from sklearn.pipeline import Pipeline

    try:
        raws = mailcorpus._raw_corpus()
    except mailcorpus.CorpusUnavailable as exc:
        pytest.skip(f"public mail corpus unavailable: {exc}")
    by_group = {}
    for raw in raws:
        by_group.setdefault(raw.group, []).append(raw)
    train = by_group["easy-ham-1"][:800] + by_group["spam-1"][:300]
    texts = [decode_utf8(r.data)[0] for r in train]  # whole raw messages, headers included
    labels = [mailcorpus.label_of(r.group) for r in train]
    pipeline = Pipeline([("v", CountVectorizer(min_df=2)), ("nb", MultinomialNB())]).fit(texts, labels)
    folder = tmp_path_factory.mktemp("raw")
    model = folder / "raw.skops"
    sio.dump(pipeline, model)  # no model card: trained elsewhere
    test = by_group["hard-ham-1"][:120] + by_group["spam-2"][:120]
    test_texts = [decode_utf8(r.data)[0] for r in test]
    body = [mailcorpus.message_text(r.data, "body") for r in test]
    raw_decisions = pipeline.predict(test_texts)
    differs = [i for i in range(len(test)) if body[i].strip() and pipeline.predict([body[i]])[0] != raw_decisions[i]]
    return pipeline, model, folder, test, test_texts, differs


def reference(pipeline, text: str) -> tuple[str, float]:
    """scikit-learn's decision and the log-odds of the predicted class against the runner-up."""
    jll = pipeline[-1].predict_joint_log_proba(pipeline[:-1].transform([text]))[0]
    order = np.argsort(-jll, kind="stable")
    return str(pipeline.classes_[order[0]]), float(jll[order[0]] - jll[order[1]])


def test_some_body_view_decisions_differ(raw_filter):
    *_, differs = raw_filter
    assert differs, "the check needs messages whose body-view decision differs"


def test_why_file_explains_the_exact_text(raw_filter, capsys):
    pipeline, model, folder, test, texts, differs = raw_filter
    for i in [*differs[:2], 0]:
        path = folder / f"m{i}.eml"
        path.write_bytes(test[i].data)
        result = nbledger(capsys, "why", model, "--file", path, "--format", "json")
        assert result.code == 0, result.err
        assert "note: the message looks like e-mail" in result.err and "--text-view body" in result.err
        doc = json.loads(result.out)
        decision, log_odds = reference(pipeline, texts[i])
        assert doc["text_view"] == "raw" and doc["email"] is None
        assert doc["decision"] == doc["predicted"] == decision
        assert math.isclose(doc["log_odds"], log_odds, rel_tol=1e-9, abs_tol=1e-9)


def test_why_data_and_ledger_explain_the_exact_texts(raw_filter, capsys):
    pipeline, model, folder, test, texts, differs = raw_filter
    data = folder / "raw.jsonl"
    data.write_text("".join(json.dumps({"id": f"m{i}", "text": t}) + "\n" for i, t in enumerate(texts)))
    chosen = [*differs[:5], 1, 2]
    ids = folder / "ids.txt"
    ids.write_text("".join(f"m{i}\n" for i in chosen))
    result = nbledger(capsys, "why", model, "--data", data, "--ids", ids, "--format", "json")
    assert result.code == 0, result.err
    assert "look like e-mail" in result.err
    for i, doc in zip(chosen, json.loads(result.out)["messages"]):
        decision, log_odds = reference(pipeline, texts[i])
        assert doc["decision"] == decision and doc["text_view"] == "raw"
        assert math.isclose(doc["log_odds"], log_odds, rel_tol=1e-9, abs_tol=1e-9)
    out = folder / "ledger.jsonl"
    assert nbledger(capsys, "ledger", model, data, "--text-col", "text", "--id-col", "id", "--out", out).code == 0
    rows = [json.loads(line) for line in out.read_text().splitlines()]
    assert [r["decided"] for r in rows] == list(pipeline.predict(texts))
    assert all(r["text_view"] == "raw" for r in rows)
    for r, text in zip(rows, texts):
        assert math.isclose(r["log_odds"], reference(pipeline, text)[1], rel_tol=1e-9, abs_tol=1e-9)


def test_text_view_raw_against_a_card_with_a_mail_view_is_one_error(tmp_path, capsys):
    from explain.model.email_reader import resolve_text_view
    from explain.errors import NbledgerError

    card = {"settings": {"text_view": "body"}}
    with pytest.raises(NbledgerError, match="records training on the body view"):
        resolve_text_view(card, "raw")
    assert resolve_text_view(None) == resolve_text_view({"settings": {}}) == "raw"
    assert resolve_text_view(card) == "body"
