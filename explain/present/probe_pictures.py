"""Pictures of a :class:`~explain.analysis.probe.ProbeResult` (PNG).

- the evasion cost per flagged class: the share of its messages let through
  with at most k added tokens, as k grows (solid: repeats allowed; dashed:
  distinct new tokens only);
- per term group, a term x term grid of the mean shift in log-odds when the
  row's term is replaced by the column's, from the slate grey of the normal
  class (toward letting through) over white to the first flagged class's
  colour (toward flagging); each cell carries its value and message count.

Everything drawn is read from the result; colours from :mod:`explain.present.drawing`.
"""

from __future__ import annotations

import re

import numpy as np
from matplotlib.colors import LinearSegmentedColormap, to_hex
from matplotlib.figure import Figure

from explain.analysis.probe import ProbeResult
from explain.present.drawing import INK, NEUTRAL, PAPER, ink_on, line_colours, png_bytes
from explain.present.token_display import shown


def _slug(name: str) -> str:
    return re.sub(r"[^a-z0-9]+", "-", name.lower()).strip("-") or "group"


def evasion_curve(result: ProbeResult) -> bytes:
    ev = result.evasion
    colours = line_colours(result.classes, result.normal_class)
    fig = Figure(figsize=(6.4, 3.8))
    ax = fig.add_subplot()
    steps = np.arange(0, ev.max_added + 1)
    for budget, style in (("repeats", "-"), ("distinct", "--")):
        if ev.presence and budget == "distinct":
            break
        res = ev.budget(budget)
        for c in ev.flagged_classes:
            mine = res.costs[ev.decided == c]
            if len(mine) == 0:
                continue
            share = [((mine > 0) & (mine <= k)).mean() for k in steps]
            label = f"{c}, {'each token once' if ev.presence else budget.replace('repeats', 'repeats allowed').replace('distinct', 'distinct new tokens')}"
            ax.step(steps, share, where="post", color=colours[c], linestyle=style, linewidth=1.6, label=shown(label))
    ax.set_xlabel("tokens added")
    ax.set_ylabel("share of flagged messages let through")
    ax.set_ylim(0, 1.02)
    ax.set_xlim(0, ev.max_added)
    ax.grid(color="#dddddd", linewidth=0.5)
    ax.spines[["top", "right"]].set_visible(False)
    ax.legend(frameon=False, fontsize=8, loc="lower right")
    ax.set_title("Evasion cost: how few added tokens let flagged messages through", fontsize=10, loc="left")
    fig.text(0.01, -0.02, "Sensitive: shows what an attacker could add. Internal circulation only.", fontsize=7, color=INK)
    return png_bytes(fig)


def swap_grid(result: ProbeResult, group: str) -> bytes:
    sw = result.swaps
    terms = next(g.terms for g in sw.terms.groups if g.name == group)
    n = len(terms)
    grid = np.full((n, n), np.nan)
    count = np.zeros((n, n), dtype=int)
    where = {t: i for i, t in enumerate(terms)}
    for p in sw.pairs:
        if p.group == group:
            grid[where[p.source], where[p.target]] = p.mean_log_odds_shift
            count[where[p.source], where[p.target]] = p.messages
    flagged = [c for c in result.classes if c != result.normal_class]
    hot = line_colours(result.classes, result.normal_class)[flagged[0]]
    cmap = LinearSegmentedColormap.from_list("shift", [NEUTRAL.base, PAPER, hot]).with_extremes(bad=PAPER)
    limit = max(float(np.nanmax(np.abs(grid))) if np.isfinite(grid).any() else 0.0, 1e-9)
    size = max(3.0, 1.0 + 0.55 * n)  # room for the title and the colour bar's label even for two terms
    fig = Figure(figsize=(size + 1.6, size))
    ax = fig.add_subplot()
    image = ax.imshow(np.ma.masked_invalid(grid), cmap=cmap, vmin=-limit, vmax=limit)
    ax.set_xticks(range(n), [shown(t) for t in terms], rotation=45, ha="right", fontsize=8)
    ax.set_yticks(range(n), [shown(t) for t in terms], fontsize=8)
    ax.set_xlabel("replaced by")
    ax.set_ylabel("term in the message")
    for i in range(n):
        for j in range(n):
            if np.isfinite(grid[i, j]):
                face = to_hex(image.cmap(image.norm(grid[i, j])))
                ax.text(j, i, f"{grid[i, j]:+.2f}\n{count[i, j]}", ha="center", va="center", fontsize=6,
                        color=ink_on(face))  # WCAG 2.1 contrast on the cell's own colour
            else:  # the same term, or no message holds the row's term (untested)
                ax.text(j, i, "=" if i == j else "–", ha="center", va="center", fontsize=6, color=NEUTRAL.shade(1.0))
    bar = fig.colorbar(image, ax=ax, fraction=0.046, pad=0.04)
    bar.set_label("mean flag log-odds shift (+ toward flagging)", fontsize=8)
    ax.set_title(f"Term swaps: {shown(group)}\n(cells: mean shift, messages; – untested)", fontsize=10, loc="left")
    return png_bytes(fig)


def draw_all(result: ProbeResult) -> dict[str, bytes]:
    """File name -> PNG bytes of every picture the result supports."""
    pictures = {}
    if result.evasion is not None:
        pictures["evasion-cost.png"] = evasion_curve(result)
    if result.swaps is not None:
        for g in result.swaps.groups:
            if g.swaps:
                pictures[f"term-swaps-{_slug(g.group)}.png"] = swap_grid(result, g.group)
    return pictures
