"""Comparing two filters: what the new one learned differently, and which decisions it changes.

:func:`compare_models` reads two loaded models (and, optionally, labelled
messages) and returns a frozen :class:`Comparison`:

- vocabulary: tokens only in the old or the new model, and, on the tokens
  both know, the largest shifts in evidence per unit for each flagged class
  against the normal class (``W[c, j] - W[normal, j]``, natural log) and the
  rank changes under the z-score lens of the vocabulary review;
- priors: each class's share of the training messages and its log prior;
- with messages: each model's decision on every message, with its own text
  steps (so models with different vectorizers are compared on what they
  decide), the count of each kind of change (``ok -> scam`` ...), the
  ledgers of both models for the first ``show`` changed messages, and
  with labels the accuracy (and flagging metrics) of both with Wilson
  intervals and McNemar's test on the paired decisions (McNemar 1947).

Tokens are matched by their text: two models that cut text differently
share only the tokens both make, and the rest is listed, not compared.

The settings that make the two filters what they are (variant, features,
analyzer, n-grams, alpha, vocabulary size, text view, fingerprint) are set
side by side with the differences marked (:class:`Setting`). When the weight
scales differ (another variant or another feature kind), a weight per unit of
one model is not a weight per unit of the other: shared tokens are then
compared by their *per-occurrence* log-odds against the normal class, the
evidence one occurrence adds in a message holding that token alone
(``(W[c, j] - W[normal, j]) * v_j`` with ``v_j`` the feature value the
model's own text steps give that message), and ``Comparison.weights_compared``
says so.
"""

from __future__ import annotations

from collections import Counter
from dataclasses import dataclass

import numpy as np

from explain.analysis.rates import BinaryMetrics, Rate, binary_metrics, frozen, rate_of
from explain.analysis.stats import McNemarTest, mcnemar
from explain.errors import NbledgerError
from explain.model.decision import DecisionRule, check_threshold, flag_probability

DEFAULT_TOP = 15
DEFAULT_SHOW = 20


@dataclass(frozen=True)
class Shift:
    """One shared token's evidence per unit toward ``target`` against ``other``, in both models."""

    token: str
    old: float
    new: float

    @property
    def change(self) -> float:
        return self.new - self.old


@dataclass(frozen=True)
class Setting:
    """One setting of both filters: ``name`` (a glossary key), its ``old`` and ``new`` values, and whether they differ."""

    name: str
    old: object
    new: object
    differs: bool


#: How shared tokens' weights are compared: per unit of each model's feature value, or per occurrence.
PER_UNIT = "per unit"
PER_OCCURRENCE = "per occurrence"


@dataclass(frozen=True)
class RankChange:
    """One shared token's 1-based rank under the z-score lens (1 = strongest for the target)."""

    token: str
    old_rank: int
    new_rank: int
    old_zscore: float
    new_zscore: float


@dataclass(frozen=True)
class ComparisonChange:
    """Changes in one comparison (``target`` against ``other``), on the shared tokens."""

    target: str
    other: str
    shifts_up: tuple[Shift, ...]
    shifts_down: tuple[Shift, ...]
    ranks: tuple[RankChange, ...]

    @property
    def label(self) -> str:
        return f"{self.target} vs {self.other}"


@dataclass(frozen=True)
class PriorChange:
    """A class's share of training messages and log prior in each model (None where absent)."""

    cls: str
    old_share: float | None
    new_share: float | None
    old_log_prior: float | None
    new_log_prior: float | None


@dataclass(frozen=True)
class VocabularyChange:
    """Tokens added, removed and shared (by text), and the class comparisons, on the shared ones.

    ``added`` and ``removed`` are ordered by use in training, most used first.
    """

    old_size: int
    new_size: int
    shared: int
    added: tuple[str, ...]
    removed: tuple[str, ...]
    comparisons: tuple[ComparisonChange, ...]
    priors: tuple[PriorChange, ...]


