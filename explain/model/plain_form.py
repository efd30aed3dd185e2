"""A loaded filter as plain data: numpy arrays and JSON settings, no Python objects.

The separate loading process (:mod:`explain.model.load_child`) hands a filter
back in this form, and the model cache stores it. Nothing in it can run code:
arrays are read with ``allow_pickle=False``, settings are JSON.

- ``arrays``: the :class:`~explain.model.model_view.ModelView` arrays
  (``weights``, ``baseline``, ``prior``, ``absence``, ``feature_count``,
  ``class_count``), the text step's ``idf`` when it has one, the tokens as
  one UTF-8 blob (``token_blob``, uint8) cut by ``token_ends`` (int64, code
  points; joined by line breaks when none has one, ``token_split``), the
  classes the same way, and ``probe_*``: the CSR features the
  *original* text step made of :data:`PROBE` plus a sample of its vocabulary.
- ``settings``: the view's scalars and the text step's parameters
  (``analyzer``, ``token_pattern``, ``ngram_range``, ``lowercase``,
  ``strip_accents``, ``stop_words``, ``binary``, ``dtype``, ``norm``,
  ``use_idf``, ``smooth_idf``, ``sublinear_tf`` ...).

:func:`rebuild` makes a fresh scikit-learn text step from the settings and
refuses the result unless it reproduces the probe features exactly.
"""

from __future__ import annotations

import numpy as np

from explain.errors import NbledgerError

FORMAT = "nbledger.plain/1"
# A probe that exercises case, accents, digits, punctuation, white space and
# character n-gram edges; a sample of the vocabulary is appended to it.
PROBE = "Pay the FEE now: £2.49 at http://x.example.net/q?a=1 — Café  déjà-vu\tKIDS' tea, 555-0142 x_y 1 a"
_PROBE_TOKENS = 400
_VIEW_ARRAYS = ("weights", "baseline", "prior", "absence", "feature_count", "class_count")
_COUNT_PARAMS = ("lowercase", "token_pattern", "ngram_range", "analyzer", "binary", "strip_accents", "max_df", "min_df")
# A HashingVectorizer keeps no vocabulary; its own settings decide its columns.
_HASH_PARAMS = ("lowercase", "token_pattern", "ngram_range", "analyzer", "binary", "strip_accents",
                "n_features", "norm", "alternate_sign")
_TFIDF_PARAMS = ("norm", "use_idf", "smooth_idf", "sublinear_tf")


def _pack_strings(values, name: str) -> dict:
    """``name_blob`` (UTF-8, uint8) and ``name_ends`` (int64, end offsets in code points).

    When no value contains a line break, the values are joined by line breaks
    (``name_split`` = 1) so that :func:`_unpack_strings` needs one ``str.split``,
    fast for 10^6 tokens; otherwise they are concatenated and cut at the ends.
    """
    values = [str(v) for v in values]
    split = not any("\n" in v for v in values)
    sep = "\n" if split else ""
    ends = np.cumsum([len(v) + len(sep) for v in values], dtype=np.int64) - len(sep)
    return {
        f"{name}_blob": np.frombuffer(sep.join(values).encode("utf-8"), dtype=np.uint8),
        f"{name}_ends": ends,
        f"{name}_split": np.asarray([split]),
    }


def _unpack_strings(arrays: dict, name: str) -> np.ndarray:
    text = arrays[f"{name}_blob"].tobytes().decode("utf-8")
    ends = arrays[f"{name}_ends"]
    if bool(arrays[f"{name}_split"][0]):
        parts = text.split("\n") if text or len(ends) else []
    else:
        starts = np.concatenate([[0], ends[:-1]]).tolist()
        parts = [text[a:b] for a, b in zip(starts, ends.tolist())]
    if len(parts) != len(ends) or (len(ends) and ends[-1] != len(text)):
        raise NbledgerError("the plain form's strings do not add up")
    return np.asarray(parts, dtype=object)


