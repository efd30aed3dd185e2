"""Pictures of a :class:`~explain.analysis.vocab.VocabReview` (PNG, matplotlib's Agg renderer).

- a word cloud per side of each comparison, word sizes proportional to the
  chosen lens (not to frequency), laid out with a fixed seed so the same
  review always gives the same picture;
- a ranked horizontal bar chart of the strongest tokens for and against,
  with each value and the token's risk flags written beside its bar;
- a support map per comparison: every token's ratio (log-odds per
  occurrence) against its training support on a log scale, thin tokens
  marked, the strong and thin limits drawn, and the chosen lens's top tokens
  labelled, so that strong evidence resting on a handful of messages stands
  out at a glance.

Everything drawn is read from the review; nothing is recomputed. Redaction
happens in the review itself, so a redacted review has no personal token to
draw.

The colours come from :mod:`explain.present.drawing`, the same in every picture.
"""

from __future__ import annotations

import re

import numpy as np
from matplotlib.figure import Figure

from explain.analysis.risk import FLAG_LABELS, FLAGS
from explain.analysis.vocab import LENS_TITLES, VocabComparison, VocabReview
from explain.present.drawing import INK, NEUTRAL, class_colours, png_bytes, text_shade
from explain.present.token_display import shown
from explain.present.vocab import redaction_lines

SEED = 20_240_601
CLOUD_WORDS = 80
# Tokens named on a support map, per side.
MAP_LABELS = 8


def _side_names(c: VocabComparison, side: str) -> tuple[str, str]:
    return (c.target, c.other) if side == "for" else (c.other, c.target)


def _flag_note(c: VocabComparison, j: int) -> str:
    raised = [FLAG_LABELS[name] for i, name in enumerate(FLAGS) if c.flags[i, j]]
    return f"  [{', '.join(raised)}]" if raised else ""


def word_cloud(review: VocabReview, index: int, side: str = "for") -> bytes:
    """Word cloud of the tokens whose evidence points to one side of comparison ``index``."""
    from wordcloud import WordCloud

    c = review.comparisons[index]
    lens = review.lens
    picked = c.top(lens, max(CLOUD_WORDS, review.top), side)
    sizes = np.abs(c.values(lens)[picked])
    owner, opponent = _side_names(c, side)
    family = class_colours(review.classes, review.normal_class)[owner]
    fig = Figure(figsize=(9, 5.6))
    ax = fig.subplots()
    ax.set_axis_off()
    title = f"evidence for {owner} against {opponent}, word size by {LENS_TITLES[lens]}"
    if len(picked) == 0:
        ax.text(0.5, 0.5, f"no token points to {owner}", ha="center", va="center", color=NEUTRAL.base)
    else:
        words = {str(review.tokens[j]): float(s) for j, s in zip(picked, sizes)}
        top_size = float(sizes.max())

        def colour(word, **_):
            return text_shade(family, 0.25 + 0.75 * words[word] / top_size)  # darker is stronger, always readable

        cloud = WordCloud(
            # Layout on a small grid, drawn at twice the size: fast and still sharp at DPI.
            width=900,
            height=500,
            scale=2,
            background_color="white",
            random_state=SEED,
            relative_scaling=1.0,
            prefer_horizontal=0.9,
            max_words=len(words),
            color_func=colour,
        ).generate_from_frequencies(words)
        ax.imshow(cloud.to_array(), interpolation="bilinear")
    ax.set_title(title, fontsize=11)
    _footer(fig, review)
    return png_bytes(fig)


def _footer(fig: Figure, review: VocabReview) -> None:
    """The personal-data check, as the terminal says it, under the picture."""
    import textwrap

    lines = [part for line in redaction_lines(review) for part in textwrap.wrap(line, 110)]
    fig.text(0.5, -0.01, "\n".join(lines), ha="center", va="top", fontsize=7, color=NEUTRAL.shade(1.0))


def support_map(review: VocabReview, index: int) -> bytes:
    """Every token's ratio against its training support (both sides together, log scale).

    Points take the colour of the side their evidence favours; thin tokens
    are ringed in ink; the dashed lines are the strong limits (``+-log
    strong``) and the thin limit (``thin_below``). The ``MAP_LABELS``
    strongest tokens for and against under the chosen lens are named.
    Tokens with no support at all cannot sit on a log axis and are counted
    in the title instead.
    """
    c = review.comparisons[index]
    colours = class_colours(review.classes, review.normal_class)
    support = c.support_target + c.support_other
    placed = support > 0
    thin = c.flag("thin") & placed
    fig = Figure(figsize=(10, 6.5))
    ax = fig.subplots()
    for owner, side in ((c.target, c.ratio > 0), (c.other, c.ratio <= 0)):
        keep = side & placed & ~thin
        ax.scatter(support[keep], c.ratio[keep], s=6, color=colours[owner].base, alpha=0.45, linewidths=0,
                   label=f"toward {owner}", rasterized=True)
        keep = side & thin
        ax.scatter(support[keep], c.ratio[keep], s=22, facecolors=colours[owner].base, edgecolors=INK,
                   linewidths=0.7, label=f"thin, toward {owner}", rasterized=True)
    t = review.thresholds
    for y in (t.strong_log_odds, -t.strong_log_odds):
        ax.axhline(y, color=NEUTRAL.base, ls="--", lw=0.8)
    if t.thin_below > 0:
        ax.axvline(t.thin_below, color=NEUTRAL.base, ls=":", lw=0.8)
    ax.axhline(0, color=NEUTRAL.base, lw=0.5)
    ax.set_xscale("log")
    ax.margins(y=0.12)  # room for labels stacked above the highest points
    labelled = [j for j in (*c.top(review.lens, MAP_LABELS, "for"), *c.top(review.lens, MAP_LABELS, "against"))
                if placed[j]]
    _label_points(ax, [(support[j], c.ratio[j], shown(review.tokens[j])) for j in labelled])
    ax.set_xlabel(f"support: {_support_unit(review)} in the training messages of {c.target} and {c.other} (log scale)")
    ax.set_ylabel(f"ratio: log-odds per occurrence, + toward {c.target}")
    missing = int((~placed).sum())
    ax.set_title(
        f"{c.label}: evidence against support, {int(thin.sum()):,} thin tokens ringed\n"
        f"top {MAP_LABELS} each way by {LENS_TITLES[review.lens]} named"
        + (f"; {missing:,} tokens without support not drawn" if missing else ""),
        fontsize=10,
    )
    ax.text(0.99, 0.01, f"dashed: strong (x{np.exp(t.strong_log_odds):.3g}); dotted: thin limit ({t.thin_below:g})",
            transform=ax.transAxes, ha="right", va="bottom", fontsize=7, color=NEUTRAL.shade(1.0))
    ax.grid(alpha=0.25)
    ax.legend(fontsize=8, loc="upper left", markerscale=1.5)
    _footer(fig, review)
    return png_bytes(fig)


