"""Figures as text: one function per kind of figure, for every screen, page and picture.

The glossary's rules (``docs/glossary.md``, "How intervals are shown"):

- a percentage carries one decimal, two below 1 % where the small rates an
  auditor reads live: ``93.7 %``, ``0.42 %``;
- a proportion with its interval: the estimate, then the interval in round
  brackets with "to", in the estimate's unit: ``93.7 % (90.6 to 95.8)``; a
  proportion of nothing is ``undefined (0 of 0)``;
- values that are not percentages (AUC, average precision, Brier score)
  carry four decimals;
- counts carry thousands separators: ``1,204``;
- counts per 10,000 (of a named population): rounded to what their interval
  supports, to the place of the second significant digit of the interval's
  width, never finer than two decimals (:func:`per_10000`): ``239.2 (166.0 to
  343.1)`` is shown ``240 (170 to 340)``, ``8.12 (4.87 to 13.4)`` stays ``8.1
  (4.9 to 13.4)``; a figure with no width is shown whole;
- a threshold to be typed back (``--threshold-log-odds``) keeps every digit
  (:func:`exact`, terminals and JSON); pages show it to six significant
  figures (:func:`threshold`).

Terminals write the space before ``%`` as a plain space; printed pages pass
``space=NBSP`` so that a figure, its unit and its interval never part across
lines. A missing figure (None, NaN) is :data:`MISSING`.
"""

from __future__ import annotations

import math

#: A no-break space: a figure, its unit and its interval never part across lines on a page.
NBSP = "\u00a0"
#: What a missing figure (None, NaN, infinite) is written as.
MISSING = "–"
#: The text of a proportion whose denominator is 0.
UNDEFINED = "undefined (0 of 0)"
#: The finest step a count per 10,000 is ever shown to.
FINEST_STEP = 0.01
#: Significant figures of a threshold on a page (the JSON twin holds every digit).
THRESHOLD_DIGITS = 6


def _missing(x) -> bool:
    return x is None or not math.isfinite(x)


def percent_digits(*shares: float) -> int:
    """Decimals of a percentage: 1, or 2 when any of ``shares`` is below 1 % (0.01)."""
    return 2 if any(abs(100 * s) < 1 for s in shares if not _missing(s)) else 1


def percent(x: float | None, digits: int | None = None, *, space: str = " ") -> str:
    """``0.937 -> "93.7 %"``, ``0.0042 -> "0.42 %"`` (``digits`` fixes the decimals)."""
    if _missing(x):
        return MISSING
    d = percent_digits(x) if digits is None else digits
    return f"{100 * x:.{d}f}{space}%"


def interval(value: float | None, low: float, high: float, denominator: int = 1, digits: int | None = None,
             *, space: str = " ") -> str:
    """A proportion with its interval, ``93.7 % (90.6 to 95.8)``; :data:`UNDEFINED` over no messages.

    The decimals follow the smaller of the estimate and its lower bound, so
    that both ends of a small rate are told apart.
    """
    if denominator == 0 or _missing(value):
        return UNDEFINED
    d = percent_digits(min(value, low)) if digits is None else digits
    lo, hi = f"{100 * low:.{d}f}", f"{100 * high:.{d}f}"
    return f"{100 * value:.{d}f}{space}%{space}({lo}{space}to{space}{hi})"


def rate(r, digits: int | None = None, *, space: str = " ") -> str:
    """A rate object (``value, low, high, denominator``: an ``analysis.rates.Rate`` or its JSON dict)."""
    if r is None:
        return UNDEFINED
    get = r.get if isinstance(r, dict) else lambda name: getattr(r, name)
    return interval(get("value"), get("low"), get("high"), get("denominator"), digits, space=space)


def rate_with_counts(r, *, space: str = " ") -> str:
    """A rate and what it counts: ``93.7 % (90.6 to 95.8); 412 of 440``."""
    if r is None or r.denominator == 0:
        return UNDEFINED
    return f"{rate(r, space=space)}; {count(r.numerator)} of {count(r.denominator)}"


def count(n) -> str:
    """A count with thousands separators, ``1,204``; a count that is not whole keeps two decimals."""
    if _missing(n):
        return MISSING
    n = float(n)
    return f"{int(n):,}" if n == int(n) else f"{n:,.2f}"


def decimal(x: float | None, digits: int = 4) -> str:
    """A value that is not a percentage (AUC, average precision, Brier score): four decimals."""
    return MISSING if _missing(x) else f"{x:.{digits}f}"


def estimate(value: float, low: float, high: float, digits: int = 1) -> str:
    """A number with its interval in its own unit, ``12.3 (9.8 to 15.6)`` (projected counts)."""
    if _missing(value):
        return MISSING
    return f"{value:.{digits}f} ({low:.{digits}f} to {high:.{digits}f})"


def exact(x: float | None) -> str:
    """A threshold log-odds with every digit, as typed back to ``--threshold-log-odds`` (Python's ``repr``)."""
    return MISSING if x is None else repr(float(x))


def level(confidence: float, *, space: str = " ") -> str:
    """A confidence level or a user's target as a percentage without trailing zeros: ``95 %``, ``0.5 %``."""
    return f"{100 * confidence:g}{space}%"


def per_10000_step(low: float, high: float) -> float:
    """The rounding step an interval ``[low, high]`` supports: the second significant digit of its width."""
    width = abs(high - low)
    if not math.isfinite(width) or width == 0:
        return 1.0
    return max(10.0 ** (math.floor(math.log10(width)) - 1), FINEST_STEP)


def rounded(x: float, step: float) -> str:
    """``x`` rounded to a multiple of ``step`` (a power of ten), with the decimals that step needs."""
    if _missing(x):
        return MISSING
    decimals = max(0, -math.floor(math.log10(step) + 1e-9))
    return f"{round(x / step) * step:,.{decimals}f}"


def per_10000(value: float, low: float, high: float) -> tuple[str, str, str]:
    """``(value, low, high)`` of a count per 10,000, each rounded to the step its interval supports."""
    step = per_10000_step(low, high)
    return rounded(value, step), rounded(low, step), rounded(high, step)


def per_10000_text(value: float, low: float, high: float, space: str = " ") -> str:
    """A count per 10,000 in the glossary's interval style: ``240 (170 to 340)``."""
    v, lo, hi = per_10000(value, low, high)
    return f"{v}{space}({lo}{space}to{space}{hi})"


def threshold(x: float | None) -> str:
    """A threshold log-odds on a page: :data:`THRESHOLD_DIGITS` significant figures (``-5.14526``)."""
    if _missing(x):
        return MISSING
    return f"{x:.{THRESHOLD_DIGITS}g}"


def p_value(x: float | None) -> str:
    """A p-value to three significant figures, never rounded to 0: ``0.0142``, ``2.8e-05``; untested is a dash."""
    return MISSING if _missing(x) else f"{x:.3g}"
