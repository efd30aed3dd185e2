"""The e-mail reader: RFC 2047 headers, RFC 2045 transfer encodings, charsets, attachments, limits."""

from __future__ import annotations

import tracemalloc
from pathlib import Path
from email.message import EmailMessage

import pytest
from hypothesis import given
from hypothesis import strategies as st

from explain.errors import NbledgerError
from explain.model.email_reader import (
    Limits,
    looks_like_email,
    read_email,
    resolve_text_view,
    summarise,
)

# ---------------------------------------------------------------------------- RFC 2047 headers

# RFC 2047 section 8 ("Examples"). The encoded inputs match the copy of that section in git's
# test suite (git/git t/t5100/rfc2047-samples.mbox); the displayed forms are those the RFC's
# table gives, recalled, and confirmed in the test by the standard library's RFC 2047 decoder
# (email.header.decode_header and make_header). Runs of white space collapse to one space, as
# the reader does for every header value.
RFC2047_SECTION_8 = [
    ("=?US-ASCII?Q?Keith_Moore?= <moore@cs.utk.edu>", "Keith Moore <moore@cs.utk.edu>"),
    ("=?ISO-8859-1?Q?Keld_J=F8rn_Simonsen?= <keld@dkuug.dk>", "Keld J\u00f8rn Simonsen <keld@dkuug.dk>"),
    ("=?ISO-8859-1?Q?Andr=E9?= Pirard <PIRARD@vm1.ulg.ac.be>", "Andr\u00e9 Pirard <PIRARD@vm1.ulg.ac.be>"),
    (
        "=?ISO-8859-1?B?SWYgeW91IGNhbiByZWFkIHRoaXMgeW8=?=\n =?ISO-8859-2?B?dSB1bmRlcnN0YW5kIHRoZSBleGFtcGxlLg==?=",
        "If you can read this you understand the example.",
    ),
    ("(=?ISO-8859-1?Q?a?=)", "(a)"),
    ("(=?ISO-8859-1?Q?a?= b)", "(a b)"),
    ("(=?ISO-8859-1?Q?a?= =?ISO-8859-1?Q?b?=)", "(ab)"),
    ("(=?ISO-8859-1?Q?a?=  =?ISO-8859-1?Q?b?=)", "(ab)"),
    ("(=?ISO-8859-1?Q?a?=\n    =?ISO-8859-1?Q?b?=)", "(ab)"),
    ("(=?ISO-8859-1?Q?a_b?=)", "(a b)"),
    ("(=?ISO-8859-1?Q?a?= =?ISO-8859-2?Q?_b?=)", "(a b)"),
]


@pytest.mark.parametrize("encoded, shown", RFC2047_SECTION_8)
def test_rfc2047_section_8_examples(encoded, shown):
    from email.header import decode_header, make_header

    assert " ".join(str(make_header(decode_header(encoded))).split()) == shown
    raw = f"From: {encoded}\nSubject: {encoded}\n\nbody\n".encode("ascii")
    mail = read_email(raw)
    assert (mail.subject, mail.sender) == (shown, shown)
    assert mail.text("subject+body") == f"{shown}\n\nbody\n"
    assert mail.text("headers+body").splitlines()[:2] == [f"From: {shown}", f"Subject: {shown}"]
    assert not mail.undecodable


def test_undecodable_encoded_word_is_kept_and_listed():
    mail = read_email(b"Subject: =?x-no-such-charset?q?caf=E9?= news\n\nbody\n")
    assert "news" in mail.subject
    assert [u.kind for u in mail.undecodable] == ["bad-encoded-word"]


# ---------------------------------------------------------------------------- RFC 2045 transfer encodings


def _part(cte: str, payload: bytes, charset: str = "us-ascii") -> bytes:
    return (
        b"Subject: t\nMIME-Version: 1.0\nContent-Type: text/plain; charset=" + charset.encode()
        + b"\nContent-Transfer-Encoding: " + cte.encode() + b"\n\n" + payload
    )


