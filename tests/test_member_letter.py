"""The member letter, the Internal mark of team papers, and planted people kept off both (issue 18)."""

from __future__ import annotations

import re

import pytest

from clirun import nbledger
from pdf_text import pdftotext_pages

# Invented people and reserved values planted in the held message.
PLANTED = ["Oksana", "Petrenko", "Tomasz", "Nowak", "4111 1111 1111 1111", "GB82 WEST 1234 5698 7654 32",
           "12-34-56", "31926819", "555-0142", "12/03/1984", "14 Gull Yard", "TD4 7QX", "warden@example.org",
           "2001:db8::17", "192.0.2.14"]
MESSAGE = (
    "Dear Oksana Petrenko,\nyour parcel fee is unpaid, pay now with card 4111 1111 1111 1111 or IBAN "
    "GB82 WEST 1234 5698 7654 32, sort code 12-34-56, account 31926819. Call (202) 555-0142. DOB 12/03/1984.\n"
    "Deliver to 14 Gull Yard, TD4 7QX. Oksana, reply to warden@example.org from 2001:db8::17 or 192.0.2.14.\n"
    "Kind regards,\nTomasz Nowak\n"
)
LETTER = ["--organisation", "Tideway Commons", "--contact", "office@tideway.example.org",
          "--appeal", "reply to this letter within 28 days"]


@pytest.fixture(scope="module")
def model(tmp_path_factory):
    from explain.cli import run

    folder = tmp_path_factory.mktemp("letter")
    data = folder / "train.csv"
    rows = [("pay the parcel fee now link", "scam"), ("your parcel fee is unpaid pay today card", "scam"),
            ("depot fee pay at the link account", "scam"), ("thanks for the drill back today", "ok"),
            ("tea at the workshop at four", "ok"), ("can I borrow your ladder thanks", "ok"),
            ("dear all the garden day is on", "ok"), ("kind regards from the rota", "ok")]
    data.write_text("text,label\n" + "".join(f"{t},{l}\n" for t, l in rows))
    assert run(["train", str(data), "--text-col", "text", "--label-col", "label",
                "--out", str(folder / "m.skops"), "--normal-class", "ok"]) == 0
    (folder / "held.txt").write_text(MESSAGE)
    return folder


def _pdf_pages(path):
    from pypdf import PdfReader

    return [page.extract_text() for page in PdfReader(str(path)).pages]


def test_the_member_letter_says_what_why_who_and_how_to_appeal_and_nothing_else(model, capsys):
    out = model / "letter.txt"
    done = nbledger(capsys, "why", str(model / "m.skops"), "--file", str(model / "held.txt"),
                    "--audience", "member", *LETTER, "--out", str(out))
    assert done.code == 0, done.err
    text = " ".join(out.read_text().split())
    for needed in ("held your message", "statistical model", "review", "reply to this letter within 28 days",
                   "office@tideway.example.org", "Tideway Commons"):
        assert needed in text, needed
    _plain_for_the_member(text)


# No flip set, no advice on removing or adding words, no figures of the model, no Internal mark.
BANNED = ("log-odds", "log odds", "debit", "credit", "prior", "remov", "add ", "adding", "would change", "smaller set",
          "P(", "jll", "balance", "Internal")


def _plain_for_the_member(text: str) -> None:
    for banned in BANNED:
        assert banned.lower() not in text.lower(), banned
    assert not re.search(r"[+-]?\d+\.\d\d", text)  # no scores
    for value in PLANTED:
        assert value not in text, value


def _visible(html: str) -> str:
    """The words of an HTML page a reader sees: no style, no tags, entities as characters."""
    import html as html_module

    body = re.sub(r"(?s)<(style|head)\b.*?</\1>", " ", html)
    return " ".join(html_module.unescape(re.sub(r"<[^>]+>", " ", body)).split())


def test_the_letter_as_pdf_and_html_holds_no_planted_value_and_no_internal_mark(model, capsys):
    for suffix in (".pdf", ".html"):
        out = model / f"letter{suffix}"
        done = nbledger(capsys, "why", str(model / "m.skops"), "--file", str(model / "held.txt"),
                        "--audience", "member", *LETTER, "--out", str(out))
        assert done.code == 0, done.err
        pages = [" ".join(p.split()) for p in (pdftotext_pages(out) if suffix == ".pdf" else [_visible(out.read_text())])]
        assert pages and "held your message" in " ".join(pages)
        for page in pages:
            _plain_for_the_member(page)
        if suffix == ".html":
            assert "Internal" not in out.read_text()  # not in the page's head either


