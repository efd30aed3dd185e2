"""Messages whose label the filter strongly disputes: suspected label errors.

A filter scored on the messages it was trained on agrees with their labels,
right or wrong. So each message is scored by a copy of the filter's own
pipeline (same settings) refitted without it: the labelled data are cut into
``folds`` stratified folds, and each fold is scored by a copy fitted on the
others (out-of-sample probabilities, shape (n, C)). Confident learning
(Northcutt, Jiang & Chuang 2021, "Confident Learning: Estimating Uncertainty
in Dataset Labels", Journal of Artificial Intelligence Research 70) then
picks the messages whose label is likely wrong, through the maintained
implementation :func:`cleanlab.filter.find_label_issues` with its default
method (``prune_by_noise_rate``), ranked by self-confidence (lowest
out-of-sample probability of the given label first).

A suspicion is a reason to look again, not a finding: the label may be right
and the filter wrong.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from explain.analysis.error_review import TokenPush, top_pushes
from explain.analysis.rates import frozen
from explain.errors import NbledgerError
from explain.model.model_view import ModelView

DEFAULT_FOLDS = 5
#: The folds are shuffled with this seed, so that a run can be repeated exactly.
FOLD_SEED = 0
METHOD = "confident learning (cleanlab.filter.find_label_issues, prune_by_noise_rate, ranked by self-confidence)"


@dataclass(frozen=True)
class SuspectedLabel:
    """A message whose label the refitted filters dispute.

    ``label_probability`` and ``favoured_probability`` are the out-of-sample
    probabilities of the given label and of the class the filter favours
    (its most probable class); ``log_odds`` is ``log`` of their ratio.
    ``toward_favoured``/``toward_label`` are the tokens with the most evidence
    (under the assessed model) toward the favoured class and toward the label.
    """

    index: int
    id: str
    label: str
    favoured_class: str
    label_probability: float
    favoured_probability: float
    log_odds: float
    toward_favoured: tuple[TokenPush, ...]
    toward_label: tuple[TokenPush, ...]


@dataclass(frozen=True, eq=False)
class LabelErrors:
    """The suspected label errors of a labelled data set, most suspicious first.

    ``out_of_sample`` holds the out-of-sample probabilities, shape (n, C),
    columns in the order of ``classes``.
    """

    method: str
    folds: int
    seed: int
    classes: tuple[str, ...]
    n_messages: int
    out_of_sample: np.ndarray
    suspected: tuple[SuspectedLabel, ...]


def out_of_sample_probabilities(pipeline, texts, truth: np.ndarray, classes, folds: int = DEFAULT_FOLDS) -> np.ndarray:
    """Class probabilities of each message from copies of ``pipeline`` fitted without its fold.

    Parameters
    ----------
    pipeline : an unfitted scikit-learn pipeline (texts in, ``predict_proba`` out).
    texts : sequence of str, length n.
    truth : int array (n,), index of each message's label in ``classes``.
    classes : the model's class names, in its column order.
    folds : number of stratified folds (shuffled with :data:`FOLD_SEED`).

    Returns an array of shape (n, len(classes)).
    """
    from sklearn.base import clone
    from sklearn.model_selection import StratifiedKFold

    counts = np.bincount(truth, minlength=len(classes))
    if folds < 2:
        raise NbledgerError(f"--folds must be at least 2, got {folds}")
    thin = [f"{classes[c]!r} ({counts[c]})" for c in range(len(classes)) if counts[c] < folds]
    if thin:
        raise NbledgerError(
            f"{folds} folds need at least {folds} labelled messages of every class; too few: {', '.join(thin)}"
        )
    texts = np.asarray(list(texts), dtype=object)
    names = np.asarray(classes, dtype=object)[truth]
    probabilities = np.zeros((len(texts), len(classes)))
    splitter = StratifiedKFold(n_splits=folds, shuffle=True, random_state=FOLD_SEED)
    for train, held in splitter.split(texts, truth):
        fitted = clone(pipeline).fit(list(texts[train]), names[train])
        columns = [list(classes).index(str(c)) for c in fitted.classes_]
        probabilities[np.ix_(held, columns)] = fitted.predict_proba(list(texts[held]))
    return probabilities


def find_suspected(truth: np.ndarray, out_of_sample: np.ndarray) -> np.ndarray:
    """Indices of the suspected label errors, most suspicious first (cleanlab, see the module)."""
    from cleanlab.filter import find_label_issues

    # n_jobs=1: cleanlab otherwise forks a process pool from this process, which may hold other
    # threads (pyarrow's allocator starts one); a pool worker once hung on a lock copied mid-use.
    # The result does not depend on n_jobs (cleanlab's documentation).
    return np.asarray(
        find_label_issues(truth, out_of_sample, return_indices_ranked_by="self_confidence", n_jobs=1),
        dtype=np.int64,
    )


def label_errors(
    view: ModelView, X, truth: np.ndarray, ids, out_of_sample: np.ndarray, *, folds: int, top_tokens: int = 5
) -> LabelErrors:
    """The suspected label errors, with the evidence behind each.

    ``X`` is the assessed model's feature matrix of the messages (n, F), used
    for the token evidence; ``truth`` the label index per message;
    ``out_of_sample`` from :func:`out_of_sample_probabilities`.
    """
    rows = find_suspected(truth, out_of_sample)
    favoured = np.argmax(out_of_sample, axis=1)
    classes = tuple(str(c) for c in view.classes)
    pushes = top_pushes(view, X, rows, favoured[rows], truth[rows], top_tokens) if len(rows) else []
    with np.errstate(divide="ignore"):
        log_p = np.log(out_of_sample)
    suspected = tuple(
        SuspectedLabel(
            index=int(r),
            id=str(ids[r]),
            label=classes[truth[r]],
            favoured_class=classes[favoured[r]],
            label_probability=float(out_of_sample[r, truth[r]]),
            favoured_probability=float(out_of_sample[r, favoured[r]]),
            log_odds=float(log_p[r, favoured[r]] - log_p[r, truth[r]]),
            toward_favoured=pushes[i][0],
            toward_label=pushes[i][1],
        )
        for i, r in enumerate(rows)
    )
    return LabelErrors(METHOD, folds, FOLD_SEED, classes, len(truth), frozen(out_of_sample), suspected)