def test_rfc2045_quoted_printable_soft_line_breaks():
    # RFC 2045 section 6.7, rule (5), its example of soft line breaks (recalled; the expected text is
    # confirmed by the standard library's RFC 2045 decoder, quopri).
    import quopri

    payload = b"Now's the time =\nfor all folk to come=\n to the aid of their country.\n"
    assert quopri.decodestring(payload) == b"Now's the time for all folk to come to the aid of their country.\n"
    assert read_email(_part("quoted-printable", payload)).body == (
        "Now's the time for all folk to come to the aid of their country.\n"
    )


def test_rfc2045_quoted_printable_octets():
    # RFC 2045 section 6.7, rule (1): "=" followed by two hexadecimal digits is that octet;
    # "=3D" is the equals sign itself (recalled; confirmed by the standard library's quopri).
    # Octet E9 in ISO-8859-1 is e-acute (Python's iso-8859-1 codec).
    import quopri

    payload = b"caf=E9 =3D 2 =\n\n"
    assert quopri.decodestring(payload).decode("iso-8859-1") == "caf\u00e9 = 2 \n"
    assert read_email(_part("quoted-printable", payload, "iso-8859-1")).body == "caf\u00e9 = 2 \n"


@pytest.mark.parametrize(
    "encoded, decoded",
    # RFC 4648 section 10 test vectors (the base64 alphabet of RFC 2045 section 6.8); recalled, and
    # confirmed in the test by the standard library's base64 (an RFC 4648 implementation).
    [(b"Zg==", "f"), (b"Zm8=", "fo"), (b"Zm9v", "foo"), (b"Zm9vYg==", "foob"), (b"Zm9vYmE=", "fooba"),
     (b"Zm9vYmFy", "foobar")],
)
def test_rfc2045_base64(encoded, decoded):
    import base64

    assert base64.b64decode(encoded) == decoded.encode("ascii")
    assert read_email(_part("base64", encoded + b"\n")).body == decoded


def test_rfc2045_base64_ignores_line_breaks_and_characters_outside_the_alphabet():
    # RFC 2045 section 6.8: characters not in the alphabet are ignored (recalled; the standard
    # library's base64.b64decode with validate=False, which discards them, agrees).
    import base64

    assert base64.b64decode(b"Zm9v\nYm\x01Fy\n", validate=False) == b"foobar"
    assert read_email(_part("base64", b"Zm9v\nYm\x01Fy\n")).body == "foobar"


_LINE_TEXT = st.text(
    alphabet=st.one_of(st.characters(blacklist_categories=("Cs", "Cc", "Zl", "Zp")), st.just("\n")),
    min_size=1,
    max_size=300,
)


@given(text=_LINE_TEXT, cte=st.sampled_from(["base64", "quoted-printable", "8bit"]))
def test_any_text_survives_each_transfer_encoding(text, cte):
    message = EmailMessage()
    message["Subject"] = "t"
    message.set_content(text, cte=cte)
    expected = text if text.endswith("\n") else text + "\n"  # set_content ends the last line
    assert read_email(message.as_bytes()).body == expected


# ---------------------------------------------------------------------------- structure


def test_alternative_prefers_plain_and_html_becomes_text():
    message = EmailMessage()
    message["Subject"] = "levy"
    message.set_content("plain words\n")
    message.add_alternative("<p>html <b>words</b></p>", subtype="html")
    assert read_email(message.as_bytes()).body == "plain words\n"
    html_only = EmailMessage()
    html_only.set_content("<p>the <i>levy</i> is&nbsp;due</p><script>x=1</script>", subtype="html")
    assert read_email(html_only.as_bytes()).body == "the levy is due"


def test_attachments_are_listed_with_measured_size_never_parsed():
    message = EmailMessage()
    message["Subject"] = "price list"
    message.set_content("see the attached list\n")
    pdf = b"%PDF-1.4 price list words that must not be read"
    message.add_attachment(pdf, maintype="application", subtype="pdf", filename="prices.pdf")
    mail = read_email(message.as_bytes())
    assert mail.body == "see the attached list\n"
    assert [(a.name, a.content_type, a.size) for a in mail.attachments] == [("prices.pdf", "application/pdf", len(pdf))]
    assert not mail.attachment_only


