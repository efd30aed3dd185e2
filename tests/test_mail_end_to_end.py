"""Real mail end to end (issue 20): .eml folders through ledger (local and Dask) and assess, mail slices, bad input."""

from __future__ import annotations

import json
import mailbox
import socket
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import skops.io as sio
from sklearn.feature_extraction.text import CountVectorizer
from sklearn.naive_bayes import MultinomialNB
from sklearn.pipeline import make_pipeline

from benchmarks import mailcorpus
from explain.analysis import mail_slices
from explain.model.data_io import decode_utf8
from explain.model.email_reader import read_email, resolve_text_view
from tests.clirun import nbledger

TRAIN = {"easy-ham-1": 300, "spam-1": 200}
TEST = {"easy-ham-2": 60, "hard-ham-1": 60, "spam-2": 60}


def _write(folder: Path, groups: dict, raw) -> list[Path]:
    written = []
    for group, n in groups.items():
        label = mailcorpus.label_of(group)
        for message in [m for m in raw if m.group == group][:n]:
            path = folder / label / group / f"{message.id}.eml"
            path.parent.mkdir(parents=True, exist_ok=True)
            path.write_bytes(message.data)
            written.append(path)
    return sorted(written)


@pytest.fixture(scope="module")
def mail(tmp_path_factory):
    try:
        raw = mailcorpus._raw_corpus()
    except mailcorpus.CorpusUnavailable as exc:
        pytest.skip(f"public mail corpus unavailable (no ../shared copy and npm could not fetch it): {exc}")
    root = tmp_path_factory.mktemp("mail")
    return {"root": root, "train": _write(root / "train", TRAIN, raw), "test": _write(root / "test", TEST, raw)}


def _as_given(path: Path) -> str:
    """A file's text as a card-less filter reads it (the view resolve_text_view gives without a card)."""
    view = resolve_text_view(None, None)
    data = path.read_bytes()
    return decode_utf8(data)[0] if view == "raw" else read_email(data).text(view)


@pytest.mark.mailcorpus
@pytest.mark.parametrize("engine", ["local", "dask"])
def test_ledger_over_an_eml_folder_decides_as_scikit_learn_predicts(mail, capsys, engine, monkeypatch):
    from explain.model import data_stream

    monkeypatch.setattr(data_stream, "MAIL_PIECE_FILES", 50)  # Dask: the folder's 180 files in 4 pieces
    root = mail["root"]
    assert [(p.row_group, p.rows) for p in data_stream.input_pieces([root / "test"])] == [(0, 50), (50, 50), (100, 50), (150, 30)]
    pipeline = make_pipeline(CountVectorizer(), MultinomialNB()).fit(
        [_as_given(p) for p in mail["train"]], [p.parent.parent.name for p in mail["train"]]
    )
    model = root / f"cardless-{engine}.skops"
    sio.dump(pipeline, model)  # no card beside it
    out = root / f"ledger-{engine}.csv"
    extra = ["--engine", "dask", "--workers", "1"] if engine == "dask" else []
    result = nbledger(capsys, "ledger", model, root / "test", "--out", out, *extra)
    assert result.code == 0, result.err
    rows = pd.read_csv(out, dtype=str, keep_default_na=False)
    # Reference: scikit-learn's own predict on the files' texts, in the folder's path order.
    expected = pipeline.predict([_as_given(p) for p in mail["test"]])
    assert len(rows) == len(mail["test"])
    assert rows["decided"].tolist() == expected.tolist()


@pytest.fixture(scope="module")
def trained(mail):
    from explain.cli import run

    model = mail["root"] / "body.skops"
    assert run(["train", str(mail["root"] / "train"), "--labels-from-folders", "--normal-class", "ham",
                "--out", str(model)]) == 0
    return model


@pytest.mark.mailcorpus
def test_assess_slices_by_folder_count_false_alarms_as_scikit_learn(mail, trained, capsys):
    result = nbledger(capsys, "assess", trained, mail["root"] / "test", "--labels-from-folders",
                      "--slice-by", "folder", "--format", "json")
    assert result.code == 0, result.err
    document = json.loads(result.out)
    slices = {s["name"]: s for s in document["assessment"]["slices"]["slices"] if s["group"] == "folder"}
    assert set(slices) == set(TEST)
    pipeline = sio.load(trained, trusted=sio.get_untrusted_types(file=trained))
    card = json.loads(trained.with_name("body.card.json").read_text())
    assert card["settings"]["text_view"] == "body" and card["settings"]["text_rules"] == "2"
    for group in TEST:
        files = [p for p in mail["test"] if p.parent.name == group]
        # scikit-learn's predict on the texts the card's view and rules read from those files.
        predicted = pipeline.predict([read_email(p.read_bytes(), rules="2").text("body") for p in files])
        labels = np.array([p.parent.parent.name for p in files])
        false_alarms = int(((labels == "ham") & (predicted == "spam")).sum())
        rate = slices[group]["false_alarm_test"]["rate"]
        assert (rate["numerator"], rate["denominator"]) == (false_alarms, int((labels == "ham").sum())), group


@pytest.mark.mailcorpus
def test_the_card_counts_the_messages_each_text_rule_touched(mail, trained):
    card = json.loads(trained.with_name("body.card.json").read_text())
    touched = card["data"]["messages_touched"]
    emails = [read_email(p.read_bytes()) for p in mail["train"]]
    for rule in ("html-in-plain", "uuencode", "base64-run", "hex-run"):
        assert touched[rule] == sum(rule in e.cleaned for e in emails)
    assert touched["decoding"] == sum(bool(e.undecodable) for e in emails)


