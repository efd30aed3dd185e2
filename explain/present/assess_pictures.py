"""Pictures of an :class:`~explain.analysis.assessment.Assessment` (PNG, matplotlib Agg).

ROC curve, precision-recall curve, reliability diagram and the score
distribution per class on the log-odds scale. Everything drawn is read from
the result; nothing is recomputed. Colours and the PNG writer are the
project's (:mod:`explain.present.vocab_pictures`), so a class looks the same in every picture.
"""

from __future__ import annotations

import numpy as np
from matplotlib.figure import Figure
from matplotlib.patches import Rectangle

from explain.analysis.assessment import FLAGGED, Assessment
from explain.present.drawing import NEUTRAL, PALETTE, class_colours, png_bytes

# Marks drawn over the curves (operating points, threshold): the darkest neutral shade.
MARK = NEUTRAL.shade(1.0)


def _colours(result: Assessment) -> dict[str, str]:
    """Line colour per positive class and for "flagged", from the project's palette.

    Classes keep their family from :func:`explain.present.vocab_pictures.class_colours`. With
    one flagged class, "flagged" is that class; with more, it takes the next
    unused family.
    """
    families = class_colours(result.classes, result.normal_class)
    colours = {name: family.base for name, family in families.items()}
    flagged = [c for c in result.classes if c != result.normal_class]
    if len(flagged) == 1:
        colours[FLAGGED] = colours[flagged[0]]
    else:
        colours[FLAGGED] = PALETTE[len(flagged) % len(PALETTE)].base if len(flagged) < len(PALETTE) else MARK
    return colours


def _rankings(result: Assessment):
    return [r for r in (result.flag_ranking, *result.class_ranking) if r is not None]


def _auc_label(r) -> str:
    if np.isfinite(r.auc.variance):
        return f"{r.positive}: AUC {r.auc.auc:.3f} [{r.auc.low:.3f}, {r.auc.high:.3f}]"
    return f"{r.positive}: AUC {r.auc.auc:.3f}"


def roc_picture(result: Assessment) -> bytes:
    """ROC curves; the right panel stretches the low false-positive rates an auditor cares about."""
    fig = Figure(figsize=(10, 4.6))
    linear, logx = fig.subplots(1, 2)
    colours = _colours(result)
    for r in _rankings(result):
        colour = colours[r.positive]
        for ax in (linear, logx):
            ax.plot(r.roc_false_positive_rate, r.roc_true_positive_rate, color=colour, lw=1.8, label=_auc_label(r))
    chance = np.linspace(1e-4, 1, 200)
    for ax in (linear, logx):
        ax.plot(chance, chance, color=NEUTRAL.base, ls=":", lw=1, label="chance")
        ax.set_ylabel("true-positive rate (recall)")
        ax.set_ylim(0, 1.01)
        ax.grid(alpha=0.3)
    linear.set_xlim(0, 1)
    linear.set_xlabel("false-positive rate")
    linear.set_title(f"ROC ({100 * result.confidence:g} % DeLong intervals)")
    logx.set_xscale("log")
    logx.set_xlim(1e-4, 1)
    logx.set_xlabel("false-positive rate (log scale)")
    logx.set_title("the same, low false-positive rates stretched")
    chosen = [p.figures for p in result.operating_points if p.kind in ("fpr", "recall") and p.figures is not None]
    if chosen:
        x = [f.false_positive_rate.value for f in chosen]
        y = [f.recall.value for f in chosen]
        for ax in (linear, logx):
            ax.plot(x, y, "o", color=MARK, ms=5, label="operating points by target (flagged)")
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
    """Observed share flagged against mean predicted probability, per equal-count bin."""
    cal = result.calibration
    fig = Figure(figsize=(6, 5))
    ax = fig.subplots()
    ax.plot([0, 1], [0, 1], color=NEUTRAL.base, ls=":", lw=1, label="perfectly calibrated")
    family = PALETTE[0]
    errors = np.vstack([cal.observed - cal.observed_low, cal.observed_high - cal.observed])
    ax.errorbar(
        cal.mean_predicted,
        cal.observed,
        yerr=errors,
        fmt="o-",
        color=family.base,
        ecolor=family.shade(0.2),
        capsize=3,
        label=f"bins of about {int(np.median(cal.counts))} messages ({100 * result.confidence:g} % Wilson intervals)",
    )
    ax.set_xlim(-0.02, 1.02)
    ax.set_ylim(-0.02, 1.02)
    ax.set_xlabel(f"mean predicted P(not {result.normal_class})")
    ax.set_ylabel("observed share not normal")
    ax.set_title(
        f"reliability: Brier {cal.brier_score:.4f}, expected calibration error {cal.expected_calibration_error:.4f}"
    )
    ax.grid(alpha=0.3)
    ax.legend(loc="upper left", fontsize=8)
    return png_bytes(fig)


def score_picture(result: Assessment) -> bytes:
    """Histogram of flag log-odds per true class, with the threshold in use."""
    s = result.scores
    fig = Figure(figsize=(8, 4.6))
    ax = fig.subplots()
    colours = _colours(result)
    for c, name in enumerate(s.classes):
        if s.counts[c].sum() == 0:
            continue
        ax.stairs(s.counts[c], s.edges, color=colours[name], lw=1.8, label=name)
    if np.isfinite(s.threshold_log_odds):
        ax.axvline(s.threshold_log_odds, color=MARK, ls="--", lw=1, label="threshold in use")
    clipped = int(s.below.sum() + s.above.sum())
    note = f" ({clipped} beyond the range counted in the end bins)" if clipped else ""
    ax.set_xlabel(f"log P(not {result.normal_class}) - log P({result.normal_class})")
    ax.set_ylabel("messages")
    ax.set_title("scores by true class, log-odds scale" + note, fontsize=10)
    ax.grid(alpha=0.3)
    ax.legend(fontsize=8)
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
            ink = "white" if share >= 0.5 else "black"
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
    return pictures