def probe_text(tokens) -> str:
    """:data:`PROBE` plus an evenly spread sample of the vocabulary."""
    step = max(1, len(tokens) // _PROBE_TOKENS)
    return PROBE + " " + " ".join(str(t) for t in tokens[::step][:_PROBE_TOKENS])


def code_in(vectorizer) -> str | None:
    """Why a text step cannot travel as plain data (it runs code of its own), or None."""
    for name in ("analyzer", "preprocessor", "tokenizer", "strip_accents"):
        if callable(getattr(vectorizer, name, None)):
            return f"its {name} is custom code"
    return None


_CLASSIFIER_PARAMS = ("alpha", "fit_prior", "class_prior", "force_alpha", "binarize", "norm")


def classifier_settings(classifier) -> dict:
    """The classifier's type and hyper-parameters as JSON values (for refits of the same pipeline)."""
    params = {}
    for name, value in classifier.get_params().items():
        if name in _CLASSIFIER_PARAMS:
            params[name] = np.asarray(value).tolist() if isinstance(value, np.ndarray) else value
    return {"type": type(classifier).__name__, "params": params}


def classifier_from_settings(settings: dict | None):
    """A new, unfitted naive Bayes classifier from :func:`classifier_settings`."""
    from sklearn.naive_bayes import BernoulliNB, ComplementNB, MultinomialNB

    kinds = {"MultinomialNB": MultinomialNB, "ComplementNB": ComplementNB, "BernoulliNB": BernoulliNB}
    if not settings or settings.get("type") not in kinds:
        raise NbledgerError("the model's classifier settings are not known; load it with --no-cache to refit it")
    params = dict(settings["params"])
    if isinstance(params.get("alpha"), list):
        params["alpha"] = np.asarray(params["alpha"])
    return kinds[settings["type"]](**params)


def to_plain(featurizer, view, classifier=None) -> tuple[dict, dict]:
    """(arrays, settings) of a featurizer built from supported scikit-learn steps."""
    vec = featurizer.vectorizer
    reason = code_in(vec)
    if reason is not None:
        raise NbledgerError(f"the text step cannot be checked as plain data: {reason}")
    stop = vec.stop_words
    settings = {
        "format": FORMAT,
        "vectorizer": type(vec).__name__,
        "tfidf_step": featurizer.tfidf is not None and featurizer.tfidf is not vec,
        "params": {name: getattr(vec, name) for name in (_HASH_PARAMS if featurizer.hashed else _COUNT_PARAMS)},
        "stop_words": stop if stop is None or isinstance(stop, str) else sorted(str(w) for w in stop),
        "dtype": np.dtype(vec.dtype).name,
        "fixed_vocabulary": bool(getattr(vec, "fixed_vocabulary_", False)),
        "tfidf": None,
        "classifier": None if classifier is None else classifier_settings(classifier),
        "view": {
            "variant": view.variant,
            "feature_kind": view.feature_kind,
            "binarize": view.binarize,
        },
    }
    settings["params"]["ngram_range"] = list(vec.ngram_range)
    arrays = {name: np.asarray(getattr(view, name), dtype=np.float64) for name in _VIEW_ARRAYS}
    # A hashed model's column names are rebuilt from n_features, not stored.
    arrays.update(_pack_strings([] if featurizer.hashed else view.tokens, "token"))
    arrays.update(_pack_strings(view.classes, "class"))
    if featurizer.tfidf is not None:
        settings["tfidf"] = {name: getattr(featurizer.tfidf, name) for name in _TFIDF_PARAMS}
        if featurizer.tfidf.use_idf:
            arrays["idf"] = np.asarray(featurizer.tfidf.idf_, dtype=np.float64)
            if not np.isfinite(arrays["idf"]).all():
                raise NbledgerError("the model's idf weights are not all finite; its features cannot be trusted")
    probe = featurizer.transform([probe_text(view.tokens)])
    arrays["probe_indices"] = probe.indices.astype(np.int64)
    arrays["probe_data"] = probe.data
    return arrays, settings


def _tfidf_transformer(options: dict, idf, n_features: int):
    from sklearn.feature_extraction.text import TfidfTransformer

    transformer = TfidfTransformer(**options)
    transformer.n_features_in_ = n_features
    if options["use_idf"]:
        transformer.idf_ = idf
    return transformer


def rebuild(arrays: dict, settings: dict, normal_class: str | None = None):
    """(Featurizer, ModelView) from the plain form, checked against its probe."""
    from sklearn.feature_extraction.text import CountVectorizer, HashingVectorizer, TfidfVectorizer

    from explain.model.featurizer import Featurizer
    from explain.model.model_view import ModelView

    if settings.get("format") != FORMAT:
        raise NbledgerError("the plain form has an unknown format")
    tokens = _unpack_strings(arrays, "token")
    classes = _unpack_strings(arrays, "class")
    try:
        params = dict(settings["params"], ngram_range=tuple(settings["params"]["ngram_range"]))
        params["stop_words"] = settings["stop_words"]
        params["dtype"] = np.dtype(settings["dtype"]).type
        tfidf_options = settings["tfidf"]
        hashed = settings["vectorizer"] == "HashingVectorizer"
        n = int(params["n_features"]) if hashed else len(tokens)
        if hashed and arrays["weights"].shape[1:] != (n,):
            # checked before naming n columns, so a wrong n_features cannot exhaust memory
            raise NbledgerError("the plain form's arrays do not fit together")
        idf = arrays.get("idf")
        if settings["vectorizer"] == "TfidfVectorizer":
            vectorizer = TfidfVectorizer(**params, **tfidf_options)
            # scikit-learn keeps a TfidfVectorizer's fitted weighting in ``_tfidf``;
            # the probe check below catches any change in that arrangement.
            vectorizer._tfidf = _tfidf_transformer(tfidf_options, idf, n)
            tfidf = None
        elif settings["vectorizer"] in ("CountVectorizer", "HashingVectorizer"):
            vectorizer = (HashingVectorizer if hashed else CountVectorizer)(**params)
            tfidf = _tfidf_transformer(tfidf_options, idf, n) if settings["tfidf_step"] else None
        else:
            raise NbledgerError(f"the plain form names an unsupported text step {settings['vectorizer']!r}")
        if not hashed:
            vectorizer.vocabulary_ = dict(zip(tokens.tolist(), range(n)))
            vectorizer.fixed_vocabulary_ = settings["fixed_vocabulary"]
        featurizer = Featurizer(vectorizer, tfidf, tokens=None if hashed else tokens)
        tokens = featurizer.tokens

        probe = featurizer.transform([probe_text(tokens)])
    except (ValueError, TypeError, AttributeError, KeyError) as exc:  # settings scikit-learn does not accept
        raise NbledgerError(f"the model's text step settings are not usable: {type(exc).__name__}: {exc}") from None
    if not (
        np.array_equal(probe.indices, arrays["probe_indices"]) and np.array_equal(probe.data, arrays["probe_data"])
    ):
        raise NbledgerError(
            "the text step rebuilt from the model's settings does not reproduce the model's own features; "
            "this scikit-learn version may read these settings differently"
        )
    shape = (len(classes), n)
    if arrays["weights"].shape != shape or arrays["feature_count"].shape != shape:
        raise NbledgerError("the plain form's arrays do not fit together")
    view_settings = settings["view"]
    view = ModelView(
        classes=classes,
        tokens=tokens,
        variant=view_settings["variant"],
        feature_kind=view_settings["feature_kind"],
        binarize=view_settings["binarize"],
        **{name: np.asarray(arrays[name]) for name in _VIEW_ARRAYS},
    )
    return featurizer, view.with_normal_class(normal_class)


def save(folder, arrays: dict, settings: dict, stem: str = "plain") -> None:
    """Write ``stem.npz`` (no pickles) and ``stem.json`` into ``folder``."""
    import json
    from pathlib import Path

    folder = Path(folder)
    with open(folder / f"{stem}.npz", "wb") as handle:
        np.savez(handle, **arrays, allow_pickle=False)
    (folder / f"{stem}.json").write_text(json.dumps(settings, allow_nan=False), encoding="utf-8")


def load(folder, stem: str = "plain") -> tuple[dict, dict]:
    """Read what :func:`save` wrote; refuses anything that would need a pickle."""
    import json
    from pathlib import Path

    folder = Path(folder)
    with np.load(folder / f"{stem}.npz", allow_pickle=False) as data:
        arrays = {name: data[name] for name in data.files}
    settings = json.loads((folder / f"{stem}.json").read_text(encoding="utf-8"))
    return arrays, settings
