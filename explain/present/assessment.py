"""Presenting an :class:`~explain.analysis.assessment.Assessment`: terminal and JSON.

Nothing here computes a figure; everything printed is read from the result.

JSON (``nbledger assess --format json``), schema version 1: an object with

==================  ============================================================
key                 meaning
==================  ============================================================
``schema``          ``"nbledger.assess/1"``
``model``           ``{path, sha256}`` of the model file, or null
``data``            ``{path, sha256}`` of the data file, or null
``assessment``      the result, field for field as the dataclasses in
                    :mod:`explain.analysis.assessment` name them: nested objects for
                    nested results, lists for tuples and arrays (matrices as
                    lists of rows)
==================  ============================================================

Numbers that are not finite become ``null``: an undefined proportion (0/0),
and the threshold +inf that starts each ROC curve (nothing flagged). Every
proportion is ``{value, low, high, numerator, denominator}`` with the Wilson
interval at ``assessment.confidence``. Log-odds are natural logarithms, and
every float is written with all its digits (Python's ``repr``): a
``threshold_log_odds`` typed back with ``--threshold-log-odds`` flags exactly
the messages its row counts.

The terminal output uses the glossary's words (``docs/glossary.md``) and its
one interval style, ``93.7 % (90.6 to 95.8)``: the estimate, then the
interval in the estimate's unit, the level said once in the heading. A number
or an interval is never split across lines: a table too wide for the terminal
is printed stacked, one block per row.
"""

from __future__ import annotations

import math
import re
import textwrap

import numpy as np
from rich.cells import cell_len
from rich.console import Console
from rich.table import Table
from rich.text import Text

from explain.analysis.assessment import Assessment
from explain.analysis.error_review import ReviewedMessage
from explain.analysis.ranking import OperatingPoint
from explain.analysis.rates import Estimate, Rate
from explain.present import numbers
from explain.present.json_values import strict
from explain.present.numbers import p_value, per_10000_text
from explain.present.token_display import shown
from explain.present.wording import probability

SCHEMA = "nbledger.assess/1"


def to_json(result: Assessment, model=None, data=None) -> dict:
    """The documented JSON object of one assessment."""
    return {
        "schema": SCHEMA,
        "model": None if model is None else {
            "path": str(model.path), "sha256": model.sha256, "fingerprint": getattr(model, "fingerprint", None),
        },
        "data": None if data is None else {"path": str(data.source), "sha256": data.sha256},
        "assessment": strict(result),
    }


# --- number formats ---------------------------------------------------------------


# Every format is :mod:`explain.present.numbers`'s (one module for every screen and page).


def _pct(x: float) -> str:
    return numbers.percent(x)


def _interval(value: float, low: float, high: float, n: int) -> str:
    """A share as ``93.7 % (90.6 to 95.8)``: the one interval style of every screen."""
    return numbers.interval(value, low, high, n)


def _rate(r: Rate) -> str:
    return numbers.rate(r)


def _count_interval(e: Estimate) -> str:
    """A projected count per 10,000 as ``12 (9.8 to 16)``: rounded to what its interval supports."""
    if not math.isfinite(e.value):
        return numbers.MISSING
    return per_10000_text(e.value, e.low, e.high)


def _share_interval(e: Estimate) -> str:
    return _interval(e.value, e.low, e.high, 1 if math.isfinite(e.value) else 0)


def prob(p: float) -> str:
    """A probability readable near 0 and 1, where naive Bayes puts most of them (never rounded to certainty)."""
    if not math.isfinite(p):
        return numbers.MISSING
    return probability(p, (1.0 - p) if p < 1 else None)


def _num(x: float, digits: int = 3) -> str:
    return numbers.decimal(x, digits)


def _exact(x: float) -> str:
    """A log-odds threshold with every digit, as typed back to ``--threshold-log-odds``."""
    return numbers.exact(x)


def _level(result: Assessment) -> str:
    return numbers.level(result.confidence)


# --- tables that fit ------------------------------------------------------------------


def _plain_text(cell) -> str:
    return cell.plain if isinstance(cell, Text) else str(cell)


def _widest_line(text: str) -> int:
    return max(cell_len(line) for line in text.split("\n"))


