"""Model files as they are on disk: recognised, checked and read, never trusted.

- :func:`sniff_format` recognises skops and pickle/joblib from the first bytes,
  so nothing is unpickled to find out; :func:`checked_format` refuses a pickle
  unless it is allowed, and anything else unopened.
- :func:`check_archive` refuses a skops archive whose members declare more
  bytes once inflated than the loading limit.
- :func:`read_object` reads one object with skops' allow-list (types not
  trusted are refused, named, and may be accepted one by one), or a pickle.
- :func:`split_pipeline` checks that the object is a supported pipeline (or a
  classifier plus a vectorizer) and splits it into text steps and classifier.
- :func:`read_card` reads the model card beside a model file, if it matches.

The loading process (:mod:`explain.model.load_child`) calls the readers; the
parent (:mod:`explain.model.loading`) only sniffs and checks before it starts.
"""

from __future__ import annotations

import hashlib
import json
import os
import zipfile
from pathlib import Path
from typing import Callable

from explain.errors import NbledgerError
from explain.model.input_files import input_file

CARD_SUFFIX = ".card.json"


_CARD_LIMIT = 1 << 20


# Byte patterns that start a pickle (protocol 2+) or a compressed joblib file.
_PICKLE_STARTS = (b"\x80", b"\x1f\x8b", b"BZh", b"\xfd7zXZ", b"\x28\xb5\x2f\xfd")


_PICKLE_SUFFIXES = (".pkl", ".pickle", ".joblib", ".jbl", ".sav")


_MAX_MEMBERS = 100_000
#: The most a skops archive's ``schema.json`` may declare once inflated (stated in the README).
SCHEMA_LIMIT = 64 << 20
#: Largest inflated-to-stored ratio of a part: deflate cannot exceed about 1032:1, which arrays of
#: zeros approach; a part claiming more was made by another method to be a bomb.
MAX_RATIO = 1100
#: The most an archive's central directory (the list of its parts) may take on disk.
_DIRECTORY_LIMIT = 32 << 20
#: Bytes inflated per step when a part's real size is checked.
_INFLATE_STEP = 1 << 20


def sha256_of(path: Path) -> str:
    with open(path, "rb") as handle:
        return hashlib.file_digest(handle, "sha256").hexdigest()


def card_path_for(model_path: Path) -> Path:
    """Where the model card of ``m.v1.skops`` lives: ``m.v1.card.json`` (the whole name, less its last suffix)."""
    model_path = Path(model_path)
    return model_path.with_name(model_path.stem + CARD_SUFFIX)


def sniff_format(path: Path) -> str:
    """``"skops"``, ``"pickle"`` or ``"unknown"``, from the file's first bytes."""
    try:
        with open(path, "rb") as handle:
            head = handle.read(8)
    except OSError as exc:
        raise NbledgerError(f"cannot read the model file {path}: {exc.strerror or exc}") from None
    if head.startswith(b"PK\x03\x04"):
        return "skops"
    if head.startswith(_PICKLE_STARTS) or Path(path).suffix.lower() in _PICKLE_SUFFIXES:
        return "pickle"
    return "unknown"


def read_object(
    path: Path,
    *,
    allow_pickle: bool = False,
    trust: tuple[str, ...] = (),
    on_warning: Callable[[str], None] | None = None,
    declared: set | None = None,
):
    """Load one Python object from a skops file, or a pickle when allowed.

    ``declared``, when given, receives the type names the skops file declares untrusted.
    """
    path = input_file(path, "model file")
    kind = checked_format(path, allow_pickle, on_warning)
    if kind == "skops":
        return _read_skops(path, tuple(trust), declared), kind
    if kind == "pickle":
        import joblib

        try:
            return joblib.load(path), kind
        except Exception as exc:  # a broken or truncated pickle can raise anything
            raise NbledgerError(f"could not read {path.name} as a pickle: {first_line(exc)}") from None


def checked_format(path: Path, allow_pickle: bool, on_warning=None) -> str:
    """``"skops"`` or (when allowed, with a warning) ``"pickle"``; refuses anything else unopened."""
    kind = sniff_format(path)
    if kind == "pickle":
        if not allow_pickle:
            raise NbledgerError(
                f"{path.name} is a pickle/joblib file, and loading one runs code from the file; "
                "it was not opened. Use a skops file, or pass --allow-pickle if you trust its source"
            )
        if on_warning is not None:
            on_warning(f"loading {path.name} as a pickle runs any code it contains; only do this for files you trust")
    elif kind != "skops":
        raise NbledgerError(
            f"{path.name} is not a model file this tool reads; supported: skops files "
            "(written by 'nbledger train'), or pickle/joblib files with --allow-pickle"
        )
    return kind


