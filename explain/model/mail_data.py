"""Data sets of raw e-mail: a folder of ``.eml`` files, an mbox file, or a table of raw messages.

Each message is read by :func:`explain.model.email_reader.read_email` and becomes the
text of one view; the result is the same :class:`~explain.model.data_io.Messages` that
tables give, so every command reads e-mail and tables alike.

- **Folder**: the ``*.eml`` files under it, in path order; symbolic links (to files or
  folders) are skipped, never followed. With ``labels_from_folders`` each sub-folder of the top folder is a
  label and holds that label's messages; with ``label`` every message gets that label.
- **mbox** (RFC 4155; recognised by a ``.mbox``/``.mbx`` suffix or a leading ``From ``
  line): every message, all with ``label``.
- **Table** with ``raw_email``: the text column holds whole raw messages (UTF-8).

Ids are the Message-ID header when there is one, else the file name (``name#n`` for the
n-th message of an mbox); a table keeps its own ids. A message file larger than
``Limits.max_message_bytes`` is cut there. What the reader had to do (fallback charsets,
limits, attachment-only messages) is counted in ``Messages.notes``.
"""

from __future__ import annotations

import hashlib
import mailbox
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np

from explain.errors import NbledgerError
from explain.model.data_io import Messages, read_messages
from explain.model.email_reader import (
    CLEANING, CURRENT_RULES, DEFAULT_VIEW, RAW_VIEW, EmailText, Limits, check_rules, check_view, read_email,
    summarise,
)
from explain.model.data_io import decode_utf8

MBOX_SUFFIXES = (".mbox", ".mbx")
_TABLE_SUFFIXES = (".csv", ".jsonl", ".ndjson", ".parquet", ".gz")


@dataclass(frozen=True)
class MailInput:
    """How a data command reads raw e-mail (its ``--raw-email``, ``--labels-from-folders``,
    ``--label`` and ``--text-view`` options)."""

    raw_email: bool = False
    labels_from_folders: bool = False
    label: str | None = None
    view: str = DEFAULT_VIEW
    limits: Limits = Limits()
    #: the reader's text rules (:data:`explain.model.email_reader.TEXT_RULES`), from the model card
    rules: str = CURRENT_RULES

    def __post_init__(self):
        check_view(self.view, raw=True)
        check_rules(self.rules)
        if self.label is not None and not self.label.strip():
            raise NbledgerError("--label must not be empty")
        if self.labels_from_folders and self.label is not None:
            raise NbledgerError("give --labels-from-folders or --label, not both")


def is_mbox(path: Path) -> bool:
    """A ``.mbox``/``.mbx`` file, or a file of no table format that starts with ``From ``."""
    path = Path(path)
    if path.suffix.lower() in MBOX_SUFFIXES:
        return True
    if not path.is_file() or path.suffix.lower() in _TABLE_SUFFIXES:
        return False
    with open(path, "rb") as fh:
        return fh.read(5) == b"From "


def is_mail_source(path: Path, mail: MailInput) -> bool:
    """True when ``path`` is read as raw e-mail (so the text view applies)."""
    return Path(path).is_dir() or is_mbox(path) or mail.raw_email


def read_data(
    path,
    text_col: str | None,
    label_col: str | None,
    mail: MailInput = MailInput(),
    id_col: str | None = None,
    *,
    max_bytes: int | None = None,
    max_message_bytes: int | None = None,
) -> Messages:
    """Messages from a folder of ``.eml`` files, an mbox file or a table; see the module policy."""
    path = Path(path)
    if path.is_dir():
        return _read_folder(path, mail)
    if is_mbox(path):
        if mail.labels_from_folders:
            raise NbledgerError("--labels-from-folders needs a folder; give an mbox file --label")
        return _read_mbox(path, mail)
    if mail.labels_from_folders or mail.label is not None:
        raise NbledgerError(
            f"{path.name} is a table: its labels come from --label-col "
            "(--label and --labels-from-folders are for mbox files and folders)"
        )
    if text_col is None:
        raise NbledgerError(f"{path.name} is a table: give --text-col (and --label-col)")
    limits = {} if max_bytes is None else {"max_bytes": max_bytes}
    messages = read_messages(path, text_col, label_col, id_col, max_message_bytes=max_message_bytes, **limits)
    if not mail.raw_email:
        return messages
    emails = [read_email(text.encode("utf-8", errors="surrogatepass"), mail.limits, mail.rules) for text in messages.texts]
    # The raw text view keeps the texts exactly as given; the messages are read for their mail columns only.
    texts = messages.texts if mail.view == RAW_VIEW else [e.text(mail.view) for e in emails]
    return replace(
        messages, texts=texts, notes=messages.notes + summarise(emails),
        mail=mail_columns(emails, [""] * len(emails), mail),
    )