MARKUP = {"br", "nbsp", "td", "tr", "font", "size", "color", "bgcolor", "face", "helvetica", "arial", "serif",
          "width", "height", "align", "table", "href", "html", "body", "div", "span", "style", "mso", "px"}


@pytest.mark.mailcorpus
def test_a_body_view_model_of_the_public_corpus_has_no_markup_among_its_strongest_spam_tokens():
    def strongest(rules):
        corpus = mailcorpus.load(view="body", rules=rules)
        pipeline = make_pipeline(CountVectorizer(), MultinomialNB()).fit(corpus.texts, corpus.labels)
        nb, tokens = pipeline[-1], pipeline[0].get_feature_names_out()
        spam = list(nb.classes_).index("spam")
        evidence = nb.feature_log_prob_[spam] - nb.feature_log_prob_[1 - spam]
        return set(tokens[np.argsort(-evidence, kind="stable")[:25]])

    assert not strongest("2") & MARKUP
    assert strongest("1") & MARKUP  # without the rules markup is there (bgcolor, nbsp, helvetica ... observed)


def test_mail_slice_keys():
    # Public Suffix List (publicsuffix.org): co.uk is a public suffix, so the registrable domain keeps one label more.
    assert mail_slices.sender_domain('"Harbour Office" <news@mail.harbour.example.co.uk>') == "example.co.uk"
    assert mail_slices.sender_domain("office@example.org") == "example.org"
    assert mail_slices.sender_domain("undisclosed-recipients:;") == ""
    # ISO 8601 weeks as Python's datetime.isocalendar counts them; 13 Aug 2002 was a Tuesday of week 33.
    assert mail_slices.date_period("Tue, 13 Aug 2002 15:03:00 -0700", "week") == "2002-W33"
    assert mail_slices.date_period("Tue, 31 Dec 2002 23:30:00 -0200", "month") == "2003-01"  # UTC
    assert mail_slices.date_period("sometime soon", "month") == ""
    # RFC 2919 section 2 example, from memory: List-Id: List Header Mailing List <list-header.nisto.com>
    assert mail_slices.list_id("List Header Mailing List <list-header.nisto.com>") == "list-header.nisto.com"


def test_the_public_suffix_list_is_never_fetched(monkeypatch):
    def refuse(*args, **kwargs):
        raise AssertionError("network used")

    monkeypatch.setattr(socket.socket, "connect", refuse)
    monkeypatch.setattr(socket, "create_connection", refuse)
    mail_slices._extractor.cache_clear()
    assert mail_slices.sender_domain("a@news.example.com.au") == "example.com.au"


@pytest.fixture(scope="module")
def bad(tmp_path_factory):
    folder = tmp_path_factory.mktemp("bad")
    (folder / "empty").mkdir()
    (folder / "empty" / "notes.txt").write_text("not mail")
    mailbox.mbox(folder / "none.mbox").close()
    (folder / "none.mbox").write_bytes(b"")
    pd.DataFrame({"text": ["pay the fee", "tea at 7"], "label": ["spam", "ham"]}).to_csv(folder / "t.csv", index=False)
    pipeline = make_pipeline(CountVectorizer(), MultinomialNB()).fit(["pay the fee", "tea at 7"], ["spam", "ham"])
    sio.dump(pipeline, folder / "m.skops")
    return folder


@pytest.mark.parametrize("args, needle", [
    (["ledger", "{m}", "{d}/empty", "--out", "{d}/o.csv"], "holds no .parquet file and no .eml file"),
    (["assess", "{m}", "{d}/empty", "--label", "ham"], "no .eml files in"),
    (["ledger", "{m}", "{d}/none.mbox", "--out", "{d}/o.csv"], "none.mbox holds no messages"),
    (["assess", "{m}", "{d}/none.mbox", "--label", "ham"], "none.mbox holds no messages"),
    (["assess", "{m}", "{d}/t.csv", "--text-col", "text", "--label-col", "label", "--slice-by", "sender-domain"],
     "--slice-by sender-domain needs raw e-mail"),
])
def test_bad_mail_input_is_one_error_line(bad, capsys, args, needle):
    result = nbledger(capsys, *[a.format(m=bad / "m.skops", d=bad) for a in args])
    assert result.code == 2
    assert needle in result.one_error_line()
    assert not (bad / "o.csv").exists()


@pytest.mark.mailcorpus
def test_ledger_over_an_mbox_decides_as_scikit_learn_predicts(mail, capsys):
    root = mail["root"]
    pipeline = make_pipeline(CountVectorizer(), MultinomialNB()).fit(
        [_as_given(p) for p in mail["train"]], [p.parent.parent.name for p in mail["train"]]
    )
    model = root / "cardless-mbox.skops"
    sio.dump(pipeline, model)
    box = mailbox.mbox(root / "test.mbox")
    for path in mail["test"][:40]:
        box.add(path.read_bytes())
    box.close()
    out = root / "ledger-mbox.jsonl"
    result = nbledger(capsys, "ledger", model, root / "test.mbox", "--out", out)
    assert result.code == 0, result.err
    rows = pd.read_json(out, lines=True, dtype=False)
    # Reference: the messages as the standard library's mailbox gives them back, scored by scikit-learn.
    box = mailbox.mbox(root / "test.mbox")
    view = resolve_text_view(None, None)
    texts = [decode_utf8(box.get_bytes(k))[0] if view == "raw" else read_email(box.get_bytes(k)).text(view) for k in box.keys()]
    box.close()
    assert len(rows) == 40
    assert rows["decided"].tolist() == pipeline.predict(texts).tolist()
