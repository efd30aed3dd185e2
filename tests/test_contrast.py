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


def _figures_of_a_full_report(monkeypatch, folder):
    """Every matplotlib figure a report with slices, a probe and term swaps draws (demo corpus, a fresh filter)."""
    import pandas as pd
    import skops.io as sio
    from sklearn.feature_extraction.text import CountVectorizer
    from sklearn.naive_bayes import MultinomialNB
    from sklearn.pipeline import Pipeline

    from explain.analysis import slices
    from explain.analysis.report_contents import build_report
    from explain.model.data_io import read_messages
    from explain.model.loading import load_model
    from explain.present import assess_pictures, probe_pictures, report_pages, vocab_pictures

    figures = []
    for module in (assess_pictures, probe_pictures, vocab_pictures):
        monkeypatch.setattr(module, "png_bytes", lambda fig: figures.append(fig) or b"")
    frame = pd.read_csv(ROOT / "demo_corpus" / "messages.csv", dtype=str, keep_default_na=False)
    pipeline = Pipeline([("v", CountVectorizer()), ("nb", MultinomialNB())]).fit(frame.text[:3000], frame.label[:3000])
    sio.dump(pipeline, folder / "filter.skops")
    frame.iloc[3000:4000].to_csv(folder / "test.csv", index=False)
    data = read_messages(folder / "test.csv", "text", "label")
    built = build_report(load_model(folder / "filter.skops", normal_class="ok"), data=data,
                         slices=[slices.by_length(data.texts)], probe_evasion=True,
                         swap_terms=ROOT / "demo_corpus" / "examples" / "swap_terms.txt")
    report_pages.draw_pictures(built)
    return figures


def test_every_text_drawn_in_the_pictures_passes_on_what_lies_under_it(monkeypatch, tmp_path):
    # each picture drawn, its texts measured, then drawn again without them: the colour under a text is the
    # commonest pixel of its box (a heat-map cell, a legend, the paper); its ink must pass 4.5:1 on it
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.text import Text

    figures = _figures_of_a_full_report(monkeypatch, tmp_path)
    assert len(figures) >= 9  # confusion, ROC, PR, reliability, scores, slices, bars, evasion, term swaps
    checked = 0
    for fig in figures:
        canvas = FigureCanvasAgg(fig)
        canvas.draw()
        texts = [t for t in fig.findobj(Text) if t.get_visible() and t.get_text().strip()]
        boxes = [t.get_window_extent(canvas.get_renderer()) for t in texts]
        for t in texts:
            t.set_visible(False)
        canvas.draw()
        pixels = np.asarray(canvas.buffer_rgba())[..., :3]
        height, width = pixels.shape[:2]
        for text, box in zip(texts, boxes):
            x0, x1 = max(0, int(box.x0)), min(width, int(np.ceil(box.x1)))
            y0, y1 = max(0, height - int(np.ceil(box.y1))), min(height, height - int(box.y0))
            region = pixels[y0:y1, x0:x1].reshape(-1, 3)
            if len(region):
                colours, counts = np.unique(region, axis=0, return_counts=True)
                under = to_hex(colours[counts.argmax()] / 255)
            else:  # drawn outside the figure's box (a footer): on the figure's own paper
                under = to_hex(fig.get_facecolor())
            assert (text.get_alpha() or 1.0) == 1.0, text.get_text()
            ratio = wcag_contrast(to_hex(text.get_color()), under)
            assert ratio >= LEAST, (text.get_text(), to_hex(text.get_color()), under, round(ratio, 2))
            checked += 1
    assert checked > 200
