"""One normalised view of a trained naive Bayes classifier.

Every supported scikit-learn variant reduces to the same small set of arrays:
a per-class evidence table ``weights`` (``W``, classes x features) and a
per-class ``baseline`` (``b``) such that the classifier's joint log-likelihood
of a feature row ``x`` is exactly::

    jll[c] = b[c] + sum_j x[j] * W[c, j]

- ``MultinomialNB``: ``W = feature_log_prob_``, ``b = class_log_prior_``
  (McCallum & Nigam 1998, "A comparison of event models for naive Bayes
  text classification").
- ``ComplementNB``: ``W = feature_log_prob_`` (the complement weights, already
  negated or normalised by scikit-learn), ``b = 0``; the prior is only added
  when the model has a single class (Rennie et al. 2003, "Tackling the poor
  assumptions of naive Bayes text classifiers").
- ``BernoulliNB``: features are binarised; with ``p = exp(feature_log_prob_)``
  ``W = log p - log(1 - p)`` and ``b = class_log_prior_ + sum_j log(1 - p_j)``.
  The second part of ``b`` is the evidence of every vocabulary token being
  *absent*; it is kept separately as ``absence``.

The view also keeps the training counts (``feature_count_``, ``class_count_``)
so that vocabulary reviews can weigh evidence by its support.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np
import scipy.sparse as sp
from scipy.special import logsumexp

from explain.errors import NbledgerError

VARIANTS = ("multinomial", "complement", "bernoulli")
FEATURE_KINDS = ("counts", "binary", "tfidf", "normalised")
# Kinds whose feature values depend on the whole message (row normalisation):
# evidence is re-scored after a removal, never summed per occurrence.
ROW_WEIGHTED = ("tfidf", "normalised")


@dataclass(frozen=True, eq=False)
class ModelView:
    """The arrays that decide every score of a naive Bayes filter.

    Attributes
    ----------
    classes : ndarray of str, shape (C,)
        Class labels in the classifier's order (``classes_``).
    variant : str
        ``"multinomial"``, ``"complement"`` or ``"bernoulli"``.
    tokens : ndarray of str, shape (F,)
        Column ``j`` of the feature matrix is the token ``tokens[j]``.
    weights : ndarray of float64, shape (C, F)
        ``W``: what one unit of feature ``j`` adds to class ``c``'s score.
    baseline : ndarray of float64, shape (C,)
        ``b = prior + absence``: the score of a message with no known token.
    prior : ndarray of float64, shape (C,)
        The log prior part of ``b`` (zero for ComplementNB with 2+ classes).
    absence : ndarray of float64, shape (C,)
        BernoulliNB only: ``sum_j log(1 - p[c, j])``, the evidence of every
        token being absent. Zero for the other variants.
    feature_count : ndarray of float64, shape (C, F)
        Training feature totals per class (``feature_count_``): occurrences
        for count features, documents for binary features, summed weights
        for TF-IDF.
    class_count : ndarray of float64, shape (C,)
        Training messages per class (``class_count_``).
    feature_kind : str
        ``"counts"``, ``"binary"``, ``"tfidf"`` or ``"normalised"`` (a
        HashingVectorizer's counts scaled by its ``norm``): what a feature value is.
    binarize : float or None
        BernoulliNB's threshold: a feature is present when its value is
        greater than this. None for the other variants or no binarisation.
    normal_class : str or None
        The class meaning "let it through", when known.
    """

    classes: np.ndarray
    variant: str
    tokens: np.ndarray
    weights: np.ndarray
    baseline: np.ndarray
    prior: np.ndarray
    absence: np.ndarray
    feature_count: np.ndarray
    class_count: np.ndarray
    feature_kind: str
    binarize: float | None = None
    normal_class: str | None = None

    def __post_init__(self):
        check_numbers(self)

    @property
    def n_classes(self) -> int:
        return len(self.classes)

    @property
    def n_features(self) -> int:
        return len(self.tokens)

    def class_index(self, name: str) -> int:
        """Index of class ``name``; a one-line error lists the classes otherwise."""
        hits = np.flatnonzero(self.classes == str(name))
        if len(hits) == 0:
            raise NbledgerError(
                f"no class {name!r} in this model; its classes are: {', '.join(self.classes)}"
            )
        return int(hits[0])

    @property
    def normal_index(self) -> int | None:
        return None if self.normal_class is None else self.class_index(self.normal_class)

    def with_names(self, names: dict[int, tuple[str, ...]]) -> "ModelView":
        """The same view with columns renamed: ``names[j]`` are the tokens known to share column ``j``.

        For hashed features, whose columns have no stored names; tokens that
        collide in one column are joined by `` / ``.
        """
        if not names:
            return self
        tokens = self.tokens.copy()
        for column, shared in names.items():
            tokens[column] = " / ".join(shared)
        return replace(self, tokens=tokens)

    def with_normal_class(self, name: str | None) -> "ModelView":
        """The same view with a designated normal class (validated)."""
        if name is None:
            return self
        self.class_index(name)
        return replace(self, normal_class=str(name))

    def prepare(self, X) -> sp.csr_matrix:
        """Turn the vectorizer's output into what the classifier multiplies.

        BernoulliNB binarises (``x > binarize``); other variants use ``X`` as is.
        """
        X = sp.csr_matrix(X, dtype=np.float64)
        if self.variant == "bernoulli" and self.binarize is not None:
            X = X.copy()
            X.data = (X.data > self.binarize).astype(np.float64)
            X.eliminate_zeros()
        return X

    def joint_log_likelihood(self, X) -> np.ndarray:
        """``b + X W^T`` for a prepared feature matrix, shape (n, C)."""
        return np.asarray(X @ self.weights.T) + self.baseline

    def posterior(self, jll: np.ndarray) -> np.ndarray:
        """Class probabilities from joint log-likelihoods (softmax over classes)."""
        return np.exp(jll - logsumexp(jll, axis=-1, keepdims=True))


#: Largest a class's |baseline| + sum of |weights| may be: far above any trained filter's (tens to
#: thousands), yet leaving a factor of 10^100 for counts before a score could overflow float64.
MAX_WEIGHT_SUM = 1e200


def check_numbers(view: ModelView) -> None:
    """Refuse numbers no trained naive Bayes filter has, with one line each.

    - weights, baseline, prior and absence not finite: a NaN makes every score
      it touches meaningless, an infinity makes it absolute (a model trained
      with alpha = 0 has infinite weights); neither can be explained as a sum;
    - training counts (``feature_count``, ``class_count``) NaN, infinite or
      negative: counts of messages and tokens are never so;
    - a class with no training messages (``class_count`` 0): nothing was learnt for it;
    - weights whose sum per class overflows float64 (or comes near to it), so
      that a message's score could be infinite although every weight is finite.
    """
    for name in ("weights", "baseline", "prior", "absence"):
        values = np.asarray(getattr(view, name), dtype=np.float64)
        if not np.isfinite(values).all():
            nan, inf = int(np.isnan(values).sum()), int(np.isinf(values).sum())
            raise NbledgerError(
                f"the model's {name} are not all finite ({nan} not a number, {inf} infinite); "
                "it cannot be scored or explained exactly (a model trained with alpha = 0 has infinite weights)"
            )
    for name in ("feature_count", "class_count"):
        values = np.asarray(getattr(view, name), dtype=np.float64)
        bad = int((~np.isfinite(values)).sum())
        negative = int((values < 0).sum())
        if bad or negative:
            raise NbledgerError(
                f"the model's training counts ({name}) hold {bad} values that are not finite numbers and "
                f"{negative} negative ones; counts of messages and tokens never are, so the file cannot be trusted"
            )
    empty = np.flatnonzero(np.asarray(view.class_count, dtype=np.float64) == 0)
    if len(empty):
        names = ", ".join(str(view.classes[i]) for i in empty[:5]) + (" ..." if len(empty) > 5 else "")
        raise NbledgerError(
            f"{len(empty)} of the model's classes had no training messages ({names}); "
            "nothing was learnt for them, so their scores mean nothing"
        )
    with np.errstate(over="ignore", invalid="ignore"):
        totals = np.abs(np.asarray(view.weights, dtype=np.float64)).sum(axis=1) + np.abs(np.asarray(view.baseline))
    if not (np.isfinite(totals).all() and (totals <= MAX_WEIGHT_SUM).all()):
        raise NbledgerError(
            f"the model's weights are so large that their sum for one class exceeds {MAX_WEIGHT_SUM:.0e} "
            "(or overflows); a message's score could overflow, so it is not scored"
        )


def view_of(classifier, tokens, feature_kind: str, normal_class: str | None = None) -> ModelView:
    """Build the normalised view of a fitted scikit-learn naive Bayes classifier.

    Parameters
    ----------
    classifier : MultinomialNB, ComplementNB or BernoulliNB, fitted.
    tokens : sequence of str, the vectorizer's feature names in column order.
    feature_kind : ``"counts"``, ``"binary"`` or ``"tfidf"``.
    normal_class : the class that means "let it through", if known.

    Examples
    --------
    >>> from sklearn.naive_bayes import MultinomialNB
    >>> clf = MultinomialNB().fit([[2, 0], [0, 3]], ["ok", "scam"])
    >>> view = view_of(clf, ["tea", "fee"], "counts")
    >>> bool(np.allclose(view.joint_log_likelihood(view.prepare([[1, 1]])),
    ...                  clf.predict_joint_log_proba([[1, 1]])))
    True
    """
    from sklearn.naive_bayes import BernoulliNB, ComplementNB, MultinomialNB

    # Exact types: a subclass may override the scoring and break the identity.
    kind = {MultinomialNB: "multinomial", ComplementNB: "complement", BernoulliNB: "bernoulli"}.get(
        type(classifier)
    )
    if kind is None:
        raise NbledgerError(
            f"the classifier is {type(classifier).__name__}; supported: MultinomialNB, ComplementNB, BernoulliNB"
        )
    if not hasattr(classifier, "feature_log_prob_"):
        raise NbledgerError(f"the {type(classifier).__name__} in this file has not been fitted")
    if feature_kind not in FEATURE_KINDS:
        raise ValueError(f"feature_kind must be one of {FEATURE_KINDS}")

    flp = np.asarray(classifier.feature_log_prob_, dtype=np.float64)
    log_prior = np.asarray(classifier.class_log_prior_, dtype=np.float64)
    classes = np.asarray([str(c) for c in classifier.classes_], dtype=object)
    tokens = np.asarray(list(tokens), dtype=object)
    if flp.shape != (len(classes), len(tokens)):
        raise NbledgerError(
            f"the classifier expects {flp.shape[1]} features but the vectorizer makes {len(tokens)}"
        )
    absence = np.zeros(len(classes))
    binarize = None
    if kind == "multinomial":
        weights, prior = flp, log_prior
    elif kind == "complement":
        weights = flp
        prior = log_prior if len(classes) == 1 else np.zeros(len(classes))
    else:
        # Same expression as scikit-learn, so that the sums agree to the last bits.
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):  # refused below, in one line
            neg = np.log(1 - np.exp(flp))
            weights = flp - neg
            absence = neg.sum(axis=1)
        prior = log_prior
        binarize = None if classifier.binarize is None else float(classifier.binarize)
        feature_kind = "binary" if binarize is not None else feature_kind

    return ModelView(
        classes=classes,
        variant=kind,
        tokens=tokens,
        weights=weights,
        baseline=prior + absence,
        prior=prior,
        absence=absence,
        feature_count=np.asarray(classifier.feature_count_, dtype=np.float64),
        class_count=np.asarray(classifier.class_count_, dtype=np.float64),
        feature_kind=feature_kind,
        binarize=binarize,
        normal_class=None if normal_class is None else str(normal_class),
    ).with_normal_class(normal_class)
