"""The e-mail reader's text rules "2" (issue 20, item 3): markup in text/plain, encoded files, the decoding flag."""

from __future__ import annotations

import base64
import binascii

from hypothesis import given
from hypothesis import strategies as st
from sklearn.feature_extraction.text import CountVectorizer
from sklearn.naive_bayes import MultinomialNB
from sklearn.pipeline import make_pipeline

from explain.analysis.ledger import ledger_of
from explain.analysis.mail_facts import mail_facts
from explain.model.email_reader import read_email, text_rules_of
from explain.model.text_blobs import looks_like_html, split_blobs
from tests.corpora import loaded

HEAD = "From: Harbour Office <office@example.org>\nTo: member@example.net\nSubject: tools\n"


def _message(body: str, content_type: str = "text/plain; charset=utf-8") -> bytes:
    return f"{HEAD}Content-Type: {content_type}\n\n{body}".encode("utf-8")


def _uuencode(data: bytes, name: str) -> str:
    # The standard library's encoder, 45 bytes a line (POSIX uuencode's line length).
    lines = "".join(binascii.b2a_uu(data[i:i + 45]).decode("ascii") for i in range(0, len(data), 45))
    return f"begin 644 {name}\n{lines}`\nend\n"


@given(st.binary(min_size=1, max_size=4000))
def test_a_uuencoded_file_is_cut_out_and_listed_with_the_size_binascii_decodes(data):
    block = _uuencode(data, "ladder-rota.xls")
    email = read_email(_message(f"The rota is attached below.\n{block}Thanks, the workshop\n"))
    # Round trip with the standard library: binascii.a2b_uu of every line of the block.
    decoded = b"".join(binascii.a2b_uu(line) for line in block.splitlines()[1:-1])
    assert decoded == data
    assert [(a.name, a.size) for a in email.attachments] == [("ladder-rota.xls", len(decoded))]
    assert email.cleaned == ("uuencode",)
    assert email.body.split() == "The rota is attached below. Thanks, the workshop".split()


def test_a_uuencoded_file_with_trailing_spaces_stripped_by_a_mailer_still_decodes():
    data = bytes(range(256)) * 3
    block = "\n".join(line.rstrip(" ") for line in _uuencode(data, "x.bin").splitlines())
    email = read_email(_message(f"see\n{block}\n"))
    assert [(a.name, a.size) for a in email.attachments] == [("x.bin", len(data))]


@given(st.binary(min_size=150, max_size=3000))
def test_a_base64_block_is_cut_out_with_its_decoded_size(data):
    encoded = base64.encodebytes(data).decode("ascii")  # RFC 2045 lines of 76 (standard library)
    email = read_email(_message(f"Key for the door panel:\n{encoded}Keep it safe.\n"))
    sizes = [a.size for a in email.attachments]
    if any(c.isdigit() for c in encoded) and any(c.isupper() for c in encoded) and any(c.islower() for c in encoded):
        assert sizes == [len(base64.b64decode(encoded))] and email.cleaned == ("base64-run",)
        assert "Keep it safe." in email.body and not any(len(w) > 40 for w in email.body.split())


def test_a_long_hex_run_is_cut_and_a_digest_is_kept():
    digest = "9f" * 32  # a SHA-256 digest: 64 hex digits, kept as text
    run = bytes(range(100)).hex()  # 200 hex digits
    email = read_email(_message(f"checksum {digest}\ndump {run} end\n"))
    assert [(a.content_type, a.size) for a in email.attachments] == [("hex digits in the text", 100)]
    assert digest in email.body and run not in email.body


def test_a_long_path_or_word_is_not_an_encoded_file():
    text = "see " + "/".join(["harbour"] * 40) + " and " + "a" * 300 + "\n"
    assert split_blobs(text) == (text, ())


MARKUP = (
    "<html><body><font face=arial size=2 color=#000066>Cheap <b>loans</b> today<br>"
    "<table><tr><td>Rates&nbsp;from 1%</td></tr></table></font></body></html>"
)


def test_html_in_a_text_plain_part_reads_as_the_same_part_sent_as_text_html():
    as_plain = read_email(_message(MARKUP))
    as_html = read_email(_message(MARKUP, "text/html; charset=utf-8"))
    assert as_plain.body == as_html.body == "Cheap loans today\nRates from 1%"  # nbsp becomes white space
    assert as_plain.cleaned == ("html-in-plain",) and as_html.cleaned == ()
    # Under rules "1" (models trained before them) the tags stay words.
    assert "font" in read_email(_message(MARKUP), rules="1").body


def test_a_mention_of_a_tag_is_not_a_document():
    assert not looks_like_html("Use <br> for a line break and <p> for a paragraph, says the style guide.")
    assert looks_like_html("<html>hi</html>")


def test_the_card_decides_the_rules():
    assert text_rules_of(None) == "2"
    assert text_rules_of({"settings": {"text_view": "body"}}) == "1"  # trained on e-mail before the rules
    assert text_rules_of({"settings": {"text_view": "body", "text_rules": "2"}}) == "2"


def test_tokens_of_a_part_read_with_a_fallback_are_flagged_decoding_not_mixed_script():
    # "пay" mixes Cyrillic and Latin letters; in a part whose bytes are not valid in its charset, it is
    # flagged decoding; sent cleanly it keeps mixed_script.
    texts = ["пay the fee now", "fee fee пay", "tea at the harbour", "harbour tools"]
    pipeline = make_pipeline(CountVectorizer(), MultinomialNB()).fit(texts, ["scam", "scam", "ok", "ok"])
    model = loaded(pipeline, normal_class="ok")
    broken = f"{HEAD}Content-Type: text/plain; charset=utf-8\n\n".encode() + "пay the fee ".encode() + b"\xff\n"
    clean = _message("пay the fee\n")
    for raw, expected in ((broken, ("decoding",)), (clean, ("mixed_script",))):
        email = read_email(raw)
        ledger = ledger_of(model, email.text("body"), mail=mail_facts(email, "body"))
        flags = {e.token: e.flags for e in ledger.entries}
        assert tuple(f for f in flags["пay"] if f in ("decoding", "mixed_script")) == expected, flags
