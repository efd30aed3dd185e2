"""Raw e-mail into the commands: .eml folders, mbox files, tables of raw messages, why --file.

The model here is trained on the body view of raw messages; its explanation of a raw
``.eml`` must equal scikit-learn's own ``predict_joint_log_proba`` on the decoded body,
decoded independently with the standard library's ``EmailMessage.get_body().get_content()``.
"""

from __future__ import annotations

import email
import email.policy
import io
import json
import mailbox
import sys
from email.message import EmailMessage
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import skops.io as sio
from hypothesis import given, settings
from hypothesis import strategies as st

from clirun import nbledger
from corpora import messages as random_messages
from explain.analysis.evidence import explain_email
from explain.analysis.mail_facts import redact_line
from explain.errors import NbledgerError
from explain.model.email_reader import Limits, read_email
from explain.model.loading import load_model
from explain.model.mail_data import MailInput, read_data

ROOT = Path(__file__).resolve().parent.parent
ENCODINGS = ("base64", "quoted-printable", "8bit")


def as_email(text: str, cte: str, n: int, html: bool = False, message_id: bool = True) -> bytes:
    message = EmailMessage()
    message["From"] = f"Member {n} <member{n}@example.org>"
    message["Subject"] = f"Message {n} from the co-op app"
    if message_id:
        message["Message-ID"] = f"<tc-{n}@example.org>"
    message.set_content(text, cte=cte)
    if html:
        message.add_alternative(f"<p>{text}</p>", subtype="html", cte="quoted-printable")
    return message.as_bytes()


def stdlib_body(raw: bytes) -> str:
    """The plain body as the standard library's own accessor decodes it (the reference)."""
    return email.message_from_bytes(raw, policy=email.policy.default).get_body(("plain",)).get_content()


@pytest.fixture(scope="module")
def folder(tmp_path_factory):
    """300 demo messages as .eml files, one sub-folder per label, encodings in turn."""
    root = tmp_path_factory.mktemp("mail") / "inbox"
    frame = pd.read_csv(ROOT / "demo_corpus" / "messages.csv", nrows=300)
    for n, (text, label) in enumerate(zip(frame["text"], frame["label"])):
        (root / label).mkdir(parents=True, exist_ok=True)
        (root / label / f"{n:04d}.eml").write_bytes(as_email(text, ENCODINGS[n % 3], n, html=n % 5 == 0))
    return root


@pytest.fixture(scope="module")
def body_model(folder, tmp_path_factory):
    from explain.cli import run

    out = tmp_path_factory.mktemp("model") / "mail.skops"
    assert run(["train", str(folder), "--labels-from-folders", "--text-view", "body",
                "--normal-class", "ok", "--out", str(out)]) == 0
    return out


def test_train_records_the_view_and_the_input_in_the_card(body_model):
    card = json.loads(body_model.with_name("mail.card.json").read_text())
    assert card["settings"]["text_view"] == "body"
    assert card["data"]["input"] == "eml-folder" and card["data"]["rows"] == 300


def test_why_on_a_raw_eml_equals_scikit_learn_on_the_decoded_body(body_model, folder, capsys):
    path = sorted((folder / "scam").glob("*.eml"))[0]
    outcome = nbledger(capsys, "why", body_model, "--file", path, "--format", "json")
    assert outcome.code == 0, outcome.err
    doc = json.loads(outcome.out)
    pipeline = sio.load(body_model, trusted=sio.get_untrusted_types(file=body_model))
    body = stdlib_body(path.read_bytes())
    jll = pipeline[-1].predict_joint_log_proba(pipeline[:-1].transform([body]))[0]
    classes = list(pipeline.classes_)
    assert doc["log_odds"] == pytest.approx(jll[classes.index(doc["predicted"])] - jll[classes.index(doc["runner_up"])], abs=1e-9)
    assert list(doc["probabilities"].values()) == pytest.approx(pipeline.predict_proba([body])[0].tolist(), abs=1e-12)
    assert doc["baseline"] + sum(t["evidence"] for t in doc["tokens"]) == pytest.approx(doc["log_odds"], abs=1e-9)
    assert doc["email"]["text_view"] == "body"
    assert doc["email"]["sender"].endswith("<[e-mail 2]>") and "@" not in doc["email"]["sender"]