def _directory_size(path: Path) -> tuple[int, int]:
    """(parts, central directory bytes) from a zip's end record (ZIP64 too), read before the directory itself.

    APPNOTE.TXT (PKWARE's .ZIP File Format Specification) 4.3.14-4.3.16: the end of central
    directory record (``PK\\5\\6``), and for ZIP64 its locator (``PK\\6\\7``) and record (``PK\\6\\6``).
    """
    import struct

    size = os.path.getsize(path)
    with open(path, "rb") as handle:
        handle.seek(max(0, size - (1 << 16) - 22))
        tail = handle.read()
        at = tail.rfind(b"PK\x05\x06")
        if at < 0 or len(tail) - at < 22:
            raise zipfile.BadZipFile("no end of central directory record")
        entries, directory = struct.unpack("<HI", tail[at + 10 : at + 16])
        locator = at - 20
        if (entries == 0xFFFF or directory == 0xFFFFFFFF) and locator >= 0 and tail[locator : locator + 4] == b"PK\x06\x07":
            (record,) = struct.unpack("<Q", tail[locator + 8 : locator + 16])
            handle.seek(record)
            head = handle.read(56)
            if len(head) < 56 or not head.startswith(b"PK\x06\x06"):
                raise zipfile.BadZipFile("damaged ZIP64 end record")
            entries, directory = struct.unpack("<QQ", head[32:48])
    return entries, directory


def check_archive(path: Path, limit: int) -> None:
    """Refuse a skops archive that is a bomb, before anything is inflated.

    Refused: more than :data:`_MAX_MEMBERS` parts or a central directory over
    :data:`_DIRECTORY_LIMIT` (counted from the end record, before the directory
    is read); parts declaring more than ``limit`` bytes in all; a ``schema.json``
    declaring more than :data:`SCHEMA_LIMIT`; a part whose declared size is more
    than :data:`MAX_RATIO` times what it takes in the archive.
    """
    try:
        parts, directory = _directory_size(path)
        if parts > _MAX_MEMBERS or directory > _DIRECTORY_LIMIT:
            raise NbledgerError(
                f"{path.name} holds {parts:,} parts ({directory:,} bytes of directory); at most {_MAX_MEMBERS:,} "
                "are read; it was not opened"
            )
        with zipfile.ZipFile(path) as archive:
            members = archive.infolist()
    except (zipfile.BadZipFile, OSError, ValueError, EOFError) as exc:
        raise NbledgerError(f"{path.name} is not a readable skops file: {first_line(exc)}") from None
    declared = sum(m.file_size for m in members)
    if len(members) > _MAX_MEMBERS or declared > limit:
        raise NbledgerError(
            f"{path.name} would inflate to {declared:,} bytes in {len(members):,} parts, more than the "
            f"loading limit of {limit:,} bytes (--max-model-memory); it was not opened"
        )
    for m in members:
        if m.filename == "schema.json" and m.file_size > SCHEMA_LIMIT:
            raise NbledgerError(
                f"{path.name}: its schema.json declares {m.file_size:,} bytes, more than the {SCHEMA_LIMIT:,} "
                "a model's schema may take; it was not opened"
            )
        if m.file_size > _INFLATE_STEP and m.file_size > MAX_RATIO * max(m.compress_size, 1):
            raise NbledgerError(
                f"{path.name}: a part declares {m.file_size:,} bytes from {m.compress_size:,} stored, more than "
                f"{MAX_RATIO}:1, which no array or schema reaches; it was not opened"
            )


def check_inflation(path: Path) -> None:
    """Inflate every part in bounded steps, refusing one that would grow past its declared size.

    Python's zip reader inflates up to 2 GiB at a time when a whole part is
    read, however little it declares; this pass reads :data:`_INFLATE_STEP`
    at a time, so a part that lies about its size is refused having cost at
    most one step (its checksum then fails too).
    """
    try:
        with zipfile.ZipFile(path) as archive:
            for info in archive.infolist():
                _inflate_part(path, archive, info)
    except (zipfile.BadZipFile, OSError, ValueError, EOFError, NotImplementedError) as exc:
        raise NbledgerError(f"{path.name} is not a readable skops file: {first_line(exc)}") from None


def _inflate_part(path: Path, archive, info) -> None:
    seen = 0
    try:
        with archive.open(info) as part:
            while block := part.read(_INFLATE_STEP):
                seen += len(block)
                if seen > info.file_size:
                    raise zipfile.BadZipFile("it inflates past its declared size")
        if seen != info.file_size:
            raise zipfile.BadZipFile("it inflates to another size than it declares")
    except zipfile.BadZipFile as exc:
        raise NbledgerError(
            f"{path.name}: its part {info.filename[:80]!r} does not inflate to the {info.file_size:,} bytes it "
            f"declares ({first_line(exc)}); it was not loaded"
        ) from None


