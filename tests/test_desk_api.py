"""The review desk's JSON API, in-process: ledgers equal scikit-learn's, reviews kept append-only, safe headers."""

from __future__ import annotations

import hashlib
import json
import math

import numpy as np
import pytest
import sqlalchemy as sa
from hypothesis import HealthCheck, given, settings as hsettings
from hypothesis import strategies as st
from scipy.special import logsumexp
from starlette.testclient import TestClient

from desk_support import train_filter, write_queue
from explain.model.decision import DecisionRule
from explain.model.loading import load_model
from explain.model.mail_data import read_data
from explain.runs.desk.app import build_app
from explain.runs.desk.queue import score_queue
from explain.runs.desk.settings import DeskSettings
from explain.runs.desk.store import open_store

REL = 1e-9


@pytest.fixture(scope="module", params=[("ok", "scam"), ("ok", "scam", "advert")], ids=["two", "three"])
def desk(request, tmp_path_factory):
    """A desk over a filter fitted by scikit-learn; three classes run under a threshold on P(flag)."""
    folder = tmp_path_factory.mktemp("desk")
    pipeline, model = train_filter(folder, request.param)
    queue_file = write_queue(folder, 80)
    threshold = None if len(request.param) == 2 else 0.7
    loaded = load_model(model, normal_class="ok")
    rule = DecisionRule.for_view(loaded.view, threshold)
    queue = score_queue(loaded, read_data(queue_file, "text", None, id_col="id"), rule)
    settings = DeskSettings(loaded=loaded, store=open_store(folder / "reviews.sqlite"), queue=queue, threshold=threshold)
    with TestClient(build_app(settings)) as client:
        yield client, pipeline, model, settings


def joint(pipeline, text: str):
    """scikit-learn's ``predict_joint_log_proba`` of the pipeline's classifier on its own features."""
    return pipeline[-1].predict_joint_log_proba(pipeline[:-1].transform([text]))[0]


def expected_closing(pipeline, text: str, record: dict) -> float:
    """The ledger's closing balance from scikit-learn's own joint log-likelihoods: log of the summed
    probabilities of the credit classes minus that of the debit class."""
    jll = joint(pipeline, text)
    classes = list(pipeline.classes_)
    credit = [classes.index(c) for c in record["ledger"]["credit_classes"]]
    return float(logsumexp(jll[credit]) - jll[classes.index(record["ledger"]["debit_class"])])


def close(a: float, b: float) -> bool:
    return math.isclose(a, b, rel_tol=REL, abs_tol=1e-12)


def test_health_names_the_model_by_its_sha256(desk):
    client, _, model, _ = desk
    body = client.get("/healthz").json()
    assert body["status"] == "ok"
    assert body["model"]["sha256"] == hashlib.sha256(model.read_bytes()).hexdigest()
    fingerprint = load_model(model, normal_class="ok").fingerprint
    assert fingerprint is not None and body["model"]["fingerprint"] == fingerprint


def test_queued_ledgers_equal_scikit_learn(desk):
    # Source: scikit-learn's predict_joint_log_proba and predict_proba on the very pipeline served.
    client, pipeline, _, settings = desk
    queue = client.get("/api/queue").json()["messages"]
    assert len(queue) == 80
    texts = {item.id: item.text for item in settings.queue.items}
    for entry in queue[:25]:
        record = client.get(f"/api/messages/{entry['id']}/ledger").json()
        assert record["schema"] == "nbledger.why/3" and record["message_id"] == entry["id"]
        text = texts[entry["id"]]
        assert close(record["ledger"]["closing"], expected_closing(pipeline, text, record))
        proba = pipeline.predict_proba([text])[0]
        for c, p in zip(pipeline.classes_, proba):
            assert close(record["probabilities"][c], p)
        jll = joint(pipeline, text)
        classes = list(pipeline.classes_)
        flag_log_odds = logsumexp([jll[i] for i, c in enumerate(classes) if c != "ok"]) - jll[classes.index("ok")]
        assert close(entry["log_odds"], flag_log_odds)


