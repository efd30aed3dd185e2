"""What every picture shares: the class palette and the PNG writer.

The palette
-----------
:data:`PALETTE` holds the colour families of the project's pictures, one per
class; the normal class (and "rest") is drawn in :data:`NEUTRAL`. The base
colours were chosen so that every pair, and each against white, stays at
least 27 CIELAB units apart (CIE76) in normal vision and in the protanopia,
deuteranopia and tritanopia simulations of Machado, Oliveira & Fernandes
2009, "A physiologically-based model for simulation of color vision
deficiency", IEEE TVCG 15(6) (severity 1). With more than five flagged
classes the families repeat. Lighter and darker shades of a family come from
mixing its base with white or black (:meth:`ColourFamily.shade`).
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
    ColourFamily("crimson", "#a3162a"),
    ColourFamily("sky blue", "#5aa8de"),
    ColourFamily("sand", "#c4a27c"),
)
NEUTRAL = ColourFamily("slate grey", "#6b7378")


def class_colours(classes, normal_class: str | None = None) -> dict[str, ColourFamily]:
    """Colour family of each class (and of ``"rest"``): the normal class is neutral."""
    flagged = [c for c in classes if c != normal_class]
    colours = {c: PALETTE[i % len(PALETTE)] for i, c in enumerate(flagged)}
    if normal_class is not None:
        colours[normal_class] = NEUTRAL
    colours[REST] = NEUTRAL
    return colours


def png_bytes(fig: Figure) -> bytes:
    FigureCanvasAgg(fig)
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=DPI, bbox_inches="tight", metadata={"Software": None})
    return buffer.getvalue()