@dataclass(frozen=True, eq=False)
class ChangedMessage:
    """A message whose decision changes, with both ledgers (:class:`explain.analysis.ledger.Ledger`)."""

    row: int
    message_id: str
    label: str | None
    old_decision: str
    new_decision: str
    old: object
    new: object


@dataclass(frozen=True)
class ModelScore:
    """One model's results on the labelled messages: accuracy and, with a normal class, flagging."""

    accuracy: Rate
    flagging: BinaryMetrics | None


@dataclass(frozen=True, eq=False)
class DecisionChanges:
    """Both models' decisions on the same messages.

    ``old_decisions`` and ``new_decisions`` are arrays of str, shape (n,);
    ``changes`` maps ``(old, new)`` to how many messages moved so;
    ``shown`` holds the first changed messages with both ledgers.
    """

    source: str
    n: int
    old_decisions: np.ndarray
    new_decisions: np.ndarray
    changes: tuple[tuple[str, str, int], ...]
    shown: tuple[ChangedMessage, ...]
    old_score: ModelScore | None
    new_score: ModelScore | None
    mcnemar: McNemarTest | None

    @property
    def changed(self) -> int:
        return sum(n for _, _, n in self.changes)


@dataclass(frozen=True, eq=False)
class Comparison:
    """Everything ``nbledger compare`` reports; presenters only read it."""

    old_path: str
    new_path: str
    old_sha256: str
    new_sha256: str
    same_file: bool
    old_classes: tuple[str, ...]
    new_classes: tuple[str, ...]
    normal_class: str | None
    threshold: float | None
    #: the same threshold as flag log-odds, exact when it was given so
    threshold_log_odds: float | None
    same_text_steps: bool
    vocabulary: VocabularyChange
    decisions: DecisionChanges | None
    notes: tuple[str, ...]
    #: ``(old, new)`` :class:`explain.analysis.appeals.Appeals` from the review desk (``--reviews``), else None
    appeals: tuple | None = None
    settings: tuple[Setting, ...] = ()
    weights_compared: str = PER_UNIT
    #: the models' fingerprints (:mod:`explain.model.fingerprint`): equal when the two decide alike
    old_fingerprint: str | None = None
    new_fingerprint: str | None = None


def _setting_values(model) -> dict:
    """The settings of one filter, by glossary key, as plain values (None where the model does not say)."""
    from explain.model.email_reader import resolve_text_view

    view, vec = model.view, model.featurizer.vectorizer
    params = vec.get_params()
    analyzer = params.get("analyzer")
    alpha = ((model.classifier_settings or {}).get("params") or {}).get("alpha")
    return {
        "variant": view.variant,
        "feature_kind": view.feature_kind,
        "analyzer": analyzer if isinstance(analyzer, str) else "custom",
        "ngrams": list(params.get("ngram_range") or (1, 1)),
        "alpha": alpha if alpha is None or isinstance(alpha, (int, float)) else list(np.ravel(alpha)),
        "vocabulary_size": int(view.n_features),
        "text_view": resolve_text_view(model.card),
        "fingerprint": model.fingerprint,
    }


def settings_table(old, new) -> tuple[Setting, ...]:
    """Both filters' settings side by side, each marked when it differs."""
    a, b = _setting_values(old), _setting_values(new)
    return tuple(Setting(k, a[k], b[k], a[k] != b[k]) for k in a)


def _one_occurrence(model, cols: np.ndarray) -> np.ndarray:
    """The feature value of token ``cols[i]`` in a message holding it once and nothing else (model's own steps)."""
    import scipy.sparse as sp

    k = len(cols)
    counts = sp.csr_matrix((np.ones(k), (np.arange(k), cols)), shape=(k, model.view.n_features))
    values = model.featurizer.weigh(counts)
    return np.asarray(values[np.arange(k), cols]).ravel()