def _widest_word(text: str) -> int:
    return max((cell_len(w) for w in text.split()), default=0)


# what prose never breaks: an interval, a percentage, "1 - 3.2e-10", a token with its evidence
_FIGURE = re.compile(r"[-+]?[\d.]+(?: %)? \([-+\d.]+ to [-+\d.]+\)|[-+]?[\d.]+ %|1 - [\d.e+-]+|[^\s,]+ [-+]\d+\.\d+")
_NBSP = "\u00a0"


def _say(console: Console, text: str, style: str | None = None) -> None:
    """Print prose wrapped to the console between words, never inside a figure or an interval."""
    # textwrap breaks only at ASCII whitespace: no-break spaces hold each figure together
    glued = _FIGURE.sub(lambda m: m.group(0).replace(" ", _NBSP), text)
    indent = " " * (len(text) - len(text.lstrip(" ")) + 2)
    lines = textwrap.wrap(glued, width=console.width, break_long_words=False, break_on_hyphens=False,
                          subsequent_indent=indent if indent.strip(" ") == "" and len(indent) > 2 else "")
    for line in lines:
        console.print(Text(line.replace(_NBSP, " "), style=style or ""), soft_wrap=True)


def _emit(console: Console, title: str | None, columns, rows, *, right_from: int = 1, wrap=(), left=()) -> None:
    """Print a table whose numbers never break; stacked when it cannot fit.

    Columns from ``right_from`` on hold figures (right-aligned); only the
    columns named in ``wrap`` (sentences) may wrap, between words; those in
    ``left`` are left-aligned whatever their place. A
    heading may carry line breaks (``"average\\nprecision"``) to stay narrow.
    When even that does not fit the console, each row is printed as a block:
    its first cell, then ``column: value`` lines.
    """
    wrapping = [name in wrap for name in columns]
    need = 1
    for i, name in enumerate(columns):
        cells = [_plain_text(r[i]) for r in rows] if rows else [""]
        width = max(_widest_word(c) if wrapping[i] else _widest_line(c) for c in cells)
        # a column that does not wrap does not wrap its heading either, except at the breaks it carries
        heading = _widest_word(name) if wrapping[i] else _widest_line(name)
        need += max(width, heading) + 3
    if title:
        _say(console, title, "bold")
    if need <= console.width:
        table = Table(header_style="bold")
        for i, name in enumerate(columns):
            table.add_column(
                name,
                justify="right" if i >= right_from and name not in wrap and name not in left else "left",
                no_wrap=not wrapping[i],
            )
        for r in rows:
            table.add_row(*r)
        console.print(table)
        return
    for r in rows:
        _say(console, f"  {_plain_text(r[0])}", "bold")
        for name, cell in zip(columns[1:], r[1:]):
            _say(console, f"    {name.replace(chr(10), ' ')}: {_plain_text(cell).replace(chr(10), ', ')}")


# --- sections -------------------------------------------------------------------------


def _base_rates(result: Assessment, console: Console) -> None:
    b = result.base_rates
    rows = [[Text(name), _count(count), _rate(share)] for name, count, share in zip(b.classes, b.counts, b.shares)]
    if b.flagged is not None:
        rows.append([Text("any flagged class", style="bold"), _count(b.flagged.numerator), _rate(b.flagged)])
    _emit(console, f"base rates ({b.n_messages:,} messages)", ["class", "messages", f"base rate ({_level(result)} Wilson interval)"], rows)


def _count(n) -> str:
    """A count with thousands separators, as every count on nbledger's screens."""
    return f"{int(n):,}"


def _confusion(matrix, title: str, console: Console) -> None:
    rows = [
        [Text(name), *(f"{_count(matrix.counts[i, j])} ({_pct(matrix.row_rates[i, j])})" for j in range(len(matrix.labels))),
         _count(matrix.counts[i].sum())]
        for i, name in enumerate(matrix.labels)
    ]
    _emit(console, title, ["true \\ decided", *matrix.labels, "total"], rows)


METRICS = (
    (("precision", "precision"), ("recall", "recall")),
    (("specificity", "specificity"), ("false-alarm rate", "false_alarm_rate")),
    (("F1", "f1"), ("accuracy", "accuracy")),
)