@hsettings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.lists(st.sampled_from(["pay", "fee", "now", "parcel", "thanks", "drill", "£2.49", "the", "zzqx", "ok"]),
                min_size=1, max_size=12).map(" ".join))
def test_edited_texts_equal_scikit_learn(desk, text):
    client, pipeline, _, _ = desk
    record = client.post("/api/ledger", json={"text": text}).json()
    assert close(record["ledger"]["closing"], expected_closing(pipeline, text, record))
    assert record["decision"] in pipeline.classes_


def test_a_review_is_stored_with_what_it_was_based_on(desk):
    client, _, model, settings = desk
    mid = client.get("/api/queue").json()["messages"][0]["id"]
    answer = client.post(f"/api/messages/{mid}/reviews",
                         json={"outcome": "overturned", "reason": "a neighbour's real offer", "note": "see thread"})
    assert answer.status_code == 201
    review = answer.json()
    assert review["reviewer"] == "local" and review["outcome"] == "overturned" and review["message_id"] == mid
    assert review["model_sha256"] == hashlib.sha256(model.read_bytes()).hexdigest()
    assert review["model_fingerprint"] == settings.loaded.fingerprint and len(review["model_fingerprint"]) == 64
    assert review["ledger"]["schema"] == "nbledger.why/3" and review["ledger"]["message_id"] == mid
    assert review["recorded_at"].endswith("Z")
    # A correction is a new review naming the one it supersedes.
    again = client.post(f"/api/messages/{mid}/reviews", json={"outcome": "upheld", "reason": "on reflection",
                                                             "supersedes": review["id"]})
    assert again.status_code == 201 and again.json()["supersedes"] == review["id"]
    log = client.get("/api/reviews", params={"message_id": mid}).json()["reviews"]
    assert [r["outcome"] for r in log] == ["overturned", "upheld"]
    current = client.get("/api/reviews", params={"message_id": mid, "current": "1"}).json()["reviews"]
    assert [r["id"] for r in current] == [again.json()["id"]]
    assert next(m for m in client.get("/api/queue").json()["messages"] if m["id"] == mid)["outcome"] == "upheld"
    table = client.get("/api/reviews", params={"format": "csv"})
    assert table.headers["content-type"].startswith("text/csv") and f",{mid}," in table.text


def test_reviews_are_append_only_in_the_database(desk):
    _, _, _, settings = desk
    with pytest.raises(sa.exc.DBAPIError, match="append-only"):
        with settings.store.engine.begin() as conn:
            conn.execute(sa.text("UPDATE reviews SET outcome = 'upheld'"))
    with pytest.raises(sa.exc.DBAPIError, match="append-only"):
        with settings.store.engine.begin() as conn:
            conn.execute(sa.text("DELETE FROM reviews"))


def test_a_retried_review_is_stored_once(desk):
    client, _, _, _ = desk
    mid = client.get("/api/queue").json()["messages"][1]["id"]
    body = {"outcome": "escalated", "reason": "unsure", "review_key": "retry-key-0001"}
    first = client.post(f"/api/messages/{mid}/reviews", json=body)
    second = client.post(f"/api/messages/{mid}/reviews", json=body)
    assert (first.status_code, second.status_code) == (201, 200)
    assert first.json()["id"] == second.json()["id"]


@pytest.mark.parametrize("body, status", [
    ({"outcome": "deleted", "reason": "x"}, 400),
    ({"outcome": "upheld", "reason": 5}, 400),
    ({"outcome": "upheld", "label": "no-such-class"}, 400),
    ({"outcome": "upheld", "supersedes": 999999}, 400),
])
def test_bad_reviews_are_refused(desk, body, status):
    client, _, _, _ = desk
    mid = client.get("/api/queue").json()["messages"][2]["id"]
    answer = client.post(f"/api/messages/{mid}/reviews", json=body)
    assert answer.status_code == status and "error" in answer.json()