def _read_skops(path: Path, trust: tuple[str, ...], declared: set | None = None):
    import skops.io as sio

    check_inflation(path)
    try:
        untrusted = sio.get_untrusted_types(file=path)
    except (zipfile.BadZipFile, KeyError, ValueError, json.JSONDecodeError, EOFError, OSError) as exc:
        raise NbledgerError(f"{path.name} is not a readable skops file: {first_line(exc)}") from None
    if declared is not None:
        declared.update(untrusted)
    refused = sorted(set(untrusted) - set(trust))
    if refused:
        raise NbledgerError(
            f"{path.name} contains types that are not trusted: {', '.join(refused)}; "
            "if you trust them, pass each with --trust TYPE"
        )
    try:
        return sio.load(path, trusted=list(untrusted))
    except Exception as exc:  # skops raises many kinds on damaged archives
        raise NbledgerError(f"could not load {path.name}: {first_line(exc)}") from None


def first_line(exc: BaseException) -> str:
    """An exception as one line: its type and the first line of its message."""
    text = str(exc).strip().splitlines()
    return f"{type(exc).__name__}: {text[0]}" if text else type(exc).__name__


def read_card(model_path: Path, sha256: str, on_warning=None) -> dict | None:
    """The model card beside ``model_path``, if there is one and it matches."""
    path = card_path_for(model_path)
    if not os.path.lexists(path):
        return None
    try:
        input_file(path, "model card")
        if path.stat().st_size > _CARD_LIMIT:
            raise ValueError("larger than 1 MiB")
        card = json.loads(path.read_text(encoding="utf-8"), parse_constant=_refuse_constant)
        if not isinstance(card, dict):
            raise ValueError("not a JSON object")
    except OSError as exc:
        raise NbledgerError(f"the model card {path} cannot be read: {exc.strerror}") from None
    except (ValueError, UnicodeDecodeError) as exc:
        raise NbledgerError(f"the model card {path.name} is not valid: {first_line(exc)}") from None
    recorded = (card.get("model") or {}).get("sha256")
    if recorded != sha256:
        if on_warning is not None:
            on_warning(f"the model card {path.name} does not match this model file (SHA-256 differs); ignoring it")
        return None
    return card


def _refuse_constant(name: str):
    raise ValueError(f"{name} is not JSON")


def split_pipeline(obj, vectorizer_obj=None):
    """(text steps, classifier) of a supported pipeline, or a one-line error."""
    from sklearn.feature_extraction.text import TfidfTransformer
    from sklearn.pipeline import Pipeline

    from explain.model.featurizer import Featurizer

    if isinstance(obj, Pipeline):
        steps = [step for _, step in obj.steps if step not in (None, "passthrough")]
        if vectorizer_obj is not None:
            raise NbledgerError("the model file is already a whole pipeline; drop the separate vectorizer file")
        *text_steps, classifier = steps
    else:
        classifier = obj
        if vectorizer_obj is None:
            raise NbledgerError(
                f"the file holds a {type(obj).__name__}, not a pipeline; pass the vectorizer file too "
                "(--vectorizer FILE), or save a Pipeline(vectorizer, naive Bayes)"
            )
        text_steps = (
            [s for _, s in vectorizer_obj.steps] if isinstance(vectorizer_obj, Pipeline) else [vectorizer_obj]
        )
    names = " -> ".join(type(s).__name__ for s in [*text_steps, classifier])
    supported = (
        "supported: CountVectorizer, TfidfVectorizer or HashingVectorizer "
        "(optionally CountVectorizer or HashingVectorizer -> TfidfTransformer) "
        "followed by MultinomialNB, ComplementNB or BernoulliNB"
    )
    if len(text_steps) == 1:
        vectorizer, tfidf = text_steps[0], None
    elif len(text_steps) == 2 and type(text_steps[1]) is TfidfTransformer:
        vectorizer, tfidf = text_steps
    else:
        raise NbledgerError(f"found {names}; {supported}")
    try:
        featurizer = Featurizer(vectorizer, tfidf)
    except NbledgerError as exc:
        raise NbledgerError(f"found {names}; {exc}") from None
    if tfidf is not None and not hasattr(tfidf, "idf_") and tfidf.use_idf:
        raise NbledgerError("the TfidfTransformer in this file has not been fitted")
    return featurizer, classifier

