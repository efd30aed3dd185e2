"""What every picture shares: the class palette and the PNG writer.

The palette
-----------
:data:`PALETTE` holds the colour families of the project's pictures, one per
flagged class; the normal class (and "rest") is drawn in :data:`NEUTRAL`,
marks over curves (operating points, the threshold in use) in :data:`INK`,
and "flagged" (all flagged classes together) in the family after the last
flagged class (:func:`line_colours`). Every colour that can share a picture
(:func:`shown_together`: paper white, ink, neutral and every palette base)
stays at least :data:`MIN_DISTANCE` CIELAB units (CIE76) from every other in
normal vision and in the protanopia, deuteranopia and tritanopia
simulations of Machado, Oliveira & Fernandes 2009, "A physiologically-based
model for simulation of color vision deficiency", IEEE TVCG 15(6), at
severity 1 (the tests check this with the ``colorspacious`` package's
implementation of that model). With more than five flagged classes the
families repeat. Lighter and darker shades of a family come from mixing its
base with white or black (:meth:`ColourFamily.shade`).

Text contrast
-------------
Every text, in pictures as on pages, has a contrast of at least
:data:`MIN_TEXT_CONTRAST` (4.5:1) with its background: WCAG 2.1, success
criterion 1.4.3, with the contrast ratio ``(L1 + 0.05) / (L2 + 0.05)`` of the
relative luminances (:func:`relative_luminance`, the formula of WCAG 2.1's
definition of relative luminance). Text on a coloured cell takes the ink
(:func:`ink_on`) that contrasts most, which always passes (the worst case,
a background of luminance 0.179, still gives 4.58:1); text drawn *in* a
family's colour takes the lightest shade that passes (:func:`text_shade`).
"""

from __future__ import annotations

import io
from dataclasses import dataclass

import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.colors import to_hex, to_rgb
from matplotlib.figure import Figure

from explain.analysis.vocab import REST

DPI = 200


@dataclass(frozen=True)
class ColourFamily:
    """A named base colour and the shades made from it."""

    name: str
    base: str

    def shade(self, strength: float) -> str:
        """A shade from light (``strength`` 0: base mixed half with white) to dark (1: a third black)."""
        strength = float(np.clip(strength, 0.0, 1.0))
        rgb = np.array(to_rgb(self.base))
        light, dark = rgb + 0.5 * (1.0 - rgb), rgb * (2.0 / 3.0)
        # light -> base over the first half, base -> dark over the second
        if strength < 0.5:
            mixed = light + (rgb - light) * (strength / 0.5)
        else:
            mixed = rgb + (dark - rgb) * ((strength - 0.5) / 0.5)
        return to_hex(mixed)


PALETTE = (
    ColourFamily("ember orange", "#e5801a"),
    ColourFamily("heather purple", "#8c2fc0"),
    # A crimson (#a3162a) came within 28 units of the slate grey under protanopia: a purer red instead.
    ColourFamily("signal red", "#a60111"),
    ColourFamily("sky blue", "#5aa8de"),
    ColourFamily("sand", "#c4a27c"),
)
NEUTRAL = ColourFamily("slate grey", "#6b7378")
INK = "#000000"
PAPER = "#ffffff"
MIN_DISTANCE = 28.0
#: WCAG 2.1 SC 1.4.3 (level AA): the least contrast ratio of text on its background.
MIN_TEXT_CONTRAST = 4.5


def relative_luminance(colour: str) -> float:
    """WCAG 2.1 relative luminance of an sRGB colour: 0 for black, 1 for white.

    Each channel ``c`` in 0..1 is linearised as ``c / 12.92`` when ``c <= 0.04045``, else
    ``((c + 0.055) / 1.055) ** 2.4``; then ``L = 0.2126 R + 0.7152 G + 0.0722 B``.
    """
    r, g, b = (c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4 for c in to_rgb(colour))
    return 0.2126 * r + 0.7152 * g + 0.0722 * b


def contrast_ratio(a: str, b: str) -> float:
    """WCAG 2.1 contrast ratio of two colours, from 1 (equal) to 21 (black on white)."""
    la, lb = sorted((relative_luminance(a), relative_luminance(b)), reverse=True)
    return (la + 0.05) / (lb + 0.05)


def ink_on(background: str, inks: tuple[str, ...] = (INK, PAPER)) -> str:
    """The ink of ``inks`` that contrasts most with ``background`` (black or white by default)."""
    return max(inks, key=lambda ink: contrast_ratio(ink, background))


def text_shade(family: "ColourFamily", strength: float, background: str = PAPER) -> str:
    """``family.shade(strength)``, darkened just enough for text on ``background`` to pass 4.5:1."""
    for step in np.linspace(float(np.clip(strength, 0.0, 1.0)), 1.0, 41):
        colour = family.shade(step)
        if contrast_ratio(colour, background) >= MIN_TEXT_CONTRAST:
            return colour
    return ink_on(background)


def class_colours(classes, normal_class: str | None = None) -> dict[str, ColourFamily]:
    """Colour family of each class (and of ``"rest"``): the normal class is neutral."""
    flagged = [c for c in classes if c != normal_class]
    colours = {c: PALETTE[i % len(PALETTE)] for i, c in enumerate(flagged)}
    if normal_class is not None:
        colours[normal_class] = NEUTRAL
    colours[REST] = NEUTRAL
    return colours


def line_colours(classes, normal_class: str | None = None) -> dict[str, str]:
    """Base colour of each class, of ``"rest"`` and of ``"flagged"`` (every flagged class together).

    With one flagged class, "flagged" is that class; with more, it takes the
    next unused family, or ink when every family is taken.
    """
    from explain.analysis.assessment import FLAGGED

    colours = {name: family.base for name, family in class_colours(classes, normal_class).items()}
    flagged = [c for c in classes if c != normal_class]
    if len(flagged) == 1:
        colours[FLAGGED] = colours[flagged[0]]
    else:
        colours[FLAGGED] = PALETTE[len(flagged)].base if len(flagged) < len(PALETTE) else INK
    return colours


def shown_together() -> dict[str, str]:
    """Name -> colour of everything that can share one picture (what the palette must keep apart)."""
    return {"paper": PAPER, "ink": INK, NEUTRAL.name: NEUTRAL.base, **{f.name: f.base for f in PALETTE}}


def png_bytes(fig: Figure) -> bytes:
    FigureCanvasAgg(fig)
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=DPI, bbox_inches="tight", metadata={"Software": None})
    return buffer.getvalue()
