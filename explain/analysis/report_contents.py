"""Everything the printable report shows, computed once: one frozen result for every presenter.

:func:`build_report` runs the library's own analyses (the vocabulary review,
the assessment on labelled data, the account of each explained message),
applies the redaction mode to their results, and returns a :class:`Report`.
The PDF, its HTML twin and its JSON twin (:mod:`explain.present.report_pages`,
:mod:`explain.present.report_json`) only read it.
"""

from __future__ import annotations

import datetime as _dt
from dataclasses import dataclass, replace

import numpy as np

from explain.analysis.assessment import Assessment, assess
from explain.analysis.batch import BatchEvidence, batch_evidence
from explain.analysis.ledger import Ledger, ledger_of, redacted
from explain.analysis.ranking import OperatingPoint, ThresholdFigures
from explain.analysis.rates import Projection, project_to_base_rate
from explain.analysis.redaction import MODES, IdPseudonyms, redact_assessment, redact_probe, withhold_text
from explain.analysis.risk import Watchlist
from explain.analysis.vocab import VocabReview, review_vocabulary
from explain.dates import record_moment
from explain.errors import NbledgerError
from explain.model.decision import DecisionRule, check_threshold

#: Messages explained when none are given: a spread of the flagged messages of the data.
DEFAULT_MAX_MESSAGES = 6
#: Tokens listed for and against each flagged class in the vocabulary section.
VOCAB_TOP = 15


@dataclass(frozen=True)
class ReportSettings:
    """What the reader chose: wording on the cover, redaction, paper and caps."""

    title: str = "Review of a naive Bayes message filter"
    organisation: str | None = None
    redact: str = "personal"
    paper: str = "a4"
    max_messages: int = DEFAULT_MAX_MESSAGES
    threshold: float | None = None
    #: the same threshold on the flag log-odds scale, exact (as ``assess`` prints it); at most one of the two
    threshold_log_odds: float | None = None
    #: the share of flagged-class messages in real traffic: the summary adds projected figures for it
    base_rate: float | None = None
    #: the organisation's secret for the pseudonyms of ids holding an e-mail address (``--id-key-file``), or None
    id_key: bytes | None = None
    #: ``(cost of a false alarm, cost of a missed message)``: adds the least-cost operating point
    costs: tuple[float, float] | None = None

    def __post_init__(self):
        if self.redact not in MODES:
            raise NbledgerError(f"--redact must be one of {', '.join(MODES)}, got {self.redact!r}")
        if self.paper not in ("a4", "letter"):
            raise NbledgerError(f"--paper must be a4 or letter, got {self.paper!r}")
        if self.max_messages < 1:
            raise NbledgerError(f"--max-messages must be at least 1, got {self.max_messages}")
        check_threshold(self.threshold, self.threshold_log_odds)
        if self.base_rate is not None and not 0.0 < self.base_rate < 1.0:
            raise NbledgerError(f"--base-rate must be a share between 0 and 1, got {self.base_rate}")


@dataclass(frozen=True)
class ClassFacts:
    """One class of the model: its training messages, their share, and the model's log prior."""

    name: str
    training_messages: float
    training_share: float
    log_prior: float


@dataclass(frozen=True)
class ModelFacts:
    """What identifies the model, for the cover: its file's SHA-256 and its fingerprint (what decides)."""

    file: str
    sha256: str
    variant: str
    feature_kind: str
    vocabulary_size: int
    normal_class: str | None
    classes: tuple[ClassFacts, ...]
    card_created: str | None
    training_data_sha256: str | None
    hashed: bool = False
    fingerprint: str | None = None


def model_facts(model) -> ModelFacts:
    view, card = model.view, model.card or {}
    counts = np.asarray(view.class_count, dtype=float)
    shares = counts / counts.sum() if counts.sum() > 0 else np.full(len(counts), np.nan)
    return ModelFacts(
        file=model.path.name,
        sha256=model.sha256,
        variant=view.variant,
        feature_kind=view.feature_kind,
        vocabulary_size=int(view.n_features),
        normal_class=view.normal_class,
        classes=tuple(
            ClassFacts(str(c), float(n), float(s), float(p)) for c, n, s, p in zip(view.classes, counts, shares, view.prior)
        ),
        card_created=card.get("created"),
        training_data_sha256=(card.get("data") or {}).get("sha256"),
        hashed=bool(model.featurizer.hashed),
        fingerprint=model.fingerprint,
    )