def _text_steps(model) -> dict:
    """The settings that decide how text becomes tokens (for saying whether two models cut text alike)."""
    vec = model.featurizer.vectorizer
    keys = ("analyzer", "token_pattern", "ngram_range", "lowercase", "strip_accents", "stop_words", "preprocessor", "tokenizer")
    params = vec.get_params()
    return {k: repr(params.get(k)) for k in keys} | {"kind": type(vec).__name__}


def _normal_class(old, new, normal_class: str | None) -> str | None:
    if normal_class is not None:
        for model, name in ((old, "old"), (new, "new")):
            if normal_class not in set(model.view.classes):
                raise NbledgerError(
                    f"--normal-class {normal_class!r} is not a class of the {name} model "
                    f"({', '.join(model.view.classes)})"
                )
        return normal_class
    names = {m.view.normal_class for m in (old, new)} - {None}
    if len(names) > 1:
        raise NbledgerError(
            f"the two models name different normal classes ({', '.join(sorted(names))}): choose one with --normal-class"
        )
    name = next(iter(names), None)
    if name is not None and all(name in set(m.view.classes) for m in (old, new)):
        return name
    return None


def _comparison_change(old_view, new_view, target: str, other: str, old_cols, new_cols, tokens, old_review, new_review, top,
                       scales=None):
    def per_unit(view, cols):
        t, o = view.class_index(target), view.class_index(other)
        return view.weights[t, cols] - view.weights[o, cols]

    before, after = per_unit(old_view, old_cols), per_unit(new_view, new_cols)
    if scales is not None:  # weight scales differ: per occurrence, each with its own feature value
        before, after = before * scales[0], after * scales[1]
    change = after - before
    order = np.argsort(-change, kind="stable")
    up = tuple(Shift(str(tokens[i]), float(before[i]), float(after[i])) for i in order[:top] if change[i] > 0)
    down = tuple(
        Shift(str(tokens[i]), float(before[i]), float(after[i])) for i in order[::-1][:top] if change[i] < 0
    )
    ranks: tuple[RankChange, ...] = ()
    label = f"{target} vs {other}"
    found = [
        next((c for c in review.comparisons if c.label == label), None) for review in (old_review, new_review)
    ]
    if all(c is not None for c in found):
        from explain.analysis.vocab import LENSES

        lens = LENSES.index("zscore")
        old_c, new_c = found
        # Ranks among the shared tokens only, so that added and removed tokens do not move them.
        old_z, new_z = old_c.zscore[old_cols], new_c.zscore[new_cols]
        old_rank = np.empty(len(tokens), dtype=np.int64)
        new_rank = np.empty(len(tokens), dtype=np.int64)
        old_rank[np.argsort(old_c.rank[lens, old_cols], kind="stable")] = np.arange(1, len(tokens) + 1)
        new_rank[np.argsort(new_c.rank[lens, new_cols], kind="stable")] = np.arange(1, len(tokens) + 1)
        # The tokens in the top of either model, by how far they moved.
        leading = np.flatnonzero((old_rank <= top) | (new_rank <= top))
        leading = leading[np.argsort(-np.abs(old_rank[leading] - new_rank[leading]), kind="stable")]
        ranks = tuple(
            RankChange(str(tokens[i]), int(old_rank[i]), int(new_rank[i]), float(old_z[i]), float(new_z[i]))
            for i in leading
        )
    return ComparisonChange(target, other, up, down, ranks)


def _by_use(view, tokens: np.ndarray, keep: np.ndarray) -> tuple[str, ...]:
    """The kept tokens, most used in training first (summed feature counts over classes), ties by text."""
    cols = np.flatnonzero(keep)
    use = view.feature_count[:, cols].sum(axis=0)
    order = sorted(range(len(cols)), key=lambda i: (-use[i], tokens[cols[i]]))
    return tuple(str(tokens[cols[i]]) for i in order)


