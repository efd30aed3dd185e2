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

import numpy as np

from explain.errors import NbledgerError

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

    def __post_init__(self):
        if self.features not in FEATURES:
            raise NbledgerError(f"--features must be one of {', '.join(FEATURES)}")
        if self.analyzer not in ANALYZERS:
            raise NbledgerError(f"--analyzer must be one of {', '.join(ANALYZERS)}")
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
    common = dict(ngram_range=tuple(settings.ngrams), analyzer=settings.analyzer, min_df=min_df)
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


def train_filter(texts, labels, settings: TrainSettings) -> TrainedFilter:
    """Fit the pipeline; with a hold-out, score it on the rows it did not see."""
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
    holdout = None
    train_x, train_y = texts, labels
    if settings.holdout > 0:
        if per_class.min() < 2:
            rare = classes[per_class < 2]
            raise NbledgerError(f"a hold-out needs 2+ rows per class; too few for: {', '.join(rare)}")
        try:
            train_x, test_x, train_y, test_y = train_test_split(
                texts, labels, test_size=settings.holdout, random_state=settings.seed, stratify=labels
            )
        except ValueError as exc:
            raise NbledgerError(f"cannot make a hold-out of {settings.holdout}: {exc}") from None
    pipeline = build_pipeline(settings)
    try:
        pipeline.fit(train_x, train_y)
    except ValueError as exc:
        raise NbledgerError(f"training failed: {str(exc).splitlines()[0]}") from None
    if settings.holdout > 0:
        predicted = pipeline.predict(test_x)
        f1 = f1_score(test_y, predicted, labels=classes, average=None, zero_division=0)
        holdout = {
            "fraction": settings.holdout,
            "rows": len(test_y),
            "accuracy": float(accuracy_score(test_y, predicted)),
            "macro_f1": float(np.mean(f1)),
            "f1_per_class": {str(c): float(v) for c, v in zip(classes, f1)},
        }
    return TrainedFilter(
        pipeline=pipeline,
        settings=settings,
        rows_per_class={str(c): int(n) for c, n in zip(classes, per_class)},
        train_rows=len(train_y),
        holdout=holdout,
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
    """The JSON model card written beside the model file."""
    return {
        "card_version": 1,
        "created": _dt.datetime.now(_dt.timezone.utc).replace(microsecond=0).isoformat(),
        "model": {"file": model_file, "sha256": model_sha256},
        "data": {**data, "rows_per_class": trained.rows_per_class},
        "settings": {**asdict(trained.settings), "ngrams": list(trained.settings.ngrams)},
        "training_rows": trained.train_rows,
        "holdout": trained.holdout,
        "versions": library_versions(),
    }
