"""A model's fingerprint: the SHA-256 of what decides, not of the file's bytes.

The skops file of a model trained twice on the same data with the same settings
differs byte for byte (the serializer records object ids), so its SHA-256 cannot
tell two reports of one model apart from two reports of two models. The
fingerprint hashes a canonical form of everything that decides a score:

- the normalised arrays of :class:`~explain.model.model_view.ModelView`
  (``weights``, ``baseline``, ``prior``, ``absence``), the classes in order,
  the variant, the feature kind and BernoulliNB's ``binarize``;
- the vocabulary (column ``j`` is token ``j``); columns are put in the order of
  their tokens first, so a vocabulary stored in another order gives the same
  fingerprint; the TF-IDF ``idf_`` weights follow the same order;
- the text step's settings that change features: analyzer, token pattern,
  n-gram range, lower-casing, accent stripping, stop words, binary, dtype,
  TF-IDF ``norm``/``use_idf``/``smooth_idf``/``sublinear_tf``, and a hashing
  step's ``n_features``/``norm``/``alternate_sign``;
- what the model card says about reading input: the text view raw e-mail is
  read in (:func:`~explain.model.email_reader.resolve_text_view`), the reader's
  text rules (``settings.text_rules``) and the normal class.

Training-only settings (``alpha``, ``min_df``, ``fit_prior``, the hold-out seed)
enter through what they produce (the arrays and the vocabulary), so another
alpha gives another fingerprint while the seed of an unchanged split does not.
Floats are hashed as IEEE 754 little-endian doubles with ``-0.0`` made ``0.0``.

A text step that runs code of its own (a custom analyzer, preprocessor or
tokenizer, loaded only with ``--trust``) has no fingerprint: its code decides
the tokens and cannot be hashed as data. Then :func:`fingerprint` returns None.
"""

from __future__ import annotations

import hashlib
import json

import numpy as np

#: The version of the canonical form; part of every fingerprint.
FORM = "nbledger.fingerprint/1"
_TEXT_PARAMS = (
    "analyzer", "token_pattern", "ngram_range", "lowercase", "strip_accents", "binary",
    "n_features", "norm", "alternate_sign",
)
_TFIDF_PARAMS = ("norm", "use_idf", "smooth_idf", "sublinear_tf")


def _custom_code(vectorizer) -> bool:
    return any(callable(getattr(vectorizer, name, None)) for name in ("analyzer", "preprocessor", "tokenizer", "strip_accents"))


def text_step_settings(featurizer) -> dict:
    """The decision-relevant settings of the text steps as JSON values."""
    vec = featurizer.vectorizer
    params = vec.get_params()
    settings = {name: params[name] for name in _TEXT_PARAMS if name in params}
    settings["ngram_range"] = list(settings["ngram_range"])
    if settings.get("analyzer") != "word":
        settings.pop("token_pattern", None)  # not used by character analyzers
    stop = vec.get_stop_words() if hasattr(vec, "get_stop_words") else None
    settings["stop_words"] = None if stop is None else sorted(str(w) for w in stop)
    settings["dtype"] = np.dtype(vec.dtype).name
    settings["vectorizer"] = type(vec).__name__
    tfidf = featurizer.tfidf
    settings["tfidf"] = None if tfidf is None else {name: getattr(tfidf, name) for name in _TFIDF_PARAMS}
    return settings


def reading_settings(card: dict | None) -> dict:
    """What the model card decides about reading input: text view, text rules, normal class."""
    from explain.model.email_reader import resolve_text_view

    recorded = (card or {}).get("settings") or {}
    return {
        "text_view": resolve_text_view(card, None),
        "text_rules": recorded.get("text_rules"),
        "normal_class": recorded.get("normal_class"),
    }


def _doubles(values) -> bytes:
    array = np.ascontiguousarray(np.asarray(values, dtype="<f8")) + 0.0  # -0.0 -> 0.0
    return array.tobytes()


def _column_order(tokens: np.ndarray, hashed: bool) -> np.ndarray | None:
    """The permutation that sorts columns by token (None when they already are, or are hashed)."""
    if hashed or len(tokens) < 2:
        return None
    listed = tokens.tolist()
    if all(a < b for a, b in zip(listed, listed[1:])):
        return None
    return np.asarray(sorted(range(len(listed)), key=listed.__getitem__), dtype=np.int64)


def fingerprint(view, featurizer, card: dict | None) -> str | None:
    """The fingerprint (64 hex digits) of a model; None when its text step runs custom code.

    ``view`` is the model's :class:`~explain.model.model_view.ModelView`,
    ``featurizer`` its :class:`~explain.model.featurizer.Featurizer`, ``card``
    its model card (or None).
    """
    if _custom_code(featurizer.vectorizer):
        return None
    tokens = np.asarray(view.tokens, dtype=object)
    order = _column_order(tokens, featurizer.hashed)
    weights = np.asarray(view.weights, dtype=np.float64)
    idf = None
    tfidf = featurizer.tfidf
    if tfidf is not None and getattr(tfidf, "use_idf", False):
        idf = np.asarray(getattr(tfidf, "idf_", []), dtype=np.float64)
    if order is not None:
        tokens, weights = tokens[order], weights[:, order]
        idf = None if idf is None or len(idf) != len(order) else idf[order]
    header = {
        "form": FORM,
        "classes": [str(c) for c in view.classes],
        "variant": view.variant,
        "feature_kind": view.feature_kind,
        "binarize": view.binarize,
        "text_step": text_step_settings(featurizer),
        "reading": reading_settings(card),
        "n_features": int(weights.shape[1]),
    }
    digest = hashlib.sha256()

    def part(name: str, data: bytes) -> None:
        # Each part is named and length-prefixed, so no two canonical forms run together.
        digest.update(f"{name}:{len(data)}:".encode("ascii"))
        digest.update(data)

    part("header", json.dumps(header, sort_keys=True, ensure_ascii=True, allow_nan=False).encode("ascii"))
    # Hashed columns are named by number: the hashing settings in the header decide them.
    names = [] if featurizer.hashed else [str(t) for t in tokens]
    part("token_lengths", np.asarray([len(t) for t in names], dtype="<i8").tobytes())
    part("tokens", "".join(names).encode("utf-8", "surrogatepass"))
    part("weights", _doubles(weights))
    for name in ("baseline", "prior", "absence"):
        part(name, _doubles(getattr(view, name)))
    part("idf", b"" if idf is None else _doubles(idf))
    return digest.hexdigest()


def of_pipeline(pipeline, card: dict | None) -> str | None:
    """The fingerprint of a fitted scikit-learn pipeline (text steps, then a naive Bayes classifier)."""
    from explain.model.model_files import split_pipeline
    from explain.model.model_view import view_of

    featurizer, classifier = split_pipeline(pipeline)
    return fingerprint(view_of(classifier, featurizer.tokens, featurizer.feature_kind), featurizer, card)


def short(value: str | None) -> str:
    """The first 16 hex digits, for places with little room; ``"none"`` without a fingerprint."""
    return "none" if value is None else value[:16]
