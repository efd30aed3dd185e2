"""The member letter, the Internal mark of team papers, and planted people kept off both (issue 18)."""

from __future__ import annotations

import re

import pytest

from clirun import nbledger

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
    # no flip set, no advice on removing or adding words, no figures of the model
    for banned in ("log-odds", "debit", "credit", "prior", "remov", "add ", "would change", "P(", "Internal"):
        assert banned.lower() not in text.lower(), banned
    assert not re.search(r"\d+\.\d\d", text)  # no scores
    for value in PLANTED:
        assert value not in text, value


def test_the_letter_as_pdf_and_html_holds_no_planted_value_and_no_internal_mark(model, capsys):
    for suffix in (".pdf", ".html"):
        out = model / f"letter{suffix}"
        done = nbledger(capsys, "why", str(model / "m.skops"), "--file", str(model / "held.txt"),
                        "--audience", "member", *LETTER, "--out", str(out))
        assert done.code == 0, done.err
        pages = [" ".join(p.split()) for p in (_pdf_pages(out) if suffix == ".pdf" else [out.read_text()])]
        for page in pages:
            assert "Internal" not in page and "held your message" in " ".join(pages)
            for value in PLANTED:
                assert value not in page, value


def test_every_page_of_a_team_sheet_says_internal_and_holds_no_planted_value(model, capsys):
    out = model / "sheet.pdf"
    done = nbledger(capsys, "why", str(model / "m.skops"), "--file", str(model / "held.txt"), "--redact",
                    "--out", str(out))
    assert done.code == 0, done.err
    pages = _pdf_pages(out)
    assert pages and all("Internal" in page for page in pages)
    for page in pages:
        for value in PLANTED:
            assert value not in page.replace("\n", " "), value
    html = model / "sheet.html"
    assert nbledger(capsys, "why", str(model / "m.skops"), "--file", str(model / "held.txt"), "--redact",
                    "--out", str(html)).code == 0
    assert "Internal" in html.read_text()


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
    for key in (model / "missing.key", model / "empty.key"):
        if key.name == "empty.key":
            key.write_bytes(b"")
        done = nbledger(capsys, *args, *LETTER, "--id-key-file", str(key))
        assert done.code == 2 and "id key file" in done.one_error_line()


def test_sheet_wording_says_seen_in_words_and_a_balance_on_the_line(model):
    import dataclasses

    from corpora import loaded, make_pipeline
    from explain.analysis.ledger import ledger_of
    from explain.present.ledger_words import closing_figure, closing_odds, ledger_notes

    pipeline = make_pipeline("counts", "multinomial").fit(
        ["pay the parcel fee", "parcel fee pay now", "tea at the hall", "the hall is open"], ["scam", "scam", "ok", "ok"]
    )
    ledger = ledger_of(loaded(pipeline, normal_class="ok"), "pay the parcel fee")
    notes = " ".join(ledger_notes(ledger, folding=False, top=10))
    assert "times in ok and" in notes and "training messages" in notes
    on_line = dataclasses.replace(ledger, closing=ledger.decision_line)
    assert closing_odds(on_line).startswith("exactly on the decision line")
    # a balance a hair off the line shows enough digits to tell which side it is on (common practice, no source)
    near = dataclasses.replace(ledger, closing=ledger.decision_line + 0.0004)
    assert closing_figure(near) == "+0.0004" and closing_figure(ledger) == f"{ledger.closing:+.2f}"
