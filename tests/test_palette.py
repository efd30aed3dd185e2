"""The class palette under simulated colour-vision deficiencies.

Outside reference: the ``colorspacious`` package (maintained colour-science
library), whose ``sRGB1+CVD`` space implements Machado, Oliveira & Fernandes
2009, "A physiologically-based model for simulation of color vision
deficiency", IEEE TVCG 15(6); severity 100 is full dichromacy (protanopia,
deuteranopia, tritanopia). Distances are CIE76 Delta E in colorspacious's
CIELab (D65).
"""

import itertools

import numpy as np
import pytest
from matplotlib.colors import to_rgb

from explain.present import drawing

colorspacious = pytest.importorskip("colorspacious")

SIMULATIONS = (None, "protanomaly", "deuteranomaly", "tritanomaly")


def _lab(hex_colour, deficiency=None):
    rgb = np.array(to_rgb(hex_colour))
    if deficiency is not None:
        space = {"name": "sRGB1+CVD", "cvd_type": deficiency, "severity": 100}
        rgb = np.clip(colorspacious.cspace_convert(rgb, space, "sRGB1"), 0, 1)
    return colorspacious.cspace_convert(rgb, "sRGB1", "CIELab")


@pytest.mark.parametrize("deficiency", SIMULATIONS)
def test_every_pair_shown_together_stays_apart(deficiency):
    colours = drawing.shown_together()
    for (a, ca), (b, cb) in itertools.combinations(colours.items(), 2):
        distance = float(np.linalg.norm(_lab(ca, deficiency) - _lab(cb, deficiency)))
        assert distance >= drawing.MIN_DISTANCE, (deficiency or "normal vision", a, b, round(distance, 1))


@pytest.mark.parametrize("classes, normal", [
    (("advert", "ok", "scam"), "ok"),
    (("ok", "scam"), "ok"),
    (("a", "b", "c", "d", "ok"), "ok"),
    (("a", "b", "c", "d", "e", "f"), None),
])
def test_line_colours_come_from_the_checked_set(classes, normal):
    """Every colour a picture draws lines in (classes, "flagged", rest, marks) is one the test above checks."""
    checked = set(drawing.shown_together().values())
    lines = drawing.line_colours(classes, normal)
    assert set(lines.values()) <= checked
    assert set(lines) == set(classes) | {"rest", "flagged"}
    flagged = [c for c in classes if c != normal]
    if len(flagged) > 1 and len(flagged) < len(drawing.PALETTE):
        # "flagged" drawn beside each flagged class must differ from all of them.
        assert lines["flagged"] not in {lines[c] for c in flagged}


def test_the_old_crimson_was_the_weak_pair():
    """Why the crimson went: under protanopia it came within the limit of the slate grey."""
    distance = np.linalg.norm(_lab("#a3162a", "protanomaly") - _lab(drawing.NEUTRAL.base, "protanomaly"))
    assert distance < drawing.MIN_DISTANCE


def test_normal_class_and_rest_are_drawn_neutral_and_shades_darken():
    colours = drawing.class_colours(("advert", "ok", "scam"), "ok")
    assert colours["ok"] is drawing.NEUTRAL and colours["rest"] is drawing.NEUTRAL
    assert colours["advert"] is drawing.PALETTE[0] and colours["scam"] is drawing.PALETTE[1]
    for family in drawing.PALETTE:
        lightness = [_lab(family.shade(s))[0] for s in np.linspace(0, 1, 6)]
        assert all(np.diff(lightness) < 0)
