"""Pictures of an :class:`~explain.analysis.assessment.Assessment` (PNG, matplotlib Agg).

ROC curve (operating points labelled, the threshold in use marked),
precision-recall curve, reliability diagram on the log-odds scale, the score
distribution per class as shares of each class, and false-alarm rates per
slice. Everything drawn is read from
the result; nothing is recomputed. Colours and the PNG writer are the
project's (:mod:`explain.present.vocab_pictures`), so a class looks the same in every picture.
"""

from __future__ import annotations

import numpy as np
from matplotlib.figure import Figure
from matplotlib.patches import Rectangle

from explain.analysis.assessment import FLAGGED, Assessment
from explain.present.assessment import point_label
from explain.present.drawing import INK, NEUTRAL, PALETTE, class_colours, ink_on, line_colours, png_bytes
from explain.present.numbers import threshold

# Marks drawn over the curves (operating points, threshold).
MARK = INK


def _colours(result: Assessment) -> dict[str, str]:
    """Line colour per positive class and for "flagged" (:func:`explain.present.drawing.line_colours`)."""
    return line_colours(result.classes, result.normal_class)


def _rankings(result: Assessment):
    return [r for r in (result.flag_ranking, *result.class_ranking) if r is not None]


def _auc_label(r) -> str:
    if np.isfinite(r.auc.variance):
        return f"{r.positive}: AUC {r.auc.auc:.4f} ({r.auc.low:.4f} to {r.auc.high:.4f})"
    return f"{r.positive}: AUC {r.auc.auc:.4f}"


def roc_picture(result: Assessment) -> bytes:
    """ROC curves; the right panel stretches the low false-alarm rates an auditor cares about.

    The AUC's DeLong interval is in the legend (it bounds the area, not the
    curve, so no band is drawn); each operating point is a dot labelled with
    how it was chosen and its threshold log-odds, the threshold in use a star.
    """
    fig = Figure(figsize=(10, 4.6))
    linear, logx = fig.subplots(1, 2)
    colours = _colours(result)
    for r in _rankings(result):
        colour = colours[r.positive]
        for ax in (linear, logx):
            ax.plot(r.roc_false_alarm_rate, r.roc_recall, color=colour, lw=1.8, label=_auc_label(r))
    chance = np.linspace(1e-4, 1, 200)
    for ax in (linear, logx):
        ax.plot(chance, chance, color=NEUTRAL.base, ls=":", lw=1, label="chance")
        ax.set_ylabel("recall")
        ax.set_ylim(0, 1.01)
        ax.grid(alpha=0.3)
    linear.set_xlim(0, 1)
    linear.set_xlabel("false-alarm rate")
    linear.set_title(f"ROC curve (legend: AUC, {100 * result.confidence:g} % DeLong interval)")
    logx.set_xscale("log")
    logx.set_xlim(1e-4, 1)
    logx.set_xlabel("false-alarm rate (log scale)")
    logx.set_title("the same, low false-alarm rates stretched")
    key = []
    for p in (p for p in result.operating_points if p.figures is not None):
        f = p.figures
        in_use = p.kind == "in use"
        for ax in (linear, logx):
            ax.plot(f.false_alarm_rate.value, f.recall.value, "*" if in_use else "o", color=MARK,
                    ms=11 if in_use else 5, zorder=5, label="threshold in use" if in_use and ax is linear else None)
        if in_use:
            continue
        # 6 significant figures, as on every page; the JSON keeps every digit
        key.append(f"{len(key) + 1}  {point_label(p)}: log-odds >= {threshold(f.threshold_log_odds)}")
        # numbers, not names, beside the dots: operating points crowd together near the top left
        logx.annotate(str(len(key)), (max(f.false_alarm_rate.value, 1e-4), f.recall.value), fontsize=7,
                      xytext=(3, -9), textcoords="offset points", color=MARK)
    if key:
        logx.text(1.03, 1.0, "operating points\n" + "\n".join(key), transform=logx.transAxes, fontsize=7,
                  va="top", family="monospace", color=MARK)
    linear.legend(loc="lower right", fontsize=8)
    return png_bytes(fig)