def vocabulary_change(old, new, normal_class: str | None, top: int = DEFAULT_TOP,
                      per_occurrence: bool = False) -> VocabularyChange:
    """Tokens added and removed, evidence shifts and z-score rank changes on the shared tokens, priors.

    ``per_occurrence``: compare shared tokens by per-occurrence log-odds (for weight scales that differ).
    """
    from explain.analysis.vocab import review_vocabulary

    old_view, new_view = old.view, new.view
    # Dictionaries, not numpy's set operations on fixed-width strings: one long
    # token would widen every element of the array.
    old_tokens = np.asarray([str(t) for t in old_view.tokens], dtype=object)
    new_tokens = np.asarray([str(t) for t in new_view.tokens], dtype=object)
    new_index = {t: j for j, t in enumerate(new_tokens)}
    found = np.fromiter((new_index.get(t, -1) for t in old_tokens), dtype=np.int64, count=len(old_tokens))
    old_cols = np.flatnonzero(found >= 0)
    new_cols = found[old_cols]
    shared = old_tokens[old_cols]
    in_old = np.zeros(len(new_tokens), dtype=bool)
    in_old[new_cols] = True
    added = _by_use(new_view, new_tokens, ~in_old)
    removed = _by_use(old_view, old_tokens, found < 0)
    comparisons: list[ComparisonChange] = []
    if normal_class is not None and len(shared):
        reviews = [review_vocabulary(m.view.with_normal_class(normal_class), lens="zscore") for m in (old, new)]
        scales = (_one_occurrence(old, old_cols), _one_occurrence(new, new_cols)) if per_occurrence else None
        for target in old_view.classes:
            if target == normal_class or target not in set(new_view.classes):
                continue
            comparisons.append(
                _comparison_change(old_view, new_view, str(target), normal_class, old_cols, new_cols, shared,
                                   *reviews, top, scales)
            )

    def share(view, cls):
        if cls not in set(view.classes):
            return None, None
        i = view.class_index(cls)
        return float(view.class_count[i] / view.class_count.sum()), float(view.prior[i])

    every = list(dict.fromkeys([*map(str, old_view.classes), *map(str, new_view.classes)]))
    priors = tuple(PriorChange(c, *(v for pair in zip(share(old_view, c), share(new_view, c)) for v in pair)) for c in every)
    return VocabularyChange(
        old_size=len(old_tokens), new_size=len(new_tokens), shared=len(shared),
        added=added, removed=removed, comparisons=tuple(comparisons), priors=priors,
    )


def _decide(model, texts, normal_class, threshold, threshold_log_odds=None) -> np.ndarray:
    view = model.view.with_normal_class(normal_class)
    rule = DecisionRule.for_view(view, threshold, threshold_log_odds)
    jll = view.joint_log_likelihood(view.prepare(model.featurizer.transform(texts)))
    return np.asarray(view.classes, dtype=object)[rule.decide(jll)].astype(str)


def _score(decided: np.ndarray, labels: np.ndarray, normal_class: str | None, confidence: float) -> ModelScore:
    right = decided == labels
    flagging = None
    if normal_class is not None:
        truth, flagged = labels != normal_class, decided != normal_class
        flagging = binary_metrics(
            "flagged",
            int(np.sum(truth & flagged)), int(np.sum(~truth & flagged)),
            int(np.sum(truth & ~flagged)), int(np.sum(~truth & ~flagged)), confidence,
        )
    return ModelScore(rate_of(int(right.sum()), len(right), confidence), flagging)


