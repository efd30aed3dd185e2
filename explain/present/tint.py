"""How an entry is tinted and marked, the same on the terminal, in HTML and on paper.

An entry is drawn in the colour family of the class it pushes toward
(:func:`explain.present.drawing.class_colours`: the normal class is the
neutral grey), darker for stronger evidence, and always carries a mark that
needs no colour: ``▲`` for a credit, ``▼`` for a debit, ``·`` for an entry of
exactly 0. Strength has three levels by the entry's evidence per occurrence
against the largest in the message (below a third, below two thirds,
above); where colours cannot show lightness (16-colour terminals turn light
shades into bright colours that read *stronger*), the levels are shown by
type weight instead: faint, plain, bold.
"""

from __future__ import annotations

from dataclasses import dataclass

from explain.present.drawing import ColourFamily, ink_on

MARKS = {"credit": "▲", "debit": "▼", "even": "·"}
LEVEL_NAMES = ("weak", "medium", "strong")
# Where in a family's range (0 light .. 1 dark) each level sits.
_SHADES = (0.15, 0.55, 0.95)
#: The text colours an entry may take on its tint: black or white (a near-black fails on some mid shades).
TEXT_INKS = ("#000000", "#ffffff")


@dataclass(frozen=True)
class Tint:
    """One entry's look: its mark, strength level, background and text colours (hex)."""

    mark: str
    level: int
    background: str
    foreground: str

    @property
    def level_name(self) -> str:
        return LEVEL_NAMES[self.level]


def level(size: float, largest: float) -> int:
    """0, 1 or 2: the strength of ``size`` against the ``largest`` in the message."""
    share = abs(size) / largest if largest > 0 else 0.0
    return 0 if share < 1 / 3 else 1 if share < 2 / 3 else 2


def tint(direction: str, family: ColourFamily, size: float, largest: float) -> Tint:
    """The tint of an entry pushing toward a class drawn in ``family``."""
    n = level(size, largest)
    background = family.shade(_SHADES[n])
    # WCAG 2.1 contrast: the text colour that reads best on the shade (at least 4.5:1, checked in the tests).
    return Tint(MARKS[direction], n, background, ink_on(background, TEXT_INKS))


def heat_runs(heat, largest: float) -> list[tuple[int, int, str, int, float]]:
    """Runs of characters with the same direction and strength level in a character heat.

    ``heat`` is :meth:`explain.analysis.ledger.Ledger.character_heat`; returns
    ``(start, end, direction, level, size)`` for each run of non-zero heat,
    ``size`` being the largest absolute heat in the run.
    """
    runs: list[tuple[int, int, str, int, float]] = []
    for i, h in enumerate(heat):
        if h == 0:
            continue
        direction, n = ("credit" if h > 0 else "debit"), level(h, largest)
        if runs and runs[-1][1] == i and runs[-1][2:4] == (direction, n):
            a, _, d, k, size = runs[-1]
            runs[-1] = (a, i + 1, d, k, max(size, abs(h)))
        else:
            runs.append((i, i + 1, direction, n, abs(h)))
    return runs
