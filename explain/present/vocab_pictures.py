"""Pictures of a :class:`~explain.analysis.vocab.VocabReview` (PNG, matplotlib's Agg renderer).

- a word cloud per side of each comparison, word sizes proportional to the
  chosen lens (not to frequency), laid out with a fixed seed so the same
  review always gives the same picture;
- a ranked horizontal bar chart of the strongest tokens for and against,
  with each value and the token's risk flags written beside its bar.

Everything drawn is read from the review; nothing is recomputed. Redaction
happens in the review itself, so a redacted review has no personal token to
draw.

The colours come from :mod:`explain.present.drawing`, the same in every picture.
"""

from __future__ import annotations

import re

import numpy as np
from matplotlib.figure import Figure

from explain.analysis.risk import FLAGS
from explain.present.token_display import shown
from explain.analysis.vocab import LENS_TITLES, REST, Contrast, VocabReview
from explain.present.drawing import DPI, NEUTRAL, class_colours, png_bytes

SEED = 20_240_601
CLOUD_WORDS = 80


def _side_names(c: Contrast, side: str) -> tuple[str, str]:
    return (c.target, c.other) if side == "for" else (c.other, c.target)


def _flag_note(c: Contrast, j: int) -> str:
    raised = [name for i, name in enumerate(FLAGS) if c.flags[i, j]]
    return f"  [{', '.join(raised)}]" if raised else ""


def word_cloud(review: VocabReview, index: int, side: str = "for") -> bytes:
    """Word cloud of the tokens whose evidence points to one side of contrast ``index``."""
    from wordcloud import WordCloud

    c = review.contrasts[index]
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
            return family.shade(0.25 + 0.75 * words[word] / top_size)

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
    if review.redacted:
        fig.text(0.5, 0.02, f"{review.redacted_count} personal-looking tokens redacted", ha="center", fontsize=8)
    return png_bytes(fig)


def bar_chart(review: VocabReview, index: int) -> bytes:
    """The ``review.top`` strongest tokens for and against the target, ranked, with values and flags."""
    c = review.contrasts[index]
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
            ax.text(s + 0.01 * top_value, y, f"{values[j]:.3g}", va="center", fontsize=7)
        ax.set_xlim(0, 1.15 * top_value)
        ax.set_xlabel(f"|{LENS_TITLES[lens]}|")
        ax.set_title(f"for {owner} (against {opponent})", fontsize=10)
        ax.grid(axis="x", alpha=0.3)
        if not len(picked):
            ax.text(0.5, 0.5, f"no token points to {owner}", transform=ax.transAxes, ha="center", color=NEUTRAL.base)
    fig.suptitle(f"{c.label}: top {review.top} by {LENS_TITLES[lens]}", fontsize=11)
    fig.tight_layout()
    return png_bytes(fig)


def _slug(name: str) -> str:
    return re.sub(r"[^\w.-]+", "_", name).strip("._") or "class"


def draw_all(review: VocabReview) -> dict[str, bytes]:
    """File name -> PNG bytes: for each comparison, its bar chart and a word cloud per side."""
    pictures = {}
    for i, c in enumerate(review.contrasts):
        pair = f"{_slug(c.target)}_vs_{_slug(c.other)}"
        pictures[f"bars_{pair}.png"] = bar_chart(review, i)
        pictures[f"cloud_{pair}_for_{_slug(c.target)}.png"] = word_cloud(review, i, "for")
        pictures[f"cloud_{pair}_for_{_slug(c.other)}.png"] = word_cloud(review, i, "against")
    return pictures