def decision_changes(old, new, messages, normal_class, threshold, show: int = DEFAULT_SHOW, confidence: float = 0.95,
                     threshold_log_odds: float | None = None, text_view: str | None = None):
    """Both models' decisions on ``messages`` (:class:`explain.model.data_io.Messages`).

    The threshold is a probability (``threshold``) or exact flag log-odds (``threshold_log_odds``).
    """
    from explain.analysis.ledger import ledger_of

    texts = list(messages.texts)
    old_decided = _decide(old, texts, normal_class, threshold, threshold_log_odds)
    new_decided = _decide(new, texts, normal_class, threshold, threshold_log_odds)
    moved = np.flatnonzero(old_decided != new_decided)
    counts = Counter(zip(old_decided[moved].tolist(), new_decided[moved].tolist()))
    changes = tuple((a, b, n) for (a, b), n in sorted(counts.items(), key=lambda kv: (-kv[1], kv[0])))
    labels = None if messages.labels is None else np.asarray(messages.labels, dtype=object).astype(str)
    ids = np.asarray(messages.ids, dtype=object).astype(str)

    def ledger(model, i):
        view_model = _with_normal(model, normal_class)
        return ledger_of(view_model, texts[i], threshold, threshold_log_odds=threshold_log_odds,
                         message_id=str(ids[i]), text_view=text_view)

    shown = tuple(
        ChangedMessage(
            int(i), str(ids[i]), None if labels is None else str(labels[i]),
            str(old_decided[i]), str(new_decided[i]), ledger(old, i), ledger(new, i),
        )
        for i in moved[:show]
        if texts[i].strip()
    )
    old_score = new_score = test = None
    if labels is not None:
        old_score = _score(old_decided, labels, normal_class, confidence)
        new_score = _score(new_decided, labels, normal_class, confidence)
        old_right, new_right = old_decided == labels, new_decided == labels
        test = mcnemar(int(np.sum(old_right & ~new_right)), int(np.sum(~old_right & new_right)))
    return DecisionChanges(
        source=str(messages.source), n=len(texts),
        old_decisions=frozen(old_decided), new_decisions=frozen(new_decided),
        changes=changes, shown=shown, old_score=old_score, new_score=new_score, mcnemar=test,
    )


def _with_normal(model, normal_class):
    from dataclasses import replace

    return replace(model, view=model.view.with_normal_class(normal_class))


