"""Training a filter and writing its model card.

The pipeline is plain scikit-learn (a vectorizer, then a naive Bayes
classifier) so that every number nbledger reports can be reproduced with
scikit-learn alone. With a hold-out fraction the model is trained on the rest
and the hold-out scores describe exactly the model that is saved.
"""

from __future__ import annotations

import datetime as _dt
import platform
from dataclasses import asdict, dataclass
from pathlib import Path

import numpy as np

from explain.errors import NbledgerError
from explain.model.token_patterns import token_pattern

FEATURES = ("counts", "binary", "tfidf")
ANALYZERS = ("word", "char_wb")
VARIANTS = ("multinomial", "complement", "bernoulli")


@dataclass(frozen=True)
class TrainSettings:
    """What ``nbledger train`` was asked to build (recorded in the model card)."""

    features: str = "counts"
    ngrams: tuple[int, int] = (1, 1)
    analyzer: str = "word"
    variant: str = "multinomial"
    alpha: float = 1.0
    min_df: float = 1
    normal_class: str | None = None
    holdout: float = 0.0
    seed: int = 0
    #: the part of raw e-mail trained on (explain.model.email_reader.VIEWS); None for plain text
    text_view: str | None = None
    #: the named token pattern of the word analyzer (explain.model.token_patterns)
    tokens: str = "words"
    #: the e-mail reader's text rules (explain.model.email_reader.TEXT_RULES); None for plain text
    text_rules: str | None = None

    def __post_init__(self):
        if self.text_view is not None:
            from explain.model.email_reader import check_view

            check_view(self.text_view, raw=True)
        if self.features not in FEATURES:
            raise NbledgerError(f"--features must be one of {', '.join(FEATURES)}")
        if self.analyzer not in ANALYZERS:
            raise NbledgerError(f"--analyzer must be one of {', '.join(ANALYZERS)}")
        token_pattern(self.tokens)
        if self.tokens != "words" and self.analyzer != "word":
            raise NbledgerError(f"--tokens {self.tokens} applies to the word analyzer, not --analyzer {self.analyzer}")
        if self.variant not in VARIANTS:
            raise NbledgerError(f"--variant must be one of {', '.join(VARIANTS)}")
        lo, hi = self.ngrams
        if not 1 <= lo <= hi <= 9:
            raise NbledgerError(f"--ngrams must be MIN-MAX with 1 <= MIN <= MAX <= 9, got {lo}-{hi}")
        if not (self.alpha > 0 and np.isfinite(self.alpha)):
            raise NbledgerError(
                f"--alpha must be a number above 0, got {self.alpha} "
                "(with 0, a token unseen in one class gives infinite weights)"
            )
        if not (self.min_df >= 1 and float(self.min_df).is_integer()) and not 0 < self.min_df < 1:
            raise NbledgerError("--min-df must be a whole number of documents >= 1 or a fraction in (0, 1)")
        if not 0 <= self.holdout < 1:
            raise NbledgerError(f"--holdout must be a fraction in [0, 1), got {self.holdout}")


def parse_ngrams(text: str) -> tuple[int, int]:
    """``"1-2"`` -> ``(1, 2)``; ``"2"`` -> ``(2, 2)``."""
    parts = text.split("-")
    try:
        lo, hi = (int(parts[0]), int(parts[-1])) if len(parts) <= 2 else (None, None)
    except ValueError:
        lo = hi = None
    if lo is None:
        raise NbledgerError(f"--ngrams must look like 1-2, got {text!r}")
    return lo, hi


def build_pipeline(settings: TrainSettings):
    """The untrained scikit-learn pipeline these settings describe."""
    from sklearn.feature_extraction.text import CountVectorizer, TfidfVectorizer
    from sklearn.naive_bayes import BernoulliNB, ComplementNB, MultinomialNB
    from sklearn.pipeline import Pipeline

    min_df = int(settings.min_df) if settings.min_df >= 1 else float(settings.min_df)
    common = dict(
        ngram_range=tuple(settings.ngrams), analyzer=settings.analyzer, min_df=min_df,
        token_pattern=token_pattern(settings.tokens),
    )
    if settings.features == "tfidf":
        vectorizer = TfidfVectorizer(**common)
    else:
        vectorizer = CountVectorizer(binary=settings.features == "binary", **common)
    classifier = {
        "multinomial": MultinomialNB,
        "complement": ComplementNB,
        "bernoulli": BernoulliNB,
    }[settings.variant](alpha=settings.alpha)
    return Pipeline([("vectorizer", vectorizer), ("classifier", classifier)])


