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
interval at ``assessment.confidence``. Log-odds are natural logarithms.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
from rich.console import Console
from rich.table import Table
from rich.text import Text

from explain.analysis.assessment import Assessment, OperatingPoint, Rate, ReviewedMessage
from explain.present.token_display import shown

SCHEMA = "nbledger.assess/1"


def _plain(obj):
    if dataclasses.is_dataclass(obj):
        return {f.name: _plain(getattr(obj, f.name)) for f in dataclasses.fields(obj)}
    if isinstance(obj, np.ndarray):
        return _plain(obj.tolist())
    if isinstance(obj, (list, tuple)):
        return [_plain(v) for v in obj]
    if isinstance(obj, (bool, np.bool_)):
        return bool(obj)
    if isinstance(obj, (int, np.integer)):
        return int(obj)
    if isinstance(obj, (float, np.floating)):
        return float(obj) if math.isfinite(obj) else None
    return obj


def to_json(result: Assessment, model=None, data=None) -> dict:
    """The documented JSON object of one assessment."""
    return {
        "schema": SCHEMA,
        "model": None if model is None else {"path": str(model.path), "sha256": model.sha256},
        "data": None if data is None else {"path": str(data.source), "sha256": data.sha256},
        "assessment": _plain(result),
    }


# --- number formats ---------------------------------------------------------------


def _pct(x: float) -> str:
    return "-" if not math.isfinite(x) else f"{100 * x:.2f} %"


def _interval(value: float, low: float, high: float, n: int) -> str:
    if n == 0:
        return "undefined (0/0)"
    return f"{_pct(value)} [{100 * low:.2f}-{100 * high:.2f}]"


def _rate(r: Rate) -> str:
    return _interval(r.value, r.low, r.high, r.denominator)


def _prob(p: float) -> str:
    """A probability readable near 0 and 1, where naive Bayes puts most of them."""
    if not math.isfinite(p):
        return "-"
    if p >= 0.9995:
        return "1 - " + (f"{1 - p:.2g}" if p < 1 else "<1e-16")
    if p <= 0.0005:
        return f"{p:.2g}"
    return f"{p:.4f}"


def _num(x: float, digits: int = 3) -> str:
    return "-" if x is None or not math.isfinite(x) else f"{x:.{digits}f}"


def _table(title: str, *columns: str, right_from: int = 1) -> Table:
    table = Table(title=title, title_justify="left", title_style="bold", header_style="bold")
    for i, name in enumerate(columns):
        # fold rather than cut: a truncated figure is a wrong figure
        table.add_column(name, justify="right" if i >= right_from else "left", overflow="fold")
    return table


# --- sections -------------------------------------------------------------------------


def _base_rates(result: Assessment, console: Console) -> None:
    b = result.base_rates
    table = _table(f"base rates ({b.n_messages} messages)", "class", "messages", f"share  [{_level(result)} interval]")
    for name, count, share in zip(b.classes, b.counts, b.shares):
        table.add_row(Text(name), str(count), _rate(share))
    if b.flagged is not None:
        table.add_row(Text(f"not {result.normal_class}", style="bold"), str(b.flagged.numerator), _rate(b.flagged))
    console.print(table)


def _level(result: Assessment) -> str:
    return f"{100 * result.confidence:g} %"


def _confusion(matrix, title: str, console: Console) -> None:
    table = _table(title, "true \\ decided", *matrix.labels, "total")
    for i, name in enumerate(matrix.labels):
        cells = [
            f"{matrix.counts[i, j]}  ({_pct(matrix.row_rates[i, j])})" for j in range(len(matrix.labels))
        ]
        table.add_row(Text(name), *cells, str(matrix.counts[i].sum()))
    console.print(table)


METRICS = (
    ("precision", "precision"),
    ("recall (sensitivity)", "recall"),
    ("specificity", "specificity"),
    ("false-positive rate", "false_positive_rate"),
    ("F1", "f1"),
    ("accuracy", "accuracy"),
)


def _metrics(result: Assessment, console: Console) -> None:
    shown = ([result.flag_metrics] if result.flag_metrics is not None else []) + list(result.class_metrics)
    table = _table(
        f"metrics at the decision in use, with {_level(result)} Wilson intervals",
        "positive class",
        *(m.positive for m in shown),
    )
    for label, field in METRICS:
        table.add_row(label, *(_rate(getattr(m, field)) for m in shown))
    console.print(table)
    console.print(f"overall accuracy: {_rate(result.accuracy)}   (on imbalanced traffic, read the rates above instead)")


def _ranking(result: Assessment, console: Console) -> None:
    rankings = [r for r in (result.flag_ranking, *result.class_ranking) if r is not None]
    if not rankings:
        return
    table = _table(
        f"ranking quality (AUC with {_level(result)} DeLong interval)",
        "positive",
        "positives",
        "negatives",
        "AUC",
        "interval",
        "average precision",
    )
    for r in rankings:
        interval = "-" if not math.isfinite(r.auc.variance) else f"[{r.auc.low:.4f}, {r.auc.high:.4f}]"
        table.add_row(
            Text(r.positive), str(r.n_positive), str(r.n_negative), f"{r.auc.auc:.4f}", interval, f"{r.average_precision:.4f}"
        )
    console.print(table)


