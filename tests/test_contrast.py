"""Every text at least 4.5:1 against its background (WCAG 2.1, success criterion 1.4.3), pictures included.

The contrast ratio is WCAG 2.1's: ``(L1 + 0.05) / (L2 + 0.05)`` of the relative
luminances, each channel linearised as ``c / 12.92`` below 0.04045 and
``((c + 0.055) / 1.055) ** 2.4`` above (W3C, Web Content Accessibility Guidelines
2.1, definitions of "contrast ratio" and "relative luminance"). The formula is
written out again here, independently of :mod:`explain.present.drawing`.
"""

import itertools
import re
from pathlib import Path

import numpy as np
import pytest
from matplotlib.colors import to_hex, to_rgb

from explain.present import drawing, tint

ROOT = Path(__file__).resolve().parents[1]
LEAST = 4.5


def wcag_contrast(a: str, b: str) -> float:
    def luminance(colour):
        linear = [c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4 for c in to_rgb(colour)]
        return 0.2126 * linear[0] + 0.7152 * linear[1] + 0.0722 * linear[2]

    high, low = sorted((luminance(a), luminance(b)), reverse=True)
    return (high + 0.05) / (low + 0.05)


def test_the_formula_on_the_standards_reference_points():
    # black on white is 21:1 and equal colours 1:1 by the definition; #767676 on white is the lightest grey
    # passing 4.5:1 and #777777 fails (4.48:1), values from memory, widely quoted with the standard
    assert drawing.contrast_ratio("#000000", "#ffffff") == pytest.approx(21.0)
    assert drawing.contrast_ratio("#3b4347", "#3b4347") == pytest.approx(1.0)
    assert drawing.contrast_ratio("#767676", "#ffffff") >= 4.5 > drawing.contrast_ratio("#777777", "#ffffff")
    for a, b in itertools.combinations(["#000000", "#ffffff", "#e5801a", "#6b7378", "#a60111", "#5aa8de"], 2):
        assert drawing.contrast_ratio(a, b) == pytest.approx(wcag_contrast(a, b), rel=1e-12)


def test_ink_on_any_background_passes():
    # every cell of a picture (confusion matrix, term-swap heat map) takes ink_on(its colour): over a dense
    # sample of all sRGB colours the chosen ink passes, so no colour map can give unreadable numbers
    levels = np.linspace(0, 1, 17)
    worst = min(wcag_contrast(drawing.ink_on(to_hex(c)), to_hex(c)) for c in itertools.product(levels, repeat=3))
    assert worst >= LEAST
    # the case: black numbers on the heat map's dark grey would fail, the chosen ink does not
    dark_grey = drawing.NEUTRAL.base
    assert wcag_contrast(drawing.INK, drawing.NEUTRAL.shade(1.0)) < LEAST
    assert wcag_contrast(drawing.ink_on(dark_grey), dark_grey) >= LEAST


def test_text_drawn_in_palette_colours_passes_on_paper():
    # fixed text colours of the pictures: ink, the neutral grey (notes, "no token points to ..."), its dark shade
    for colour in (drawing.INK, drawing.NEUTRAL.base, drawing.NEUTRAL.shade(1.0)):
        assert wcag_contrast(colour, drawing.PAPER) >= LEAST, colour
    # word-cloud words: a family's shade, darkened as far as needed
    for family in (*drawing.PALETTE, drawing.NEUTRAL):
        for strength in np.linspace(0, 1, 21):
            assert wcag_contrast(drawing.text_shade(family, strength), drawing.PAPER) >= LEAST, (family, strength)
    # and the raw light shades would not have passed: the check can fail
    assert wcag_contrast(drawing.PALETTE[0].shade(0.25), drawing.PAPER) < LEAST


def test_ledger_tints_pass():
    for family in (*drawing.PALETTE, drawing.NEUTRAL):
        for size in (0.1, 0.5, 0.9):
            for direction in ("credit", "debit"):
                t = tint.tint(direction, family, size, 1.0)
                assert wcag_contrast(t.foreground, t.background) >= LEAST, (family.name, size, t)


STYLESHEETS = [ROOT / "templates" / "report.css", ROOT / "templates" / "ledger.css"]
STYLED_TEMPLATES = [ROOT / "templates" / "compare.html.j2", ROOT / "templates" / "sheet.html.j2"]


def _rules(text: str):
    text = re.sub(r"/\*.*?\*/", "", text, flags=re.S)
    for selector, body in re.findall(r"([^{}]+)\{([^{}]*)\}", text):
        yield selector.strip(), body


def _hex(value: str) -> str | None:
    found = re.search(r"#[0-9a-fA-F]{3,6}\b", value)
    return None if found is None else to_hex(found.group(0))


def test_every_text_colour_of_the_stylesheets_passes_on_every_background_they_use():
    sources = [p.read_text(encoding="utf-8") for p in STYLESHEETS]
    sources += [m for p in STYLED_TEMPLATES for m in re.findall(r"<style>(.*?)</style>", p.read_text(encoding="utf-8"), re.S)]
    texts, backgrounds = [], {"#ffffff"}
    for source in sources:
        for selector, body in _rules(source):
            declarations = dict(
                (k.strip(), v.strip()) for k, _, v in (d.partition(":") for d in body.split(";")) if v.strip()
            )
            if "0.1pt" in declarations.get("font-size", ""):
                continue  # the running header's hidden copy (string-set), never seen
            background = _hex(declarations.get("background", "") or declarations.get("background-color", ""))
            if background is not None and selector.split()[0] != "html":  # html's screen margin holds no text
                backgrounds.add(background)
            colour = _hex(declarations.get("color", ""))
            if colour is not None:
                texts.append((selector, colour, background))
    assert len(texts) > 15 and len(backgrounds) >= 4  # the parse found the sheets' colours
    for selector, colour, own_background in texts:
        for background in ([own_background] if own_background else sorted(backgrounds)):
            assert wcag_contrast(colour, background) >= LEAST, (selector, colour, background)