@settings(max_examples=40, deadline=None)
@given(text=random_messages.filter(str.strip), cte=st.sampled_from(ENCODINGS), html=st.booleans())
def test_explained_email_evidence_equals_predict_joint_log_proba(body_model_cached, text, cte, html):
    loaded, pipeline = body_model_cached
    raw = as_email(text, cte, 1, html=html)
    explanation = explain_email(loaded, read_email(raw), "body")
    body = stdlib_body(raw)
    assert explanation.text == body
    jll = pipeline[-1].predict_joint_log_proba(pipeline[:-1].transform([body]))[0]
    np.testing.assert_allclose(explanation.jll, jll, rtol=0, atol=1e-9)
    assert explanation.baseline + explanation.evidence_sum == pytest.approx(explanation.log_odds, abs=1e-9)


@pytest.fixture(scope="module")
def body_model_cached(body_model):
    return load_model(body_model), sio.load(body_model, trusted=sio.get_untrusted_types(file=body_model))


def test_a_view_other_than_the_cards_is_one_error_line(body_model, folder, capsys):
    path = sorted((folder / "ok").glob("*.eml"))[0]
    line = nbledger(capsys, "why", body_model, "--file", path, "--text-view", "headers+body").one_error_line()
    assert "differs from the model card" in line and "body view" in line
    raw = nbledger(capsys, "why", body_model, "--file", path, "--text-view", "raw").one_error_line()
    assert "--text-view raw differs from the model card" in raw and "the body view" in raw


def test_why_reads_an_eml_from_standard_input(body_model, folder, capsys, monkeypatch):
    path = sorted((folder / "ok").glob("*.eml"))[0]
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1767225600")  # one date for both records, whenever the second ticks
    by_file = nbledger(capsys, "why", body_model, "--file", path, "--format", "json")
    monkeypatch.setattr(sys, "stdin", io.TextIOWrapper(io.BytesIO(path.read_bytes())))
    by_stdin = nbledger(capsys, "why", body_model, "-", "--format", "json")
    assert by_stdin.code == 0 and json.loads(by_stdin.out) == json.loads(by_file.out)


def test_email_forces_reading_a_message_without_recognised_headers(body_model, tmp_path, capsys):
    path = tmp_path / "bare.eml"
    path.write_bytes(b"Content-Transfer-Encoding: base64\n\nVGhlIGxldnkgaXMgZHVl\n")  # "The levy is due"
    guessed = json.loads(nbledger(capsys, "why", body_model, "--file", path, "--format", "json").out)
    forced = json.loads(nbledger(capsys, "why", body_model, "--file", path, "--email", "--format", "json").out)
    assert guessed["email"] is None and "vghligxldnkgaxmgzhvl" in [t["token"] for t in guessed["unknown_tokens"]]
    assert forced["email"] is not None
    assert {t["token"] for t in forced["tokens"]} | {t["token"] for t in forced["unknown_tokens"]} == {"the", "levy", "is", "due"}


def test_the_terminal_shows_what_was_read(body_model, tmp_path, capsys):
    message = EmailMessage()
    message["From"] = "Levy Desk <levy@example.net>"
    message["Subject"] = "=?utf-8?q?Levy_=E2=80=93_final_notice?="
    message.set_content("pay the levy today\n")
    message.add_attachment(b"%PDF", maintype="application", subtype="pdf", filename="invoice.pdf")
    path = tmp_path / "levy.eml"
    path.write_bytes(message.as_bytes())
    outcome = nbledger(capsys, "why", body_model, "--file", path)
    assert outcome.code == 0, outcome.err
    assert "from:     [name 1] <[e-mail 2]>" in outcome.out and "levy@example.net" not in outcome.out
    assert "Levy Desk" not in outcome.out  # a display name is personal data (issue 18)
    assert "subject:  Levy \u2013 final notice" in outcome.out
    assert "attached: invoice.pdf (application/pdf, 4 bytes; not read)" in outcome.out


def test_unknown_charset_in_why_is_shown_not_fatal(body_model, tmp_path, capsys):
    path = tmp_path / "odd.eml"
    path.write_bytes(b"From: a@example.org\nSubject: levy\nContent-Type: text/plain; charset=x-tideway-7\n\npay the levy\n")
    outcome = nbledger(capsys, "why", body_model, "--file", path)
    assert outcome.code == 0 and "Traceback" not in outcome.err
    fallback = [line for line in outcome.out.splitlines() if line.startswith("fallback:")]
    assert fallback == ["fallback: text/plain part 1 [x-tideway-7]: unknown charset, read as UTF-8"]