def test_attachment_only_message():
    message = EmailMessage()
    message.add_attachment(b"\x89PNG", maintype="image", subtype="png", filename="a.png")
    mail = read_email(message.as_bytes())
    assert mail.attachment_only and summarise([mail]) == ("1 of 1 messages carry attachments and no text",)


def test_ids_subject_and_sender():
    mail = read_email(b"From: Ann <ann@example.org>\nMessage-ID: <x1@example.org>\nSubject: Hi\n\nb\n")
    assert (mail.sender, mail.subject, mail.message_id) == ("Ann <ann@example.org>", "Hi", "<x1@example.org>")


# ---------------------------------------------------------------------------- charsets


def test_unknown_charset_is_read_as_utf8_and_listed_once():
    raw = _part("8bit", "caf\u00e9 harbour\n".encode(), "x-tideway-7")
    mail = read_email(raw)
    assert mail.body == "caf\u00e9 harbour\n"
    assert [(u.charset, u.kind) for u in mail.undecodable] == [("x-tideway-7", "unknown-charset")]
    assert summarise([mail]) == ("1 of 1 messages: unknown charset, read as UTF-8",)


def test_bytes_not_in_the_charset_become_replacement_characters():
    mail = read_email(_part("8bit", b"ok \xff\xfe bytes\n", "utf-8"))
    assert mail.body == "ok \ufffd\ufffd bytes\n"
    assert [u.kind for u in mail.undecodable] == ["invalid-bytes"]


def test_a_codec_that_is_not_a_text_encoding_counts_as_unknown():
    mail = read_email(_part("8bit", b"plain words\n", "base64"))
    assert mail.body == "plain words\n" and [u.kind for u in mail.undecodable] == ["unknown-charset"]


# ---------------------------------------------------------------------------- limits


def _nested(levels: int) -> bytes:
    opening = b"".join(b"Content-Type: multipart/mixed; boundary=b%d\n\n--b%d\n" % (i, i) for i in range(levels))
    closing = b"".join(b"\n--b%d--\n" % i for i in reversed(range(levels)))
    return b"From: a@example.org\nSubject: deep\nMIME-Version: 1.0\n" + opening + b"Content-Type: text/plain\n\nleaf\n" + closing


def _peak_bytes(call):
    tracemalloc.start()
    try:
        result = call()
        return result, tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()


def test_ten_thousand_nested_parts_give_one_problem_and_no_crash():
    raw = _nested(10_000)
    mail, peak = _peak_bytes(lambda: read_email(raw))
    assert mail.problems == ("more than 1,000 multipart parts; the MIME structure was not read",)
    assert mail.raw_fallback
    assert peak < 20 * len(raw)  # the raw text once or twice, not a parse tree of 10,000 parts


def test_nesting_past_the_depth_limit_is_cut_there():
    mail = read_email(_nested(20), Limits(max_depth=5))
    assert mail.problems == ("parts nested deeper than 5 levels were not read",)
    assert mail.body == "" and not mail.raw_fallback
    assert read_email(_nested(20)).body == "leaf\n"


def test_parts_past_the_part_limit_are_not_read():
    message = EmailMessage()
    message.set_content("first\n")
    for i in range(10):
        message.add_attachment(f"text {i}\n", filename=f"{i}.txt")
    mail = read_email(message.as_bytes(), Limits(max_parts=4))
    assert mail.problems == ("parts past the first 4 were not read",)
    assert mail.body.startswith("first\n")