def test_bad_requests_get_one_clear_answer(desk):
    client, _, _, settings = desk
    assert client.get("/api/messages/no-such-id/ledger").status_code == 404
    assert client.post("/api/ledger", content=b"text=hi", headers={"content-type": "application/x-www-form-urlencoded"}).status_code == 415
    assert client.post("/api/ledger", json={"text": 3}).status_code == 400
    assert client.post("/api/ledger", json={"text": "x" * (settings.max_text_bytes + 1)}).status_code == 413
    assert client.get("/api/queue", params={"order": "sideways"}).status_code == 400


def test_every_response_carries_the_security_headers(desk):
    client, _, _, _ = desk
    for path in ("/", "/healthz", "/api/queue", "/reviews", "/static/desk.js"):
        headers = client.get(path).headers
        policy = headers["content-security-policy"]
        assert "script-src 'self'" in policy and "frame-ancestors 'none'" in policy and "default-src 'none'" in policy
        assert "unsafe-inline" not in policy
        assert headers["x-content-type-options"] == "nosniff"
        assert headers["referrer-policy"] == "no-referrer"


def test_the_pages_escape_message_text(desk, tmp_path):
    client, _, _, settings = desk
    page = client.get(f"/messages/{settings.queue.items[0].id}").text
    assert "<script" not in page.replace('<script src="/static/desk.js" defer></script>', "")
    assert ' style="' not in page or all(
        s.split('"')[0] in settings_styles(settings) for s in page.split(' style="')[1:]
    )


def test_controls_and_bidi_characters_are_shown_not_obeyed_except_in_the_text_to_edit(desk):
    client, _, _, settings = desk
    page = client.post("/api/ledger", json={"text": "pay \u202eeef the\u200b fee"})
    assert page.status_code == 200
    mid = settings.queue.items[0].id
    html = client.get(f"/messages/{mid}").text
    assert "\u202e" not in html  # the queue's texts hold none; the check below plants one
    from explain.runs.desk.pages import environment

    fragment = environment().get_template("desk/ledger_fragment.html.j2")
    from explain.runs.desk.app import ledger_for
    from explain.runs.desk.pages import ledger_view

    ledger = ledger_for(settings, "pay \u202eeef now")
    shown = fragment.render(lv=ledger_view(settings, ledger), closing_exact=repr(ledger.closing))
    assert "\u202e" not in shown and "eef" in shown


def settings_styles(settings) -> list[str]:
    from explain.runs.desk.guard import tint_styles

    return tint_styles(settings.loaded.classes, settings.loaded.view.normal_class)


def test_a_redacting_desk_masks_personal_values_in_what_it_shows_and_keeps(tmp_path):
    folder = tmp_path
    pipeline, model = train_filter(folder)
    loaded = load_model(model, normal_class="ok")
    queue_file = folder / "q.csv"
    queue_file.write_text("id,text\nm1,pay the fee to warden@example.org now\n")
    queue = score_queue(loaded, read_data(queue_file, "text", None, id_col="id"), DecisionRule.for_view(loaded.view))
    settings = DeskSettings(loaded=loaded, store=open_store(folder / "r.sqlite"), queue=queue, redact=True)
    with TestClient(build_app(settings)) as client:
        record = client.post("/api/ledger", json={"text": "pay the fee to warden@example.org or call 555-0134"}).json()
        pages = client.get("/").text + client.get("/messages/m1").text
        stored = client.post("/api/messages/m1/reviews", json={"outcome": "upheld"}).json()
    assert "warden@example.org" not in pages and "[e-mail 1]" in pages
    assert "warden@example.org" not in json.dumps(stored)
    assert record["redacted"] is True
    tokens = " ".join(e["token"] for e in record["ledger"]["entries"])
    assert "warden@example.org" not in json.dumps(record) and "example.org" not in tokens