def _metrics(result: Assessment, console: Console) -> None:
    shown_metrics = ([result.flag_metrics] if result.flag_metrics is not None else []) + list(result.class_metrics)
    for i, pair in enumerate(METRICS):
        rows = [[Text(m.positive), *(_rate(getattr(m, field)) for _, field in pair)] for m in shown_metrics]
        title = f"rates at the decision in use, with {_level(result)} Wilson intervals" if i == 0 else None
        _emit(console, title, ["positive class", *(label for label, _ in pair)], rows)
    _say(console, f"overall accuracy: {_rate(result.accuracy)} (on imbalanced traffic, read the rates above instead)")


def _ranking(result: Assessment, console: Console) -> None:
    rankings = [r for r in (result.flag_ranking, *result.class_ranking) if r is not None]
    if not rankings:
        return
    rows = []
    for r in rankings:
        interval = (
            f"{r.auc.auc:.4f}" if not math.isfinite(r.auc.variance)
            else f"{r.auc.auc:.4f} ({r.auc.low:.4f} to {r.auc.high:.4f})"
        )
        rows.append([Text(r.positive), _count(r.n_positive), _count(r.n_negative), interval, f"{r.average_precision:.4f}"])
    _emit(
        console,
        f"ranking quality (AUC with {_level(result)} DeLong interval)",
        ["positive", "positives", "negatives", "AUC", "average\nprecision"],
        rows,
    )


def point_label(p: OperatingPoint) -> str:
    """How an operating point was chosen, in a few words (also the pictures' label)."""
    if p.kind == "fpr":
        return f"false alarms <= {100 * p.target:g} %"
    if p.kind == "recall":
        return f"recall >= {100 * p.target:g} %"
    return p.kind


def _operating_points(result: Assessment, console: Console) -> None:
    if not result.operating_points:
        return
    rows, expected, projected, exact = [], [], [], []
    for p in result.operating_points:
        f = p.figures
        if f is None:
            rows.append([Text(point_label(p)), Text(f"not met: {p.note}", style="italic"), "", "", "", ""])
            continue
        rows.append([Text(point_label(p)), _num(f.threshold_log_odds), prob(f.threshold_probability),
                     _pct(f.precision.value), _pct(f.recall.value), _pct(f.false_alarm_rate.value)])
        fa, rc = f.false_alarm_rate, f.recall
        row = [Text(point_label(p)),
               per_10000_text(*(10_000 * x for x in (fa.value, fa.low, fa.high))) if fa.denominator else numbers.MISSING,
               per_10000_text(*(10_000 * (1 - x) for x in (rc.value, rc.high, rc.low))) if rc.denominator else numbers.MISSING]
        if result.costs is not None:
            row.append(_num(f.expected_cost, 4))
        expected.append(row)
        if f.projection is not None:
            pr = f.projection
            projected.append([Text(point_label(p)), _share_interval(pr.precision),
                              _count_interval(pr.false_alarms_per_10k), _count_interval(pr.missed_per_10k)])
        if math.isfinite(f.threshold_log_odds):
            exact.append(f"  {point_label(p)}: --threshold-log-odds {_exact(f.threshold_log_odds)}")
    _emit(console, "operating points",
          ["chosen by", "log-odds >=", "P(flag)\n>=", "precision", "recall", "false-alarm\nrate"], rows,
          wrap=("log-odds >=",))
    _say(console, 
        "a message is flagged when its flag log-odds (every flagged class together against the normal class) is "
        "at least the threshold log-odds; the JSON output carries an interval for every rate. Thresholds chosen by target on "
        "this data look better here than they will on new traffic: confirm them on messages not used to choose them"
    )
    if exact:
        console.print("each threshold exactly, to reproduce its row:")
        for line in exact:
            console.print(line, soft_wrap=True)
    normal = result.normal_class
    columns = ["chosen by", f"false alarms per 10,000\n{normal} messages", "missed per 10,000\nflagged-class messages"]
    columns += [] if result.costs is None else ["expected\ncost"]
    _emit(console, f"per 10,000 of each population (measured; {_level(result)} Wilson intervals, rounded to what "
                   "they support)", columns, expected)
    if projected:
        _emit(
            console,
            f"per 10,000 messages of traffic at a base rate of {100 * result.base_rate:g} % (a projection: Bayes' rule "
            f"on the measured recall and false-alarm rate; {_level(result)} Wilson ends carried through)",
            ["chosen by", "precision", "false alarms", "missed"],
            projected,
        )
        _say(console, 
            f"projection intervals put the ends of the {_level(result)} Wilson intervals of recall and "
            "false-alarm rate through Bayes' rule; precision uses both, so its level is at least "
            f"{100 * (2 * result.confidence - 1):g} %. It assumes the measured rates hold in that traffic"
        )
    if result.costs is not None:
        _say(console, 
            f"costs: a false alarm {result.costs[0]:g}, a missed message {result.costs[1]:g}; "
            "'cost if calibrated' is the threshold that would cost least if the probabilities could be taken at face value"
        )