@dataclass(frozen=True)
class PerTenThousand:
    """A rate stated per 10,000 messages, with its Wilson interval (``low``, ``high``) and raw counts."""

    value: float
    low: float
    high: float
    numerator: int
    denominator: int


@dataclass(frozen=True)
class Headline:
    """The summary's two figures at the decision in use, from the flagged-versus-normal table.

    ``false_alarms``: normal messages flagged per 10,000 normal messages (the
    false-positive rate); ``missed``: messages of the flagged classes let
    through per 10,000 of them (one minus recall, its interval mirrored).
    ``base_rate``: the measured share of flagged-class messages in the data;
    ``projection``: with a ``--base-rate``, the figures per 10,000 messages of
    traffic with that share, by Bayes' rule from the measured recall and
    false-alarm rate (:func:`explain.analysis.rates.project_to_base_rate`), else None.
    """

    false_alarms: PerTenThousand
    missed: PerTenThousand
    base_rate: float
    projection: Projection | None
    recommendation: Recommendation | None = None


@dataclass(frozen=True)
class Recommendation:
    """Which listed operating point to consider instead of the rule in use.

    ``better``: the listed operating point that beats the rule in use on both
    rates (no more false alarms and no more missed messages on the data, and
    fewer of one), the one with the fewest errors if several do; None when
    none does. ``least_cost``: the least-cost operating point when costs were
    given, else None. ``in_use``: the rule in use's figures, for the comparison.
    """

    in_use: ThresholdFigures
    better: OperatingPoint | None
    least_cost: OperatingPoint | None


def recommend(assessment: Assessment) -> Recommendation | None:
    """The operating point that beats the rule in use on both rates, and the least-cost one (see :class:`Recommendation`)."""
    points = [p for p in assessment.operating_points if p.figures is not None]
    in_use = next((p.figures for p in points if p.kind == "in use"), None)
    if in_use is None:
        return None
    beats = [
        p for p in points
        if p.kind != "in use" and p.figures.fp <= in_use.fp and p.figures.fn <= in_use.fn
        and (p.figures.fp, p.figures.fn) != (in_use.fp, in_use.fn)
    ]
    better = min(beats, key=lambda p: (p.figures.fp + p.figures.fn, p.figures.fp), default=None)
    least = next((p for p in points if p.kind == "least cost"), None)
    return Recommendation(in_use, better, least)


def headline(assessment: Assessment | None, base_rate: float | None = None) -> Headline | None:
    if assessment is None or assessment.flag_metrics is None:
        return None
    m = assessment.flag_metrics
    fpr, recall = m.false_alarm_rate, m.recall
    scale = 10_000
    return Headline(
        false_alarms=PerTenThousand(scale * fpr.value, scale * fpr.low, scale * fpr.high, fpr.numerator, fpr.denominator),
        missed=PerTenThousand(
            scale * (1 - recall.value), scale * (1 - recall.high), scale * (1 - recall.low),
            recall.denominator - recall.numerator, recall.denominator,
        ),
        base_rate=float(recall.denominator / (fpr.denominator + recall.denominator)),
        projection=None if base_rate is None else project_to_base_rate(recall, fpr, base_rate),
        recommendation=recommend(assessment),
    )