def test_every_page_of_a_team_sheet_says_internal_and_holds_no_planted_value(model, capsys):
    """The sheet (PDF read by pypdf and by poppler, HTML), and the ledger records (.txt, .json): Internal on every
    page or in the document, no planted value anywhere; without --redact (the control) the values are there."""
    out = model / "sheet.pdf"
    done = nbledger(capsys, "why", str(model / "m.skops"), "--file", str(model / "held.txt"), "--redact",
                    "--out", str(out))
    assert done.code == 0, done.err
    for pages in (_pdf_pages(out), pdftotext_pages(out)):
        assert pages and all("Internal" in page for page in pages)
        for page in pages:
            for value in PLANTED:
                assert value not in " ".join(page.split()), value
    written = {}
    for suffix in (".html", ".txt", ".json"):
        record = model / f"sheet{suffix}"
        assert nbledger(capsys, "why", str(model / "m.skops"), "--file", str(model / "held.txt"), "--redact",
                        "--out", str(record)).code == 0
        written[suffix] = record.read_text()
    assert 'content="Internal"' in written[".html"] and "Internal" in _visible(written[".html"])
    assert written[".txt"].startswith("Internal") and '"circulation": "internal"' in written[".json"]
    for suffix, text in written.items():
        for value in PLANTED:
            assert value not in " ".join(text.split()), (suffix, value)
    control = model / "plain.txt"
    assert nbledger(capsys, "why", str(model / "m.skops"), "--file", str(model / "held.txt"), "--no-redact",
                    "--out", str(control)).code == 0
    assert "Oksana" in control.read_text() and "warden@example.org" in control.read_text()


def test_a_written_record_is_masked_by_default_and_the_screen_shows_the_text(model, capsys):
    """Papers circulate: `--out` masks people's details without being asked; the analyst's own screen shows the
    message as given unless --redact (common practice, no source)."""
    for suffix in (".txt", ".json", ".pdf"):
        record = model / f"default{suffix}"
        assert nbledger(capsys, "why", str(model / "m.skops"), "--file", str(model / "held.txt"),
                        "--out", str(record)).code == 0
        text = " ".join(pdftotext_pages(record)) if suffix == ".pdf" else record.read_text()
        for value in PLANTED:
            assert value not in " ".join(text.split()), (suffix, value)
    screen = nbledger(capsys, "why", str(model / "m.skops"), "--file", str(model / "held.txt"), "--color", "never")
    assert screen.code == 0 and "Oksana" in screen.out
    masked = nbledger(capsys, "why", str(model / "m.skops"), "--file", str(model / "held.txt"), "--color", "never",
                      "--redact")
    assert masked.code == 0 and "Oksana" not in masked.out


def test_settings_file_and_bad_input_are_one_error_line(model, capsys):
    settings = model / "letter.toml"
    settings.write_text('organisation = "Tideway Commons"\ncontact = "office@tideway.example.org"\n'
                        'appeal = "reply within 28 days"\n')
    args = ["why", str(model / "m.skops"), "--file", str(model / "held.txt"), "--audience", "member"]
    done = nbledger(capsys, *args, "--letter-settings", str(settings))
    assert done.code == 0 and "reply within 28 days" in done.out
    settings.write_text('organisation = "T"\ncontact = "c"\nappeal = "a"\nsignature = "x"\ncolour = "red"\n')
    done = nbledger(capsys, *args, "--letter-settings", str(settings))
    assert done.code == 2 and "unknown keys: colour, signature" in done.one_error_line()
    done = nbledger(capsys, *args)
    assert done.code == 2 and "needs organisation, contact, appeal" in done.one_error_line()
    done = nbledger(capsys, "why", str(model / "m.skops"), "--file", str(model / "held.txt"), "--audience", "boss")
    assert done.code == 2 and "--audience must be team or member" in done.one_error_line()
    (model / "empty.key").write_bytes(b"")
    # missing, empty, a folder, and unreadable (a path under a file: NotADirectoryError, whoever runs the test)
    for key in (model / "missing.key", model / "empty.key", model, model / "empty.key" / "org.key"):
        out = model / "refused.pdf"
        done = nbledger(capsys, *args, *LETTER, "--id-key-file", str(key), "--out", str(out))
        assert done.code == 2 and "id key file" in done.one_error_line(), key
        assert not out.exists()  # nothing half-written