def _point_label(p: OperatingPoint) -> str:
    if p.kind == "fpr":
        return f"FPR <= {100 * p.target:g} %"
    if p.kind == "recall":
        return f"recall >= {100 * p.target:g} %"
    return p.kind


def _operating_points(result: Assessment, console: Console) -> None:
    if not result.operating_points:
        return
    thresholds = _table(
        "operating points (FPR: false-positive rate)", "chosen by", "log-odds >=", "P(flag) >=", "precision", "recall", "FPR"
    )
    columns = ["chosen by", "false alarms", "missed abuse"] + ([] if result.costs is None else ["cost / message"])
    expected = _table("expected per 10,000 messages at the data's base rate", *columns)
    for table in (thresholds, expected):
        table.columns[0].no_wrap = True
    for p in result.operating_points:
        f = p.figures
        if f is None:
            thresholds.add_row(Text(_point_label(p)), Text(f"not met: {p.note}", style="italic"), "", "", "", "")
            continue
        thresholds.add_row(
            Text(_point_label(p)),
            _num(f.threshold_log_odds),
            _prob(f.threshold_probability),
            _pct(f.precision.value),
            _pct(f.recall.value),
            _pct(f.false_positive_rate.value),
        )
        row = [Text(_point_label(p)), f"{f.false_alarms_per_10k:.1f}", f"{f.missed_per_10k:.1f}"]
        if result.costs is not None:
            row.append(_num(f.expected_cost, 4))
        expected.add_row(*row)
    console.print(thresholds)
    console.print(
        "a message is flagged when its log-odds of not being normal is at least the threshold; "
        "the JSON output carries an interval for every rate. Thresholds chosen by target on this data "
        "look better here than they will on new traffic: confirm them on messages not used to choose them"
    )
    console.print(expected)
    if result.costs is not None:
        console.print(
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
            f": Brier score {cal.brier_score:.4f}, expected calibration error {cal.expected_calibration_error:.4f} "
            f"({cal.n_bins} bins of equal count)",
        )
    )
    table = _table(None, "bin", "messages", "log-odds from", "to", "mean P(flag)", "observed share flagged  [interval]")
    for b in range(cal.n_bins):
        table.add_row(
            str(b + 1),
            str(cal.counts[b]),
            _num(cal.log_odds_low[b], 2),
            _num(cal.log_odds_high[b], 2),
            _prob(cal.mean_predicted[b]),
            _interval(cal.observed[b], cal.observed_low[b], cal.observed_high[b], cal.counts[b]),
        )
    console.print(table)
    s = result.scores
    table = _table("flag log-odds by true class", "class", *(f"{100 * q:g} %" for q in s.quantile_levels))
    for c, name in enumerate(s.classes):
        table.add_row(Text(name), *(_num(v, 2) for v in s.quantiles[c]))
    console.print(table)


def _tokens(pushes) -> str:
    return ", ".join(f"{shown(p.token)} {p.evidence:+.2f}" for p in pushes) or "-"


def _messages(title: str, rows: tuple[ReviewedMessage, ...], total: int | None, console: Console) -> None:
    heading = title if total is None else f"{title}: {total}" + (f" (showing {len(rows)})" if len(rows) < total else "")
    table = _table(heading, "id", "true", "decided", "P(flag)", "margin", "toward flagging", "toward normal", right_from=3)
    for m in rows:
        table.add_row(
            Text(m.id),
            Text(m.true_class),
            Text(m.decided_class),
            _prob(m.flag_probability),
            f"{m.margin:+.2f}",
            Text(_tokens(m.toward_flag), justify="left"),
            Text(_tokens(m.toward_normal), justify="left"),
        )
    console.print(table)


def _drivers(title: str, drivers, console: Console) -> None:
    if not drivers:
        return
    table = _table(title, "token", "summed evidence", "errors pushed", "errors tipped")
    for d in drivers:
        table.add_row(Text(d.token), f"{d.evidence:.2f}", str(d.pushed), str(d.tipped))
    console.print(table)


def _errors(result: Assessment, console: Console) -> None:
    e = result.errors
    if e is None:
        return
    _messages("false alarms (normal messages flagged), most confident first", e.false_alarms, e.n_false_alarms, console)
    _messages("missed abuse (flagged classes let through), most confident first", e.missed, e.n_missed, console)
    _messages("borderline messages (closest to the threshold)", e.borderline, None, console)
    _drivers("what drives false alarms (tokens pushing normal messages toward flagging)", e.false_alarm_drivers, console)
    _drivers("what drives missed abuse (tokens pushing abuse toward normal)", e.missed_drivers, console)
    console.print(
        "margin: distance to the threshold on the log-odds scale; evidence compares the most probable flagged "
        "class with the normal class; 'tipped': the token's evidence alone exceeded the margin"
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
    _errors(result, console)
    for note in result.notes:
        console.print(Text(f"note: {note}", style="italic"))