def test_a_declared_one_gigabyte_part_is_measured_not_trusted():
    # A small file whose base64 part declares 1 GiB (Content-Length, RFC 2183 size=).
    raw = (
        b"From: a@example.org\nSubject: big\nMIME-Version: 1.0\nContent-Type: multipart/mixed; boundary=z\n\n"
        b"--z\nContent-Type: text/plain\n\nsee attached\n"
        b"--z\nContent-Type: application/octet-stream\nContent-Transfer-Encoding: base64\n"
        b"Content-Length: 1073741824\nContent-Disposition: attachment; filename=big.bin; size=1073741824\n\n"
        b"Zm9vYmFy\n--z--\n"
    )
    mail, peak = _peak_bytes(lambda: read_email(raw))
    assert [(a.name, a.size) for a in mail.attachments] == [("big.bin", 6)]
    assert peak < 1024 * 1024


def test_a_base64_part_past_the_decoded_size_limit_is_not_decoded():
    limit = 1024 * 1024
    big = b"QUJD" * (limit // 2)  # 2 MiB of base64, 1.5 MiB decoded
    raw = (
        b"Subject: big\nMIME-Version: 1.0\nContent-Type: multipart/mixed; boundary=z\n\n"
        b"--z\nContent-Type: text/plain\n\nsee attached\n"
        b"--z\nContent-Type: application/octet-stream\nContent-Transfer-Encoding: base64\n\n" + big + b"\n--z--\n"
    )
    mail, peak = _peak_bytes(lambda: read_email(raw, Limits(max_decoded_bytes=limit)))
    assert mail.problems == (f"parts past the reading limit of {limit:,} decoded bytes were not read",)
    assert [(a.content_type, a.size) for a in mail.attachments] == [("application/octet-stream", None)]
    assert mail.body == "see attached"  # the line break before a boundary belongs to it (RFC 2046 5.1.1)
    # Memory follows the raw size, not the payload: the standard parser holds the raw text
    # several times over (measured: a peak of 21.8 MB for this 2.1 MB message, about 10x).
    assert peak < 16 * len(raw)


# ---------------------------------------------------------------------------- recognising and views


@pytest.mark.parametrize(
    "head, is_mail",
    [
        (b"From: a@example.org\nSubject: hi\n\nbody", True),
        (b"From nobody Mon Sep 17 00:00:00 2001\nFrom: a@example.org\nDate: x\n\nb", True),
        (b"Received: from x\n\tby y\nMessage-ID: <1@x>\n\nb", True),
        (b"Subject: the levy\n\nplease pay", False),  # one mail field is a note, not an e-mail
        (b"Hi, your parcel fee: pay at http://x.example.net\n", False),
        (b"From: a\nthis line is not a header\n\nbody", False),
    ],
)
def test_looks_like_email(head, is_mail):
    assert looks_like_email(head) is is_mail


def test_resolve_text_view_follows_the_card_and_refuses_a_mismatch():
    card = {"settings": {"text_view": "subject+body"}}
    assert resolve_text_view(card) == "subject+body"
    assert resolve_text_view(card, "subject+body") == "subject+body"
    # Without a card recording a view, the text as given (the raw text view).
    assert resolve_text_view(None) == "raw" and resolve_text_view({"settings": {}}, "headers+body") == "headers+body"
    with pytest.raises(NbledgerError, match="differs from the model card"):
        resolve_text_view(card, "body")
    with pytest.raises(NbledgerError, match="records training on the subject.body view"):
        resolve_text_view(card, "raw")
    with pytest.raises(NbledgerError, match="unknown text view"):
        resolve_text_view(None, "subject")


_NOTICE = (Path(__file__).resolve().parent.parent / "demo_corpus" / "examples" / "notice.eml").read_bytes()


@given(cut=st.integers(0, len(_NOTICE)), junk=st.binary(max_size=64), at=st.integers(0, len(_NOTICE)))
def test_damaged_messages_never_raise(cut, junk, at):
    damaged = _NOTICE[:at] + junk + _NOTICE[at:cut]
    mail = read_email(damaged)
    for view in ("body", "subject+body", "headers+body"):
        mail.text(view).encode("utf-8")  # valid Unicode, no lone surrogates