def test_sheet_wording_says_seen_in_words_and_a_balance_on_the_line(model):
    import dataclasses

    from corpora import loaded, make_pipeline
    from explain.analysis.ledger import ledger_of
    from explain.analysis.vocab import document_counts
    from explain.present.ledger_words import closing_figure, closing_odds, ledger_notes, seen_sentence

    texts = ["pay the parcel fee", "parcel fee pay now", "tea at the hall", "the hall is open"]
    labels = ["scam", "scam", "ok", "ok"]
    pipeline = make_pipeline("counts", "multinomial").fit(texts, labels)
    model = loaded(pipeline, normal_class="ok")
    ledger = ledger_of(model, "pay the parcel fee the")
    entry = {e.token: e for e in ledger.entries}
    # counted by hand from the four training texts (common practice, no source); the "seen" column's order
    assert seen_sentence(entry["parcel"], ledger) == "'parcel' occurs twice in scam and never in ok training messages"
    assert seen_sentence(entry["the"], ledger) == "'the' occurs once in scam and twice in ok training messages"
    notes = " ".join(ledger_notes(ledger, folding=False, top=10))
    assert "seen: training occurrences of the word, scam/ok" in notes
    # counts from a labelled file that is not the training data name the file, never "training"
    counted = document_counts(model.view, model.featurizer.transform(texts[:3]), labels[:3], "test.csv")
    other = ledger_of(model, "pay the parcel fee", documents=counted)
    parcel = next(e for e in other.entries if e.token == "parcel")
    assert seen_sentence(parcel, other) == "'parcel' was seen in 2 scam and 0 ok messages of test.csv"
    assert "training" not in " ".join(ledger_notes(other, folding=False, top=10))
    # the training file with held-out messages counts more than the training messages: it is named too
    held = dataclasses.replace(other, support_source="train.csv, the training data of the model card (held-out messages included)")
    assert "training messages" not in seen_sentence(parcel, held) and "messages of train.csv" in seen_sentence(parcel, held)
    whole = dataclasses.replace(other, support_source="train.csv, the training data of the model card")
    assert seen_sentence(parcel, whole).endswith("scam and 0 ok training messages")
    on_line = dataclasses.replace(ledger, closing=ledger.decision_line)
    assert closing_odds(on_line).startswith("exactly on the decision line")
    # a balance a hair off the line shows enough digits to tell which side it is on (common practice, no source)
    near = dataclasses.replace(ledger, closing=ledger.decision_line + 0.0004)
    assert closing_figure(near) == "+0.0004" and closing_figure(ledger) == f"{ledger.closing:+.2f}"


def test_masked_unknown_words_of_one_value_are_listed_once(model):
    """'4111 1111 1111 1111' is four unknown tokens of one card: "[card 1] x4", not "[card 1] x3, [card 1]"."""
    from corpora import loaded, make_pipeline
    from explain.analysis.ledger import ledger_of, redacted

    pipeline = make_pipeline("counts", "multinomial").fit(
        ["pay the parcel fee", "parcel fee pay now", "tea at the hall", "the hall is open"], ["scam", "scam", "ok", "ok"]
    )
    ledger = redacted(ledger_of(loaded(pipeline, normal_class="ok"), "pay the fee by card 4111 1111 1111 1111 now"))
    unknown = {u.token: u.count for u in ledger.unknown}
    assert unknown.get("[card 1]") == 4 and [u.token for u in ledger.unknown].count("[card 1]") == 1
    # its spans point at the placeholder in the masked text, once
    spans = next(u.spans for u in ledger.unknown if u.token == "[card 1]")
    assert [ledger.text[a:b] for a, b in spans] == ["[card 1]"]