def _label_points(ax, points) -> None:
    """Name each (x, y, text) point, moving a label up until it overlaps no label placed before it."""
    ax.get_xlim(), ax.get_ylim()  # settle the limits, so data positions map to points
    to_points = 72.0 / ax.figure.dpi
    taken: list[tuple[float, float, float, float]] = []
    line = 9.0  # points: a 7-point label's height with spacing
    for x, y, text in sorted(points, key=lambda p: (-p[1], p[0])):
        px, py = ax.transData.transform((x, y)) * to_points
        width, lift = 4.2 * len(text) + 4, 0.0
        while any(px < r and px + width > l and py + lift < t and py + lift + line > b for l, b, r, t in taken):
            lift -= line if y < 0 else -line
        taken.append((px, py + lift, px + width, py + lift + line))
        ax.annotate(text, (x, y), xytext=(4, 2 + lift), textcoords="offset points", fontsize=7, color=INK,
                    arrowprops=None if lift == 0 else dict(arrowstyle="-", lw=0.4, color=NEUTRAL.base))


def _support_unit(review: VocabReview) -> str:
    if review.variant == "bernoulli" or review.feature_kind == "binary":
        return "messages containing the token"
    return {"tfidf": "summed TF-IDF weights", "normalised": "summed normalised counts"}.get(
        review.feature_kind, "occurrences"
    )


def bar_chart(review: VocabReview, index: int) -> bytes:
    """The ``review.top`` strongest tokens for and against the target, ranked, with values and flags."""
    c = review.comparisons[index]
    lens = review.lens
    values = c.values(lens)
    colours = class_colours(review.classes, review.normal_class)
    sides = [(side, c.top(lens, review.top, side)) for side in ("for", "against")]
    rows = max(1, max(len(p) for _, p in sides))
    fig = Figure(figsize=(12, 1.2 + 0.32 * rows))
    axes = fig.subplots(1, 2)
    for ax, (side, picked) in zip(axes, sides):
        owner, opponent = _side_names(c, side)
        strength = np.abs(values[picked])
        positions = np.arange(len(picked))
        ax.barh(positions, strength, color=colours[owner].base, height=0.7)
        ax.set_yticks(positions, [f"{shown(review.tokens[j])}{_flag_note(c, j)}" for j in picked], fontsize=8)
        ax.set_ylim(rows - 0.5, -0.5)
        top_value = float(strength.max()) if len(picked) else 1.0
        for y, j, s in zip(positions, picked, strength):
            # chi-square and G2 are unsigned: the panel's title says which side
            ax.text(s + 0.01 * top_value, y, f"{getattr(c, lens)[j]:.3g}", va="center", fontsize=7)
        ax.set_xlim(0, 1.15 * top_value)
        ax.set_xlabel(LENS_TITLES[lens] if lens in ("chi2", "g2") else f"|{LENS_TITLES[lens]}|")
        ax.set_title(f"for {owner} (against {opponent})", fontsize=10)
        ax.grid(axis="x", alpha=0.3)
        if not len(picked):
            ax.text(0.5, 0.5, f"no token points to {owner}", transform=ax.transAxes, ha="center", color=NEUTRAL.base)
    fig.suptitle(f"{c.label}: top {review.top} by {LENS_TITLES[lens]}", fontsize=11)
    fig.tight_layout()
    _footer(fig, review)
    return png_bytes(fig)


def _slug(name: str) -> str:
    return re.sub(r"[^\w.-]+", "_", name).strip("._") or "class"


def draw_all(review: VocabReview) -> dict[str, bytes]:
    """File name -> PNG bytes: for each comparison, its bar chart, support map and a word cloud per side."""
    pictures = {}
    for i, c in enumerate(review.comparisons):
        pair = f"{_slug(c.target)}_vs_{_slug(c.other)}"
        pictures[f"bars_{pair}.png"] = bar_chart(review, i)
        pictures[f"support_{pair}.png"] = support_map(review, i)
        pictures[f"cloud_{pair}_for_{_slug(c.target)}.png"] = word_cloud(review, i, "for")
        pictures[f"cloud_{pair}_for_{_slug(c.other)}.png"] = word_cloud(review, i, "against")
    return pictures
