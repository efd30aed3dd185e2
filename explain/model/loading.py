"""Loading a trained filter from untrusted files.

A model file is hostile until proven otherwise:

- skops files (the default, and what ``nbledger train`` writes) are loaded
  with skops' allow-list: types it does not trust are refused, named, and may
  be accepted one by one (``trust``).
- pickle and joblib files can run code while they load. They are refused
  *before* they are opened unless ``allow_pickle`` is set; the format is
  recognised from the first bytes, so nothing is unpickled to find out.
- Anything else ends in one line saying what was found and what is supported.

The loaded object must be a scikit-learn ``Pipeline`` whose last step is a
naive Bayes classifier and whose earlier steps make text features, or a
classifier file plus a separate vectorizer file.
"""

from __future__ import annotations

import hashlib
import json
import zipfile
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

from explain.errors import NbledgerError
from explain.model.featurizer import Featurizer
from explain.model.model_view import ModelView, view_of

CARD_SUFFIX = ".card.json"
_CARD_LIMIT = 1 << 20
# Byte patterns that start a pickle (protocol 2+) or a compressed joblib file.
_PICKLE_STARTS = (b"\x80", b"\x1f\x8b", b"BZh", b"\xfd7zXZ", b"\x28\xb5\x2f\xfd")
_PICKLE_SUFFIXES = (".pkl", ".pickle", ".joblib", ".jbl", ".sav")


@dataclass(frozen=True, eq=False)
class LoadedModel:
    """A filter ready to explain: its normalised view and its text steps."""

    view: ModelView
    featurizer: Featurizer
    path: Path
    sha256: str
    file_format: str
    card: dict | None = None
    classifier: object = None

    @property
    def classes(self):
        return self.view.classes

    def unfitted_copy(self):
        """A new, unfitted pipeline with the same steps and settings (:func:`sklearn.base.clone`)."""
        from sklearn.base import clone
        from sklearn.pipeline import make_pipeline

        vectorizer, tfidf = self.featurizer.vectorizer, self.featurizer.tfidf
        steps = [vectorizer] + ([] if tfidf is None or tfidf is vectorizer else [tfidf]) + [self.classifier]
        return make_pipeline(*(clone(step) for step in steps))


def sha256_of(path: Path) -> str:
    with open(path, "rb") as handle:
        return hashlib.file_digest(handle, "sha256").hexdigest()


def card_path_for(model_path: Path) -> Path:
    """Where the model card of ``model.skops`` lives: ``model.card.json``."""
    model_path = Path(model_path)
    return model_path.with_name(model_path.name.split(".")[0] + CARD_SUFFIX)


def sniff_format(path: Path) -> str:
    """``"skops"``, ``"pickle"`` or ``"unknown"``, from the file's first bytes."""
    with open(path, "rb") as handle:
        head = handle.read(8)
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
    path = Path(path)
    if not path.is_file():
        raise NbledgerError(f"no model file at {path}")
    kind = sniff_format(path)
    if kind == "skops":
        return _read_skops(path, tuple(trust)), kind
    if kind == "pickle":
        if not allow_pickle:
            raise NbledgerError(
                f"{path.name} is a pickle/joblib file, and loading one runs code from the file; "
                "it was not opened. Use a skops file, or pass --allow-pickle if you trust its source"
            )
        if on_warning is not None:
            on_warning(f"loading {path.name} as a pickle runs any code it contains; only do this for files you trust")
        import joblib

        try:
            return joblib.load(path), kind
        except Exception as exc:  # a broken or truncated pickle can raise anything
            raise NbledgerError(f"could not read {path.name} as a pickle: {_first_line(exc)}") from None
    raise NbledgerError(
        f"{path.name} is not a model file this tool reads; supported: skops files "
        "(written by 'nbledger train'), or pickle/joblib files with --allow-pickle"
    )


def _read_skops(path: Path, trust: tuple[str, ...]):
    import skops.io as sio

    try:
        untrusted = sio.get_untrusted_types(file=path)
    except (zipfile.BadZipFile, KeyError, ValueError, json.JSONDecodeError, EOFError, OSError) as exc:
        raise NbledgerError(f"{path.name} is not a readable skops file: {_first_line(exc)}") from None
    refused = sorted(set(untrusted) - set(trust))
    if refused:
        raise NbledgerError(
            f"{path.name} contains types that are not trusted: {', '.join(refused)}; "
            "if you trust them, pass each with --trust TYPE"
        )
    try:
        return sio.load(path, trusted=list(untrusted))
    except Exception as exc:  # skops raises many kinds on damaged archives
        raise NbledgerError(f"could not load {path.name}: {_first_line(exc)}") from None


def _first_line(exc: BaseException) -> str:
    text = str(exc).strip().splitlines()
    return f"{type(exc).__name__}: {text[0]}" if text else type(exc).__name__


def read_card(model_path: Path, sha256: str, on_warning=None) -> dict | None:
    """The model card beside ``model_path``, if there is one and it matches."""
    path = card_path_for(model_path)
    if not path.is_file():
        return None
    try:
        if path.stat().st_size > _CARD_LIMIT:
            raise ValueError("larger than 1 MiB")
        card = json.loads(path.read_text(encoding="utf-8"))
        if not isinstance(card, dict):
            raise ValueError("not a JSON object")
    except (ValueError, UnicodeDecodeError) as exc:
        raise NbledgerError(f"the model card {path.name} is not valid: {_first_line(exc)}") from None
    recorded = (card.get("model") or {}).get("sha256")
    if recorded != sha256:
        if on_warning is not None:
            on_warning(f"the model card {path.name} does not match this model file (SHA-256 differs); ignoring it")
        return None
    return card


def split_pipeline(obj, vectorizer_obj=None):
    """(text steps, classifier) of a supported pipeline, or a one-line error."""
    from sklearn.feature_extraction.text import TfidfTransformer
    from sklearn.pipeline import Pipeline

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
        "supported: CountVectorizer or TfidfVectorizer (optionally CountVectorizer -> TfidfTransformer) "
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


def load_model(
    path,
    *,
    vectorizer_path=None,
    allow_pickle: bool = False,
    trust: tuple[str, ...] = (),
    normal_class: str | None = None,
    on_warning: Callable[[str], None] | None = None,
) -> LoadedModel:
    """Load a filter safely and build its normalised view.

    ``normal_class`` overrides the one recorded in the model card.
    """
    path = Path(path)
    obj, kind = read_object(path, allow_pickle=allow_pickle, trust=trust, on_warning=on_warning)
    vec_obj = None
    if vectorizer_path is not None:
        vec_obj, _ = read_object(Path(vectorizer_path), allow_pickle=allow_pickle, trust=trust, on_warning=on_warning)
    featurizer, classifier = split_pipeline(obj, vec_obj)
    digest = sha256_of(path)
    card = read_card(path, digest, on_warning)
    if normal_class is None and card is not None:
        normal_class = (card.get("settings") or {}).get("normal_class")
    view = view_of(classifier, featurizer.tokens, featurizer.feature_kind, normal_class)
    return LoadedModel(view, featurizer, path, digest, kind, card, classifier)