def compare_models(old, new, messages=None, *, normal_class: str | None = None, threshold: float | None = None,
                   top: int = DEFAULT_TOP, show: int = DEFAULT_SHOW, confidence: float = 0.95,
                   threshold_log_odds: float | None = None, text_view: str | None = None) -> Comparison:
    """Compare two loaded models (:class:`explain.model.loading.LoadedModel`), optionally on messages.

    The threshold is a probability (``threshold``) or exact flag log-odds
    (``threshold_log_odds``); ``text_view`` names the view the messages were read in.
    """
    notes: list[str] = []
    normal = _normal_class(old, new, normal_class)
    check_threshold(threshold, threshold_log_odds)
    if threshold_log_odds is not None:
        threshold = None
    if (threshold is not None or threshold_log_odds is not None) and normal is None:
        raise NbledgerError("a threshold needs a normal class that both models have: name it with --normal-class")
    old_classes, new_classes = tuple(map(str, old.view.classes)), tuple(map(str, new.view.classes))
    same_file = old.sha256 == new.sha256
    if same_file:
        notes.append("the two model files are the same (equal SHA-256): nothing changes")
    elif getattr(old, "fingerprint", None) is not None and old.fingerprint == getattr(new, "fingerprint", None):
        notes.append("the two model files differ but decide alike (equal fingerprints): nothing changes")
    if set(old_classes) != set(new_classes):
        only_old = sorted(set(old_classes) - set(new_classes))
        only_new = sorted(set(new_classes) - set(old_classes))
        notes.append(
            "the models have different classes"
            + (f"; only the old has {', '.join(only_old)}" if only_old else "")
            + (f"; only the new has {', '.join(only_new)}" if only_new else "")
            + ": evidence is compared on the shared classes, decisions as they are"
        )
    if normal is None:
        notes.append("no normal class both models have: evidence shifts and flagging metrics are left out "
                     "(name one with --normal-class)")
    same_steps = _text_steps(old) == _text_steps(new)
    if not same_steps:
        notes.append("the models cut text into tokens differently: evidence is compared on the tokens both make, "
                     "decisions and metrics on the messages as each model reads them")
    if messages is not None and (old.featurizer.hashed or new.featurizer.hashed):
        # Hashed features store no vocabulary: name each column by the tokens of the data hashed into it.
        old, new = old.named_for(messages.texts), new.named_for(messages.texts)
        notes.append("hashed columns are named by the tokens of the data that hash into them; "
                     "columns no such token reaches keep their numbers")
    settings = settings_table(old, new)
    differs = {s.name for s in settings if s.differs}
    weights = PER_OCCURRENCE if differs & {"variant", "feature_kind"} else PER_UNIT
    if weights == PER_OCCURRENCE:
        notes.append("the weight scales differ (" + " and ".join(sorted(differs & {"variant", "feature_kind"}))
                     .replace("feature_kind", "features") + "): shared tokens are compared by their per-occurrence "
                     "log-odds against the normal class, the evidence one occurrence adds in a message of that "
                     "token alone")
    vocabulary = vocabulary_change(old, new, normal, top, per_occurrence=weights == PER_OCCURRENCE)
    decisions = None
    if messages is not None:
        decisions = decision_changes(old, new, messages, normal, threshold, show, confidence,
                                     threshold_log_odds, text_view)
        if messages.labels is not None:
            unknown = sorted(set(map(str, messages.labels)) - set(old_classes) - set(new_classes))
            if unknown:
                notes.append(f"labels no model knows ({', '.join(unknown)}) count as wrong for both")
    return Comparison(
        old_path=str(old.path), new_path=str(new.path), old_sha256=old.sha256, new_sha256=new.sha256,
        old_fingerprint=getattr(old, "fingerprint", None), new_fingerprint=getattr(new, "fingerprint", None),
        same_file=same_file, old_classes=old_classes, new_classes=new_classes, normal_class=normal,
        threshold=threshold if threshold_log_odds is None else float(flag_probability(threshold_log_odds)),
        threshold_log_odds=threshold_log_odds if threshold is None else _logit(threshold),
        same_text_steps=same_steps, vocabulary=vocabulary, decisions=decisions,
        notes=tuple(notes), settings=settings, weights_compared=weights,
    )


def _logit(threshold: float | None) -> float | None:
    return None if threshold is None else DecisionRule(2, 0, threshold).threshold_log_odds


def redacted_comparison(comparison: Comparison, ids=None, names: frozenset[str] = frozenset()) -> Comparison:
    """The same comparison with personal values masked in tokens and both ledgers of each message.

    Ids are kept as given; one holding an e-mail address becomes its keyed pseudonym
    (``ids``, an :class:`~explain.analysis.redaction.IdPseudonyms`; a random key when None).
    """
    from dataclasses import replace

    from explain.analysis.ledger import redacted
    from explain.analysis.redaction import IdPseudonyms, mask_value

    ids = ids if ids is not None else IdPseudonyms()

    def masked(token):
        return mask_value(token, names)

    def shifts(items):
        return tuple(replace(s, token=masked(s.token)) for s in items)

    vocab = comparison.vocabulary
    vocab = replace(
        vocab,
        added=tuple(map(masked, vocab.added)),
        removed=tuple(map(masked, vocab.removed)),
        comparisons=tuple(
            replace(c, shifts_up=shifts(c.shifts_up), shifts_down=shifts(c.shifts_down), ranks=shifts(c.ranks))
            for c in vocab.comparisons
        ),
    )
    decisions = comparison.decisions
    if decisions is not None:
        decisions = replace(decisions, shown=tuple(
            replace(m, message_id=ids(m.message_id), old=redacted(m.old), new=redacted(m.new))
            for m in decisions.shown
        ))
    return replace(comparison, vocabulary=vocab, decisions=decisions)