@dataclass(frozen=True, eq=False)
class TrainedFilter:
    """A fitted pipeline and the facts its model card records."""

    pipeline: object
    settings: TrainSettings
    rows_per_class: dict
    train_rows: int
    holdout: dict | None
    data_rows_per_class: dict | None = None

    @property
    def features_shown(self) -> str:
        """The feature kind as the classifier really uses it (glossary: feature kind)."""
        return feature_kind_words(self.settings.features, self.settings.variant)

    @property
    def ngrams_shown(self) -> str:
        return ngram_words(self.settings.ngrams, self.settings.analyzer)


_NGRAM_NAMES = {1: "unigrams", 2: "bigrams", 3: "trigrams"}


def ngram_words(ngrams: tuple[int, int], analyzer: str = "word") -> str:
    """``(1, 2)`` -> ``"unigrams and bigrams"``; character analyzers say "character n-grams".

    Examples
    --------
    >>> ngram_words((1, 1)), ngram_words((1, 2)), ngram_words((1, 3)), ngram_words((3, 5), "char_wb")
    ('unigrams', 'unigrams and bigrams', 'unigrams to trigrams', 'character 3- to 5-grams')
    """
    lo, hi = ngrams
    if analyzer != "word":
        return f"character {lo}-grams" if lo == hi else f"character {lo}- to {hi}-grams"
    name = lambda n: _NGRAM_NAMES.get(n, f"{n}-grams")  # noqa: E731
    if lo == hi:
        return name(lo)
    return f"{name(lo)} {'and' if hi == lo + 1 else 'to'} {name(hi)}"


def feature_kind_words(features: str, variant: str) -> str:
    """What the classifier multiplies per token: BernoulliNB binarises whatever it is given."""
    if variant == "bernoulli" or features == "binary":
        return "presence (0/1)"
    kinds = {"counts": "token counts", "tfidf": "TF-IDF weights", "normalised": "normalised hashed counts"}
    return kinds[features]


def train_filter(texts, labels, settings: TrainSettings, ids=None) -> TrainedFilter:
    """Fit the pipeline; with a hold-out, score it on the rows it did not see.

    ``ids`` (one per row, default data row numbers from 1) name the held-out
    rows in the card, so that a later ``vocab --data`` or ``assess`` can tell
    which rows the model trained on. ``rows_per_class`` counts the rows
    actually trained on; ``data_rows_per_class`` the whole file.
    """
    from sklearn.metrics import accuracy_score, f1_score
    from sklearn.model_selection import train_test_split

    labels = np.asarray(labels, dtype=object)
    classes, per_class = np.unique(labels, return_counts=True)
    if len(classes) < 2:
        raise NbledgerError(
            f"the label column has one class ({classes[0]!r}); a filter needs at least two"
        )
    if settings.normal_class is not None and settings.normal_class not in set(classes):
        raise NbledgerError(
            f"--normal-class {settings.normal_class!r} is not among the labels: {', '.join(classes)}"
        )
    texts = list(texts)
    ids = np.asarray([str(i + 1) for i in range(len(texts))] if ids is None else ids, dtype=object).astype(str)
    rows = np.arange(len(texts))
    holdout = None
    train_x, train_y = texts, labels
    if settings.holdout > 0:
        if per_class.min() < 2:
            rare = classes[per_class < 2]
            raise NbledgerError(f"a hold-out needs 2+ rows per class; too few for: {', '.join(rare)}")
        try:
            train_rows, test_rows = train_test_split(
                rows, test_size=settings.holdout, random_state=settings.seed, stratify=labels
            )
        except ValueError as exc:
            raise NbledgerError(f"cannot make a hold-out of {settings.holdout}: {exc}") from None
        train_x, train_y = [texts[i] for i in train_rows], labels[train_rows]
        test_x, test_y = [texts[i] for i in test_rows], labels[test_rows]
    pipeline = build_pipeline(settings)
    try:
        pipeline.fit(train_x, train_y)
    except ValueError as exc:
        raise NbledgerError(f"training failed: {str(exc).splitlines()[0]}") from None
    if settings.holdout > 0:
        predicted = pipeline.predict(test_x)
        f1 = f1_score(test_y, predicted, labels=classes, average=None, zero_division=0)
        held = np.sort(test_rows)
        holdout = {
            "fraction": settings.holdout,
            "seed": settings.seed,
            "method": "sklearn.model_selection.train_test_split, stratified by label",
            "rows": len(test_y),
            "data_rows": [int(r) + 1 for r in held],
            "ids": ids[held].tolist(),
            "accuracy": float(accuracy_score(test_y, predicted)),
            "macro_f1": float(np.mean(f1)),
            "f1_per_class": {str(c): float(v) for c, v in zip(classes, f1)},
        }
    trained_classes, trained_counts = np.unique(np.asarray(train_y, dtype=object), return_counts=True)
    return TrainedFilter(
        pipeline=pipeline,
        settings=settings,
        rows_per_class={str(c): int(n) for c, n in zip(trained_classes, trained_counts)},
        train_rows=len(train_y),
        holdout=holdout,
        data_rows_per_class={str(c): int(n) for c, n in zip(classes, per_class)},
    )