@dataclass(frozen=True, eq=False)
class Report:
    """The inputs' fingerprints and every analysis of the report.

    ``assessment`` is None without labelled data; ``explained_source`` says
    where the explained messages came from (``"file"``: ``--explain``;
    ``"sample"``: flagged messages of the labelled data; None: neither);
    ``explained`` holds their ledgers, redacted as the settings say.
    ``date`` is ``SOURCE_DATE_EPOCH`` when set (reproducible builds), else now (UTC).
    """

    settings: ReportSettings
    date: _dt.datetime
    model: object  # LoadedModel
    facts: ModelFacts
    data: object | None  # Messages
    explain_source: object | None  # Messages of --explain
    watchlist: Watchlist | None
    vocab: VocabReview
    assessment: Assessment | None
    headline: Headline | None
    explained: tuple[Ledger, ...]
    explained_source: str | None
    explained_total: int
    versions: dict
    #: robustness and fairness probe (``report --probe`` / ``--swap-terms``), else None
    probe: object | None = None
    #: appeals decided at the review desk (``report --reviews``): :class:`explain.analysis.appeals.Appeals`, else None
    appeals: object | None = None
    #: the text view the messages were read in (``raw``: as given), None when not said
    text_view: str | None = None


def report_date() -> _dt.datetime:
    """The report's date (:func:`explain.dates.record_moment`: ``SOURCE_DATE_EPOCH`` when set, else now, UTC)."""
    return record_moment()


def versions() -> dict:
    """Versions of the tool and of the libraries every figure depends on."""
    import jinja2
    import matplotlib
    import weasyprint

    from explain.model.training import library_versions

    return {**library_versions(), "matplotlib": matplotlib.__version__, "jinja2": jinja2.__version__,
            "weasyprint": weasyprint.__version__}


def flagged_sample(scored: BatchEvidence, n: int) -> np.ndarray:
    """Rows of ``n`` flagged messages spread evenly over the flagged ones ranked by score (strongest first).

    ``scored`` is the :func:`~explain.analysis.batch.batch_evidence` of the
    messages under the report's rule. The spread shows clear cases and cases
    near the decision line alike.
    """
    normal = scored.normal_index
    flagged = np.flatnonzero(scored.decision != normal) if normal is not None else np.arange(len(scored))
    score = scored.flag_log_odds if scored.flag_log_odds is not None else scored.log_odds
    ranked = flagged[np.argsort(-score[flagged], kind="stable")]
    if len(ranked) <= n:
        return ranked
    return ranked[np.unique(np.linspace(0, len(ranked) - 1, n).round().astype(int))]


def _names_at_hand(redact: str, data, explain) -> dict[str, str]:
    """Names and one-word values found in the report's own messages: personal wherever they show up as tokens."""
    if redact == "none":
        return {}
    from explain.analysis.personal_data import personal_words_in

    return personal_words_in([*(data.texts if data is not None else ()), *(explain.texts if explain is not None else ())])


def _redacted_ledger(ledger: Ledger, mode: str, ids: IdPseudonyms) -> Ledger:
    if mode == "none":
        return ledger
    masked = redacted(ledger)
    masked = withhold_text(masked) if mode == "bodies" else masked
    return replace(masked, message_id=ids(ledger.message_id))