def precision_recall_picture(result: Assessment) -> bytes:
    """Precision against recall, with the base rate (the precision of flagging at random)."""
    fig = Figure(figsize=(6, 4.6))
    ax = fig.subplots()
    colours = _colours(result)
    for r in _rankings(result):
        colour = colours[r.positive]
        ax.plot(r.pr_recall, r.pr_precision, color=colour, lw=1.8, label=f"{r.positive}: AP {r.average_precision:.3f}")
        ax.axhline(r.n_positive / (r.n_positive + r.n_negative), color=colour, ls=":", lw=1)
    ax.set_xlabel("recall")
    ax.set_ylabel("precision")
    ax.set_xlim(0, 1)
    ax.set_ylim(0, 1.01)
    ax.set_title("precision-recall (dotted: base rate)")
    ax.grid(alpha=0.3)
    ax.legend(loc="lower left", fontsize=8)
    return png_bytes(fig)


def reliability_picture(result: Assessment) -> bytes:
    """Observed against predicted, both as log-odds of a flagged class, per equal-count bin.

    On the probability scale most naive Bayes bins sit on top of each other
    near 0 and 1; on the log-odds scale they spread out. A bin whose observed
    share is 0 or 1 has infinite observed log-odds: it is drawn at the edge
    of the plot as an open triangle.
    """
    cal = result.calibration
    fig = Figure(figsize=(6.4, 5))
    ax = fig.subplots()
    x = np.asarray(cal.mean_predicted_log_odds)
    y, y_lo, y_hi = (np.asarray(a) for a in (cal.observed_log_odds, cal.observed_log_odds_low, cal.observed_log_odds_high))
    finite = np.concatenate([x[np.isfinite(x)], y[np.isfinite(y)], y_lo[np.isfinite(y_lo)], y_hi[np.isfinite(y_hi)]])
    span = (finite.min() - 1, finite.max() + 1) if len(finite) else (-5, 5)
    ax.plot(span, span, color=NEUTRAL.base, ls=":", lw=1, label="perfectly calibrated")
    family = PALETTE[0]
    shown, lo, hi = (np.clip(a, *span) for a in (y, y_lo, y_hi))
    ax.errorbar(
        x, shown, yerr=np.vstack([shown - lo, hi - shown]), fmt="none", ecolor=family.shade(0.2), capsize=3,
    )
    edge = ~np.isfinite(y)
    ax.plot(x[~edge], shown[~edge], "o-", color=family.base,
            label=f"bins of about {int(np.median(cal.counts))} messages ({100 * result.confidence:g} % Wilson intervals)")
    over = np.asarray(cal.overconfident, dtype=bool)
    if over.any():
        ax.plot(x[over], shown[over], "s", color=family.shade(0.9), ms=6, label="overconfident bin")
    if edge.any():
        ax.plot(x[edge], shown[edge], "v" if np.all(y[edge] < 0) else "^", mfc="none", color=family.base,
                label="observed share 0 or 1 (drawn at the edge)")
    ax.set_xlim(*span)
    ax.set_ylim(*span)
    ax.set_xlabel("mean P(flag), as flag log-odds")
    ax.set_ylabel("observed share flagged-class, as log-odds")
    ax.set_title(
        f"reliability: Brier {cal.brier_score:.4f}, expected calibration error {cal.expected_calibration_error:.4f},\n"
        f"maximum calibration error {cal.maximum_calibration_error:.4f}, "
        f"{int(np.sum(cal.overconfident))} of {cal.n_bins} bins overconfident (filled squares)",
        fontsize=10,
    )
    ax.grid(alpha=0.3)
    ax.legend(loc="upper left", fontsize=7)
    return png_bytes(fig)


def score_picture(result: Assessment) -> bytes:
    """Flag log-odds per true class, each class's messages as shares, with the threshold in use."""
    s = result.scores
    fig = Figure(figsize=(8, 4.6))
    ax = fig.subplots()
    colours = _colours(result)
    for c, name in enumerate(s.classes):
        if s.counts[c].sum() == 0:
            continue
        ax.stairs(s.shares[c], s.edges, color=colours[name], lw=1.8, label=f"{name} ({s.counts[c].sum()} messages)")
    if np.isfinite(s.threshold_log_odds):
        ax.axvline(s.threshold_log_odds, color=MARK, ls="--", lw=1, label="threshold in use")
    clipped = int(s.below.sum() + s.above.sum())
    note = f" ({clipped} beyond the range counted in the end bins)" if clipped else ""
    ax.set_xlabel(f"flag log-odds: log P(flag) - log P({result.normal_class})")
    ax.set_ylabel("share of the class's messages")
    ax.set_title("flag log-odds by true class" + note, fontsize=10)
    ax.grid(alpha=0.3)
    ax.legend(fontsize=8)
    return png_bytes(fig)