def library_versions() -> dict:
    import numpy
    import scipy
    import skops
    import sklearn

    import explain

    return {
        "python": platform.python_version(),
        "nbledger": explain.__version__,
        "scikit-learn": sklearn.__version__,
        "numpy": numpy.__version__,
        "scipy": scipy.__version__,
        "skops": skops.__version__,
    }


def model_card(trained: TrainedFilter, *, model_file: str, model_sha256: str, data: dict) -> dict:
    """The JSON model card written beside the model file (with the model's fingerprint, :mod:`explain.model.fingerprint`)."""
    from explain.model.fingerprint import of_pipeline

    card = {
        "card_version": 1,
        "created": _dt.datetime.now(_dt.timezone.utc).replace(microsecond=0).isoformat(),
        "model": {"file": model_file, "sha256": model_sha256},
        "data": {**data, "rows_per_class": trained.data_rows_per_class},
        "settings": {**asdict(trained.settings), "ngrams": list(trained.settings.ngrams)},
        "training_rows": trained.train_rows,
        "training_rows_per_class": trained.rows_per_class,
        "feature_kind": "binary" if trained.settings.variant == "bernoulli" else trained.settings.features,
        "holdout": trained.holdout,
        "versions": library_versions(),
    }
    card["model"]["fingerprint"] = of_pipeline(trained.pipeline, card)
    return card


@dataclass(frozen=True, eq=False)
class TrainingRows:
    """Which rows of a labelled file trained the model, as far as its card tells.

    ``trained`` is a bool array of shape (n_rows,) marking the rows the model
    was trained on, or None when the card cannot tell (no card, or another
    file). ``note`` says, in a sentence, what was found.
    """

    trained: np.ndarray | None
    note: str


def rows_trained_on(card: dict | None, messages) -> TrainingRows:
    """Match a labelled file against the model card's training data and hold-out.

    The file is the training file when its SHA-256 equals the card's; the
    held-out rows are then the card's ``holdout.data_rows`` (data rows from 1,
    independent of any id column).
    """
    name, n = Path(messages.source).name, len(messages)
    if card is None:
        return TrainingRows(None, f"the model has no card, so whether it trained on the {n:,} messages of {name} is unknown")
    recorded = (card.get("data") or {}).get("sha256")
    if recorded != messages.sha256:
        return TrainingRows(
            None,
            f"{name} is not the model's training file (its SHA-256 differs from the card's): its {n:,} messages "
            "may include messages the model never trained on",
        )
    holdout = card.get("holdout") or {}
    held = np.asarray(holdout.get("data_rows") or [], dtype=np.int64)
    if holdout and not len(held):
        return TrainingRows(
            None,
            f"{name} is the model's training file, but the card does not list its held-out rows: "
            f"the counts include the {holdout.get('rows', 'unknown number of')} rows the model did not train on",
        )
    if len(held) and (held.min() < 1 or held.max() > n):
        raise NbledgerError(f"the model card's held-out rows do not fit {name} ({n:,} rows)")
    trained = np.ones(n, dtype=bool)
    trained[held - 1] = False
    if not len(held):
        return TrainingRows(trained, f"{name} is the model's training file; all its {n:,} rows trained the model")
    return TrainingRows(
        trained,
        f"{name} is the model's training file: counted the {int(trained.sum()):,} rows the model trained on, "
        f"leaving out the {len(held):,} held-out rows the card lists",
    )