def test_ten_thousand_nested_parts_in_why_is_one_error_line(body_model, tmp_path, capsys):
    from test_email_reader import _nested

    path = tmp_path / "deep.eml"
    path.write_bytes(_nested(10_000))
    line = nbledger(capsys, "why", body_model, "--file", path).one_error_line()
    assert line == "error: the e-mail could not be read: more than 1,000 multipart parts; the MIME structure was not read"


def test_a_one_gigabyte_message_file_is_refused_before_reading(body_model, tmp_path, capsys):
    path = tmp_path / "huge.eml"
    with open(path, "wb") as fh:  # a sparse file: 1 GiB long, a few bytes on disk
        fh.write(b"From: a@example.org\nSubject: x\nContent-Transfer-Encoding: base64\n\nQUJD")
        fh.truncate(1 << 30)
    line = nbledger(capsys, "why", body_model, "--file", path).one_error_line()
    assert "larger than 1,048,576 bytes" in line


def test_a_one_gigabyte_file_in_a_data_folder_is_cut_at_the_limit(tmp_path):
    folder = tmp_path / "box"
    folder.mkdir()
    with open(folder / "huge.eml", "wb") as fh:
        fh.write(b"From: a@example.org\nSubject: x\nContent-Type: application/octet-stream\n"
                 b"Content-Transfer-Encoding: base64\n\nQUJD")
        fh.truncate(1 << 30)
    messages = read_data(folder, None, None, MailInput(label="scam", limits=Limits(max_message_bytes=1 << 20)))
    assert messages.notes == (
        "1 of 1 messages carry attachments and no text",
        "1 of 1 messages were larger than 1,048,576 bytes and were cut",
    )


def test_a_data_folder_warns_once_per_kind_and_keeps_going(body_model, folder, tmp_path, capsys):
    from test_email_reader import _nested

    extra = tmp_path / "extra"
    for label in ("ok", "scam"):
        (extra / label).mkdir(parents=True)
        for path in sorted((folder / label).glob("*.eml"))[:20]:
            (extra / label / path.name).write_bytes(path.read_bytes())
    (extra / "scam" / "deep.eml").write_bytes(_nested(10_000))
    (extra / "ok" / "odd.eml").write_bytes(b"From: a@example.org\nSubject: t\nContent-Type: text/plain; charset=x-q\n\ntea at four\n")
    outcome = nbledger(capsys, "assess", body_model, extra, "--labels-from-folders", "--format", "json")
    assert outcome.code == 0, outcome.err
    assert outcome.err.splitlines() == [
        "warning: extra: 1 of 42 messages: unknown charset, read as UTF-8",
        "warning: extra: 1 of 42 messages: more than 1,000 multipart parts; the MIME structure was not read",
    ]


def test_ids_are_message_ids_else_file_names(tmp_path):
    (tmp_path / "ok").mkdir()
    (tmp_path / "ok" / "a.eml").write_bytes(as_email("tea at four", "8bit", 7))
    (tmp_path / "ok" / "b.eml").write_bytes(as_email("drill to lend", "8bit", 8, message_id=False))
    messages = read_data(tmp_path, None, None, MailInput(labels_from_folders=True))
    assert messages.ids.tolist() == ["<tc-7@example.org>", "ok/b.eml"]
    assert messages.labels.tolist() == ["ok", "ok"]
    assert messages.texts == ["tea at four\n", "drill to lend\n"]


def test_mbox_with_one_label(tmp_path):
    path = tmp_path / "quarantine.mbox"
    box = mailbox.mbox(path)
    box.add(as_email("pay the parcel fee", "base64", 1))
    box.add(as_email("claim your prize", "quoted-printable", 2, message_id=False))
    box.close()
    messages = read_data(path, None, None, MailInput(label="scam", view="subject+body"))
    assert messages.texts == ["Message 1 from the co-op app\n\npay the parcel fee\n",
                              "Message 2 from the co-op app\n\nclaim your prize\n"]
    assert messages.ids.tolist() == ["<tc-1@example.org>", "quarantine.mbox#2"]
    assert messages.labels.tolist() == ["scam", "scam"]