def slices_picture(result: Assessment) -> bytes:
    """Both error rates per slice with their Wilson intervals, each rate over all messages as a line.

    Left the false-alarm rate, right the miss rate; a rate that differs from
    the rest's (adjusted p < alpha) is drawn in colour.
    """
    rep = result.slices
    shown = list(rep.slices)
    fig = Figure(figsize=(7, 1.3 + 0.28 * len(shown)))
    axes = fig.subplots(1, 2, sharey=True)
    y = np.arange(len(shown))[::-1]
    panels = (("false-alarm rate", "false_alarm_test", rep.overall_false_alarm_rate),
              ("miss rate", "miss_test", rep.overall_miss_rate))
    for ax, (title, key, overall) in zip(axes, panels):
        for yi, s in zip(y, shown):
            t = getattr(s, key)
            if t.rate.denominator == 0:
                continue
            r = t.rate
            colour = PALETTE[2].base if t.differs else NEUTRAL.shade(0.7)
            ax.errorbar(100 * r.value, yi, xerr=[[100 * (r.value - r.low)], [100 * (r.high - r.value)]], fmt="o",
                        color=colour, capsize=2, ms=4)
        ax.axvline(100 * overall.value, color=MARK, ls="--", lw=1, label=f"all messages {100 * overall.value:.1f} %")
        ax.set_xlabel(f"{title}, %", fontsize=8)
        ax.set_title(title, fontsize=9)
        ax.grid(alpha=0.3, axis="x")
        ax.legend(fontsize=7, loc="upper right")
    axes[0].set_yticks(y, [f"{s.group}: {s.name}" for s in shown], fontsize=7)
    fig.suptitle(f"error rates per slice ({100 * result.confidence:g} % Wilson intervals; "
                 f"differing at adjusted p < {rep.alpha:g} in colour)", fontsize=9)
    return png_bytes(fig)


def confusion_picture(result: Assessment) -> bytes:
    """The confusion matrix as a heat map: each cell shaded by the share of its true class (row), with its count.

    Cells on the diagonal (right decisions) take the neutral family, the others
    the colour of the class decided, so a reader sees at once where the
    mistakes go; the count and the row share are written in every cell.
    """
    cm = result.confusion
    labels = list(cm.labels)
    n = len(labels)
    colours = class_colours(result.classes, result.normal_class)
    fig = Figure(figsize=(1.6 + 1.25 * n, 1.0 + 1.05 * n))
    ax = fig.subplots()
    for i in range(n):
        for j in range(n):
            share = float(cm.row_rates[i, j]) if np.isfinite(cm.row_rates[i, j]) else 0.0
            family = NEUTRAL if i == j else colours.get(labels[j], NEUTRAL)
            face = family.shade(share) if share > 0 else "#ffffff"
            ax.add_patch(Rectangle((j, i), 1, 1, facecolor=face, edgecolor="white", lw=2))
            ink = ink_on(face)  # WCAG 2.1 contrast, at least 4.5:1
            ax.text(j + 0.5, i + 0.42, f"{int(cm.counts[i, j]):,}", ha="center", va="center", fontsize=11, color=ink,
                    fontweight="bold")
            ax.text(j + 0.5, i + 0.7, f"{100 * share:.1f} %", ha="center", va="center", fontsize=8, color=ink)
    ax.set_xlim(0, n)
    ax.set_ylim(n, 0)
    ax.set_xticks(np.arange(n) + 0.5, labels)
    ax.set_yticks(np.arange(n) + 0.5, labels)
    ax.xaxis.tick_top()
    ax.xaxis.set_label_position("top")
    ax.set_xlabel("decided by the filter")
    ax.set_ylabel("true class")
    ax.tick_params(length=0)
    for spine in ax.spines.values():
        spine.set_visible(False)
    return png_bytes(fig)


def draw_all(result: Assessment) -> dict[str, bytes]:
    """File name -> PNG bytes of every picture the result supports."""
    pictures = {"confusion.png": confusion_picture(result)}
    if _rankings(result):
        pictures["roc.png"] = roc_picture(result)
        pictures["precision_recall.png"] = precision_recall_picture(result)
    if result.calibration is not None:
        pictures["reliability.png"] = reliability_picture(result)
        pictures["scores.png"] = score_picture(result)
    if result.slices is not None and result.slices.slices:
        pictures["slices.png"] = slices_picture(result)
    return pictures
