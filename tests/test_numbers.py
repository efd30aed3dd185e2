"""Counts per 10,000 rounded to what their interval supports; thresholds to 6 significant figures on pages.

The rule is the glossary's (``docs/glossary.md``, *per 10,000*): the place of the
second significant digit of the interval's width (common practice, no source).
"""

import math

from hypothesis import given
from hypothesis import strategies as st

from explain.present import numbers


def test_the_glossary_examples():
    # the figures: 239 (166 to 343), 234.1 (162.5 to 336.3), 8.1 (4.9 to 13.4)
    assert numbers.per_10000_text(239.2, 166.0, 343.1) == "240 (170 to 340)"
    assert numbers.per_10000_text(234.1, 162.5, 336.3) == "230 (160 to 340)"
    assert numbers.per_10000_text(8.12, 4.87, 13.4) == "8.1 (4.9 to 13.4)"
    assert numbers.per_10000_text(2361.5, 2100.2, 2600.9) == "2,360 (2,100 to 2,600)"
    assert numbers.per_10000_text(12.0, 12.0, 12.0) == "12 (12 to 12)"  # a point: whole


@given(st.floats(0, 10_000), st.floats(0, 5_000), st.floats(0, 5_000))
def test_rounding_keeps_the_figure_within_half_a_step_and_the_step_below_the_width(value, below, above):
    low, high = max(value - below, 0.0), value + above
    step = numbers.per_10000_step(low, high)
    shown = float(numbers.per_10000(value, low, high)[0].replace(",", ""))
    assert abs(shown - value) <= step / 2 + 1e-9 * max(1.0, value)
    width = high - low
    if width > 0:
        assert step >= numbers.FINEST_STEP - 1e-12
        assert step <= max(width / 10, numbers.FINEST_STEP) + 1e-12  # two significant digits of the width at least
        assert step == numbers.FINEST_STEP or step > width / 100 - 1e-12  # and no more than two


@given(st.floats(-1e6, 1e6, allow_nan=False).filter(lambda x: x != 0))
def test_thresholds_on_pages_have_six_significant_figures(x):
    shown = numbers.threshold(x)
    assert float(shown) == float(f"{x:.6g}")
    assert math.isclose(float(shown), x, rel_tol=5e-6)


def test_a_p_value_is_never_rounded_to_zero():
    # the issue: "adjusted p-value 0.0000" read as certainty; three significant figures (common practice, no source)
    assert numbers.p_value(2.83e-05) == "2.83e-05" and numbers.p_value(0.01423) == "0.0142"
    assert numbers.p_value(None) == numbers.MISSING and numbers.p_value(float("nan")) == numbers.MISSING