def _read_limited(path: Path, limit: int) -> tuple[bytes, bool]:
    with open(path, "rb") as fh:
        data = fh.read(limit + 1)
    return data[:limit], len(data) > limit


def eml_files(folder: Path) -> list[Path]:
    """The ``*.eml`` files under ``folder`` in path order, links skipped; one error line when there are none."""
    files = sorted(p for p in Path(folder).rglob("*.eml") if p.is_file() and not p.is_symlink())
    if not files:
        raise NbledgerError(f"no .eml files in {folder}")
    return files


def _text_of(data: bytes, mail: MailInput) -> tuple[str, str]:
    """(text, Message-ID) of one raw message as ``mail`` reads it: the text as given in the ``raw`` view."""
    if mail.view == "raw":
        from explain.model.data_io import decode_utf8

        return decode_utf8(data)[0], ""
    email = read_email(data, mail.limits, mail.rules)
    return email.text(mail.view), email.message_id


def mail_chunks(path: Path, mail: MailInput, chunk_rows: int, part: tuple[int, int] | None = None):
    """Yield ``(texts, ids, share read)`` of at most ``chunk_rows`` messages of an .eml folder or an mbox file.

    The same reading as :func:`read_data` (texts in ``mail``'s view and rules, ids the
    Message-ID else the file name or ``name#n``), in bounded memory: for the batch ledger.
    ``part`` = ``(start, stop)`` reads only those files of a folder (in path order), for one Dask piece.
    """
    path = Path(path)
    limit = mail.limits.max_message_bytes
    if path.is_dir():
        files = eml_files(path)
        if part is not None:
            files = files[part[0]:part[1]]
        for start in range(0, len(files), chunk_rows):
            texts, ids = [], []
            for file in files[start:start + chunk_rows]:
                text, message_id = _text_of(_read_limited(file, limit)[0], mail)
                texts.append(text)
                ids.append(message_id or file.relative_to(path).as_posix())
            yield texts, ids, min(start + chunk_rows, len(files)) / len(files)
        return
    box = mailbox.mbox(path, create=False)
    try:
        keys = list(box.iterkeys())
        if not keys:
            raise NbledgerError(f"{path.name} holds no messages")
        for start in range(0, len(keys), chunk_rows):
            texts, ids = [], []
            for n, key in enumerate(keys[start:start + chunk_rows], start=start + 1):
                text, message_id = _text_of(box.get_bytes(key)[:limit], mail)
                texts.append(text)
                ids.append(message_id or f"{path.name}#{n}")
            yield texts, ids, min(start + chunk_rows, len(keys)) / len(keys)
    finally:
        box.close()


def _read_folder(folder: Path, mail: MailInput) -> Messages:
    files = eml_files(folder)
    if mail.labels_from_folders:
        loose = [p for p in files if p.parent == folder]
        if loose:
            raise NbledgerError(
                f"{loose[0].name} is not in a label sub-folder; with --labels-from-folders "
                "each message sits in a folder named for its label"
            )
        labels = [p.relative_to(folder).parts[0] for p in files]
    else:
        labels = None if mail.label is None else [mail.label] * len(files)
    digest = hashlib.sha256()
    emails, names, given, cut = [], [], [], 0
    for path in files:
        data, was_cut = _read_limited(path, mail.limits.max_message_bytes)
        cut += was_cut
        name = path.relative_to(folder).as_posix()
        digest.update(name.encode("utf-8", errors="surrogateescape") + b"\0")
        digest.update(hashlib.sha256(data).digest())
        emails.append(read_email(data, mail.limits, mail.rules))
        given.append(decode_utf8(data)[0] if mail.view == RAW_VIEW else None)
        names.append(name)
    # The folder below the data folder, or below the label folder with labels_from_folders.
    skip = 1 if mail.labels_from_folders else 0
    folders = ["/".join(p.relative_to(folder).parts[skip:-1]) for p in files]
    return _messages(emails, names, labels, folder, digest.hexdigest(), mail, cut, folders, given)