def _calibration(result: Assessment, console: Console) -> None:
    cal = result.calibration
    if cal is None:
        return
    console.print(
        Text.assemble(
            ("calibration", "bold"),
            f": Brier score {cal.brier_score:.4f}, expected calibration error {cal.expected_calibration_error:.4f}, "
            f"maximum calibration error {cal.maximum_calibration_error:.4f} ({cal.n_bins} bins of equal count)",
        )
    )
    over = [str(b + 1) for b in np.flatnonzero(cal.overconfident)]
    _say(console, f"overconfident bins (mean P(flag) beyond the observed share's interval, away from 1/2): "
                  f"{', '.join(over) if over else 'none'}")
    rows = [
        [str(b + 1), _count(cal.counts[b]), _num(cal.log_odds_low[b], 2), _num(cal.log_odds_high[b], 2),
         prob(cal.mean_predicted[b]),
         _interval(cal.observed[b], cal.observed_low[b], cal.observed_high[b], cal.counts[b]),
         "yes" if cal.overconfident[b] else ""]
        for b in range(cal.n_bins)
    ]
    _emit(console, f"reliability ({_level(result)} Wilson intervals)", ["bin", "messages", "log-odds\nfrom", "to", "mean\nP(flag)", "observed share\nflagged-class", "overconfident"], rows)
    s = result.scores
    rows = [[Text(name), *(_num(v, 2) for v in s.quantiles[c])] for c, name in enumerate(s.classes)]
    _emit(console, "flag log-odds by true class (quantiles)", ["class", *(f"{100 * q:g} %" for q in s.quantile_levels)], rows)


def _tokens(pushes) -> str:
    """One token and its evidence a line, so that no pair is ever parted."""
    return "\n".join(f"{shown(p.token)} {p.evidence:+.2f}" for p in pushes) or "-"


def _messages(title: str, rows: tuple[ReviewedMessage, ...], total: int | None, console: Console) -> None:
    heading = title if total is None else f"{title}: {total}" + (f" (showing {len(rows)})" if len(rows) < total else "")
    cells = [
        [Text(m.id + ("\nlabel may be wrong" if m.label_may_be_wrong else "")), Text(m.true_class),
         Text(m.decided_class), prob(m.flag_probability), f"{m.margin:+.2f}",
         Text(_tokens(m.toward_flag)), Text(_tokens(m.toward_normal))]
        for m in rows
    ]
    _emit(console, heading, ["id", "true\nclass", "decided\nclass", "P(flag)", "margin", "toward flagged", "toward normal"], cells,
          right_from=3, left=("toward flagged", "toward normal"))


def _drivers(title: str, drivers, console: Console) -> None:
    if not drivers:
        return
    rows = [[Text(d.token), f"{d.evidence:.2f}", _count(d.pushed), _count(d.tipped)] for d in drivers]
    _emit(console, f"{title}; evidence summed over the errors", ["token", "evidence", "pushed", "tipped"], rows)


