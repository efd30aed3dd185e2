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
):
    """Load one Python object from a skops file, or a pickle when allowed."""
    path = input_file(path, "model file")
    kind = checked_format(path, allow_pickle, on_warning)
    if kind == "skops":
        return _read_skops(path, tuple(trust)), kind
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


def check_archive(path: Path, limit: int) -> None:
    """Refuse a skops archive whose members declare more than ``limit`` bytes once inflated."""
    try:
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


def _read_skops(path: Path, trust: tuple[str, ...]):
    import skops.io as sio

    try:
        untrusted = sio.get_untrusted_types(file=path)
    except (zipfile.BadZipFile, KeyError, ValueError, json.JSONDecodeError, EOFError, OSError) as exc:
        raise NbledgerError(f"{path.name} is not a readable skops file: {first_line(exc)}") from None
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