def _read_mbox(path: Path, mail: MailInput) -> Messages:
    if not path.is_file():
        raise NbledgerError(f"no mbox file at {path}")
    with open(path, "rb") as fh:
        file_digest = hashlib.file_digest(fh, "sha256").hexdigest()
    box = mailbox.mbox(path, create=False)
    try:
        emails, names, given, cut = [], [], [], 0
        for n, key in enumerate(box.iterkeys(), start=1):
            data = box.get_bytes(key)
            cut += len(data) > mail.limits.max_message_bytes
            data = data[: mail.limits.max_message_bytes]
            emails.append(read_email(data, mail.limits, mail.rules))
            given.append(decode_utf8(data)[0] if mail.view == RAW_VIEW else None)
            names.append(f"{path.name}#{n}")
    finally:
        box.close()
    if not emails:
        raise NbledgerError(f"{path.name} holds no messages")
    labels = None if mail.label is None else [mail.label] * len(emails)
    return _messages(emails, names, labels, path, file_digest, mail, cut, given=given)


@dataclass(frozen=True, eq=False)
class MailColumns:
    """What a data set of raw e-mail says about each message beside its text (for mail slices).

    Arrays of str, one per message: ``folder`` (the path of the message's folder below the
    data folder, "" at the top and for mbox files and tables), ``sender`` (the From header,
    decoded), ``date`` (the Date header as written), ``list_id`` (the List-Id header); "" when
    absent. ``touched`` counts the messages each text rule changed (:data:`CLEANING`, plus
    ``decoding``: messages with a part read with a fallback charset); ``rules`` the text rules.
    """

    folder: np.ndarray
    sender: np.ndarray
    date: np.ndarray
    list_id: np.ndarray
    touched: dict
    rules: str


def mail_columns(emails: list[EmailText], folders, mail: MailInput) -> MailColumns:
    """The :class:`MailColumns` of ``emails`` read under ``mail``."""
    column = lambda values: np.asarray(list(values), dtype=object)  # noqa: E731
    touched = {rule: sum(rule in e.cleaned for e in emails) for rule in CLEANING}
    touched["decoding"] = sum(bool(e.undecodable) for e in emails)
    return MailColumns(
        folder=column(folders),
        sender=column(e.sender for e in emails),
        date=column(e.date for e in emails),
        list_id=column(e.list_id for e in emails),
        touched=touched,
        rules=mail.rules,
    )


def _messages(
    emails: list[EmailText], names, labels, source: Path, sha256: str, mail: MailInput, cut: int, folders=None,
    given=None,
) -> Messages:
    """The data set; in the raw text view its texts are ``given`` (each message's bytes as UTF-8 text)."""
    notes = summarise(emails)
    if cut:
        notes += (f"{cut} of {len(emails)} messages were larger than {mail.limits.max_message_bytes:,} bytes and were cut",)
    return Messages(
        texts=list(given) if mail.view == RAW_VIEW else [e.text(mail.view) for e in emails],
        labels=None if labels is None else np.asarray(labels, dtype=object),
        ids=np.asarray([e.message_id or name for e, name in zip(emails, names)], dtype=object),
        replaced_chars=0,
        source=source,
        sha256=sha256,
        notes=notes,
        mail=mail_columns(emails, folders or [""] * len(emails), mail),
    )


def input_kind(path: Path, mail: MailInput) -> str:
    """What a data path is, as the model card records it."""
    if Path(path).is_dir():
        return "eml-folder"
    if is_mbox(path):
        return "mbox"
    return "raw-email-table" if mail.raw_email else "table"