def _errors(result: Assessment, console: Console) -> None:
    e = result.errors
    if e is None:
        return
    _messages("false alarms (normal messages flagged), most confident first", e.false_alarms, e.n_false_alarms, console)
    _messages("missed (flagged-class messages let through), most confident first", e.missed, e.n_missed, console)
    _messages("borderline messages (closest to the threshold)", e.borderline, None, console)
    _drivers("what drives false alarms (tokens pushing normal messages toward flagged)", e.false_alarm_drivers, console)
    _drivers("what drives missed messages (tokens pushing them toward normal)", e.missed_drivers, console)
    _say(
        console,
        f"margin: distance to the decision boundary in log-odds, on the {e.margin_scale} scale; P(flag): every "
        "flagged class together; evidence compares the strongest flagged class with the normal class; "
        "'tipped': the token's evidence alone exceeded the margin",
    )


def _slices(result: Assessment, console: Console) -> None:
    rep = result.slices
    if rep is None:
        return
    rows = [
        [Text(f"{s.group}: {s.name}"), _count(s.n_messages), _rate(s.false_alarm_rate),
         p_value(s.false_alarm_test.adjusted_p_value), _rate(s.miss_rate), p_value(s.miss_test.adjusted_p_value)]
        for s in rep.slices
    ]
    _emit(console, f"slices ({_level(result)} Wilson intervals; miss rate: missed among flagged-class messages)",
          ["slice", "messages", "false-alarm\nrate", "adjusted\np-value", "miss rate", "adjusted\np-value"], rows)
    _say(console, f"all messages: false-alarm rate {_rate(rep.overall_false_alarm_rate)}, miss rate "
                  f"{_rate(rep.overall_miss_rate)}. Test: {rep.test} ({rep.n_tests} tests).")
    if rep.differing:
        _say(console, f"slices where a rate differs from the rest's (adjusted p < {rep.alpha:g}):", "bold")
    else:
        _say(console, f"no slice's false-alarm rate or miss rate differs from the rest's at adjusted p < "
                      f"{rep.alpha:g}; the closest:")
    for s in rep.differing or rep.most_different:
        _say(console, f"  {s.group}: {s.name}: {s.verdict}")
        for label, t in (("false-alarm rate", s.false_alarm_test), ("miss rate", s.miss_test)):
            if t.outcome != "untested":
                _say(console, f"    {label} {_rate(t.rate)} against {_rate(t.rest)} for the rest "
                              f"(p {t.p_value:.2g}, adjusted {t.adjusted_p_value:.2g})")


def _label_errors(result: Assessment, console: Console) -> None:
    le = result.label_errors
    if le is None:
        return
    rows = [
        [Text(s.id), Text(s.label), Text(s.favoured_class), prob(s.label_probability), f"{s.log_odds:+.2f}",
         Text(_tokens(s.toward_favoured))]
        for s in le.suspected
    ]
    _emit(console, f"suspected label errors: {len(le.suspected)} of {le.n_messages} messages",
          ["id", "true\nclass", "favoured", "P(label)", "log-odds", "toward favoured"], rows, right_from=3,
          left=("toward favoured",))
    _say(console, 
        f"found by {le.method} on out-of-sample probabilities from {le.folds} refits of the model's own pipeline "
        "(stratified folds); P(label) and log-odds (favoured class against the label) are out-of-sample; the "
        "label may be right and the filter wrong: look again before relabelling"
    )


def render(result: Assessment, console: Console) -> None:
    """Print the assessment for a person at a terminal, base rates first."""
    head = Text()
    head.append("decision: ", style="bold")
    head.append(result.decision)
    head.append(f"   normal class: {result.normal_class or '(none)'}")
    console.print(head)
    _base_rates(result, console)
    _confusion(result.confusion, "confusion matrix (counts and row rates)", console)
    if result.flag_confusion is not None:
        _confusion(result.flag_confusion, "flagged versus normal", console)
    _metrics(result, console)
    _ranking(result, console)
    _operating_points(result, console)
    _calibration(result, console)
    _slices(result, console)
    _errors(result, console)
    _label_errors(result, console)
    _say(console, 
        "error rates are estimates from this data; the figures describe the model, not the truth about any "
        "message; messages are personal data; decisions stay with trained staff"
    )
    for note in result.notes:
        _say(console, f"note: {note}", "italic")