def build_report(
    model,
    *,
    settings: ReportSettings = ReportSettings(),
    data=None,
    explain=None,
    watchlist: Watchlist | None = None,
    on_step=lambda name: None,
    slices=(),
    label_errors=None,
    probe_evasion: bool = False,
    swap_terms=None,
    reviews=None,
    features=None,
    text_view: str | None = None,
) -> Report:
    """Compute everything the report shows.

    Parameters
    ----------
    model : a :class:`~explain.model.loading.LoadedModel`.
    settings : :class:`ReportSettings`.
    data : labelled :class:`~explain.model.data_io.Messages` for the assessment, or None.
    explain : :class:`~explain.model.data_io.Messages` to explain, or None (then a
        sample of flagged messages of ``data``).
    watchlist : terms the vocabulary review reports whatever their evidence.
    slices, label_errors : the assessment's audit inputs, as
        :func:`explain.analysis.assessment.assess` takes them (slice groups;
        :class:`~explain.analysis.label_errors.LabelErrors` or None).
    on_step : called with the name of each step as it starts (progress display).
    probe_evasion, swap_terms : add the robustness and fairness probe
        (:func:`explain.analysis.probe.probe`): evasion costs over ``data``,
        term swaps from a swap-terms file.
    reviews : ``(review rows, source)`` of the review desk's database (``--reviews``), or None: adds the
        appeal rate of this model (:func:`explain.analysis.appeals.appeals_of`).
    features : ``model.featurizer.counts_and_features(data.texts)`` when the
        caller has them: ``data`` is then featurized once for every section.
    text_view : the text view the messages were read in (the cover and each ledger say it).
    """
    date = report_date()
    redact = settings.redact
    pseudonyms = IdPseudonyms(settings.id_key)
    on_step("reviewing the vocabulary")
    # Hashed features store no vocabulary: name each column by the tokens of the report's texts hashed into it.
    model = model.named_for([*(data.texts if data is not None else ()), *(explain.texts if explain is not None else ())])
    names = _names_at_hand(redact, data, explain)  # masked wherever they show up as tokens
    vocab = review_vocabulary(model.view, top=VOCAB_TOP, watchlist=watchlist, redact_personal=redact != "none",
                              names=names)
    rule = DecisionRule.for_view(model.view, settings.threshold, settings.threshold_log_odds)
    assessment = scored = None
    if data is not None:
        on_step(f"assessing on {len(data):,} labelled messages")
        counts, X = model.featurizer.counts_and_features(data.texts) if features is None else features
        scored = batch_evidence(model.view, X, rule, top_k=0)
        assessment = redact_assessment(
            assess(model.view, X, data.labels, threshold=settings.threshold,
                   threshold_log_odds=settings.threshold_log_odds, base_rate=settings.base_rate, ids=data.ids,
                   slices=list(slices), label_errors=label_errors, costs=settings.costs,
                   evidence=scored),
            redact, pseudonyms, names,
        )
    on_step("explaining messages")
    source, explained, total = _explained(model, settings, data, explain, scored, watchlist, text_view, pseudonyms)
    probe_result = None
    if probe_evasion or swap_terms is not None:
        on_step("probing robustness and fairness")
        probe_result = _probe(model, settings, data, None if data is None else counts, probe_evasion, swap_terms)
    appeals = None
    if reviews is not None:
        from explain.analysis.appeals import appeals_of

        appeals = appeals_of(reviews[0], model.sha256, reviews[1])
    return Report(
        appeals=appeals,
        probe=probe_result if redact == "none" else redact_probe(probe_result, names),
        settings=settings,
        date=date,
        model=model,
        facts=model_facts(model),
        data=data,
        explain_source=explain,
        watchlist=watchlist,
        vocab=vocab,
        assessment=assessment,
        headline=headline(assessment, settings.base_rate),
        explained=explained,
        explained_source=source,
        explained_total=total,
        versions=versions(),
        text_view=text_view,
    )


def _probe(model, settings: ReportSettings, data, counts, probe_evasion: bool, swap_terms):
    """The robustness and fairness probe, only when asked, under the report's rule."""
    from explain.analysis.probe import probe

    if probe_evasion and data is None:
        raise NbledgerError("--probe measures evasion over --data: give --data")
    return probe(
        model, None if data is None else data.texts, evasion=probe_evasion, swap_terms=swap_terms,
        threshold=settings.threshold, threshold_log_odds=settings.threshold_log_odds, counts=counts,
    )


def _explained(model, settings: ReportSettings, data, explain, scored, watchlist, text_view, pseudonyms):
    """``(source, ledgers, total)`` of the explained messages: ``--explain``'s, else a sample of flagged ones."""
    if explain is not None:
        source, texts, ids = "file", explain.texts, explain.ids
        rows = np.arange(len(texts))
    elif data is not None:
        source, texts, ids = "sample", data.texts, data.ids
        rows = flagged_sample(scored, settings.max_messages)
    else:
        source, texts, ids, rows = None, [], [], np.arange(0)
    total = len(texts) if source == "file" else len(rows)
    explained = tuple(
        _redacted_ledger(
            ledger_of(model, texts[i], settings.threshold, threshold_log_odds=settings.threshold_log_odds,
                      message_id=str(ids[i]), watchlist=watchlist, text_view=text_view),
            settings.redact, pseudonyms,
        )
        for i in rows[: settings.max_messages]
        if texts[i].strip()
    )
    return source, explained, total