def test_table_of_raw_messages(tmp_path):
    path = tmp_path / "raw.jsonl"
    rows = [{"raw": as_email("pay the fee", "base64", 1).decode(), "label": "scam"},
            {"raw": as_email("tea at four", "quoted-printable", 2).decode(), "label": "ok"}]
    path.write_text("".join(json.dumps(r) + "\n" for r in rows))
    messages = read_data(path, "raw", "label", MailInput(raw_email=True))
    assert messages.texts == ["pay the fee\n", "tea at four\n"]
    assert read_data(path, "raw", "label").texts[0].startswith("From: Member 1")


def test_vocab_counts_documents_from_a_folder(body_model, folder, capsys):
    outcome = nbledger(capsys, "vocab", body_model, "--data", folder, "--labels-from-folders", "--format", "json")
    assert outcome.code == 0, outcome.err


@pytest.mark.parametrize(
    "args, message",
    [
        (["--labels-from-folders"], "is not in a label sub-folder"),
        (["--label", "ok", "--labels-from-folders"], "give --labels-from-folders or --label, not both"),
        ([], "gives no labels: use --label-col for a table, --labels-from-folders or --label for e-mail"),
    ],
)
def test_bad_folder_options_are_one_error_line(tmp_path, capsys, args, message):
    (tmp_path / "loose.eml").write_bytes(as_email("tea", "8bit", 1))
    line = nbledger(capsys, "train", tmp_path, *args, "--out", tmp_path / "m.skops").one_error_line()
    assert message in line and not (tmp_path / "m.skops").exists()


def test_text_view_with_a_plain_table_is_refused(tmp_path, capsys):
    path = tmp_path / "t.csv"
    path.write_text("text,label\npay now,scam\ntea,ok\n")
    line = nbledger(capsys, "train", path, "--text-col", "text", "--label-col", "label", "--text-view", "body",
                    "--out", tmp_path / "m.skops").one_error_line()
    assert "--text-view applies to raw e-mail" in line


def test_label_with_a_table_is_refused(tmp_path):
    path = tmp_path / "t.csv"
    path.write_text("text,label\npay now,scam\n")
    with pytest.raises(NbledgerError, match="is a table"):
        read_data(path, "text", None, MailInput(label="scam"))


def test_redact_line_hides_addresses_and_numbers():
    assert redact_line("Ann Lee <ann@example.org>") == "[name 1] <[e-mail 2]>"
    assert redact_line("Lee, Ann <ann@example.org>, Ann Lee <ann@example.org>") == "[name 1] <[e-mail 2]>, [name 3] <[e-mail 2]>"
    assert redact_line("call 555-0147 or see http://levy.example.net/x", "Subject") == "call [phone 1] or see [url 2]"
    assert redact_line('desk@example.net (Levy Desk)') == '[e-mail 1] ([name 2])'


def test_demo_examples_read_cleanly():
    examples = sorted((ROOT / "demo_corpus" / "examples").glob("*.eml"))
    assert len(examples) >= 3
    read = {path.name: read_email(path.read_bytes()) for path in examples}
    assert all(not m.undecodable and not m.problems and m.body.strip() for m in read.values())
    raw = {path.name: path.read_bytes() for path in examples}
    assert any(b"quoted-printable" in r and b"text/html" in r for r in raw.values())
    assert any(b"Content-Transfer-Encoding: base64" in r for r in raw.values())
    assert any(b"=?utf-8?" in r.split(b"\n\n")[0] for r in raw.values())
    assert any(m.attachments for m in read.values())
    for m in read.values():
        assert "@" in m.sender and m.sender.split("@")[1].rstrip(">") in ("example.org", "example.net", "example.com")


def test_folder_reading_skips_symbolic_links(tmp_path):
    outside = tmp_path / "outside"
    outside.mkdir()
    (outside / "secret.eml").write_bytes(as_email("not for training", "8bit", 9))
    inbox = tmp_path / "inbox" / "ok"
    inbox.mkdir(parents=True)
    (inbox / "a.eml").write_bytes(as_email("tea at four", "8bit", 1))
    (inbox / "link.eml").symlink_to(outside / "secret.eml")
    (inbox / "linked-folder").symlink_to(outside, target_is_directory=True)
    messages = read_data(tmp_path / "inbox", None, None, MailInput(labels_from_folders=True))
    assert messages.texts == ["tea at four\n"]


def test_a_table_starting_with_from_is_still_a_table(tmp_path):
    path = tmp_path / "t.csv"
    path.write_text("From ,text,label\nx,pay now,scam\n")
    assert read_data(path, "text", "label").texts == ["pay now"]
