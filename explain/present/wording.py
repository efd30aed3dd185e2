"""Numbers and counts as people say them, for screens, letters and printed pages.

- Probabilities near 0 or 1 keep their distance from certainty: ``"1 - 5.4e-13"``
  (from the exact complement), ``"> 0.9999"`` (when only the rounded value is
  known), ``"3.1e-07"``; in between, four decimals.
- Odds factors (from a natural-log amount, so that huge ones never overflow):
  ``"x117"`` up to a million, beyond that ``"about 10^194 to 1"``.
- Counts with the right noun: ``plural(1, "word") == "1 word"``,
  ``plural(2, "entry", "entries") == "2 entries"``.
"""

from __future__ import annotations

import math

from scipy.special import expit

from explain.present.token_display import shown

#: Probabilities closer than this to 0 or 1 are written by their distance from it.
NEAR = 1e-4
#: Odds factors up to this are written as ``x117``; beyond, as a power of ten.
MILLION = 1e6
#: The flip sentence names at most this many words.
FLIP_SHOWN = 20


def plural(n: int, noun: str, plural_form: str | None = None) -> str:
    """``"1 word"``, ``"2 words"``, ``"1,204 entries"``."""
    word = noun if n == 1 else (plural_form or noun + "s")
    return f"{n:,} {word}"


def probability(p: float, complement: float | None = None) -> str:
    """A probability a person can say, never rounded to certainty.

    ``complement`` is ``1 - p`` computed exactly elsewhere (for instance
    ``expit(-log_odds)``); without it, values rounded to 1 read ``"> 0.9999"``.
    """
    if p >= 1 - NEAR:
        if complement is not None and 0 < complement <= NEAR:
            return f"1 - {complement:.2g}"
        return f"> {1 - NEAR:.4f}"
    if p <= NEAR:
        return f"{p:.2g}" if p > 0 else f"< {NEAR:g}"
    return f"{p:.4f}"


def stated(name: str, value: str) -> str:
    """``"P(flag) = 0.7479"``, but ``"P(flag) > 0.9999"``: a bound is said with its own sign, never ``= >``."""
    return f"{name} {value}" if value[:1] in "<>" else f"{name} = {value}"


def probability_of_log_odds(log_odds: float) -> str:
    """The probability of a side whose log-odds (natural log) is ``log_odds``."""
    return probability(float(expit(log_odds)), float(expit(-log_odds)))


def odds_factor(log_factor: float) -> str:
    """How many times an amount multiplies the odds of the side it favours.

    ``log_factor`` is the amount in natural-log units (its sign is ignored:
    the caller names the side). ``"x1.5"``, ``"x117"``, ``"about 10^194 to 1"``.
    """
    size = abs(log_factor)
    if not math.isfinite(size):
        return "beyond any number"
    if size <= math.log(MILLION):
        factor = math.exp(size)
        return f"x{factor:.3g}" if factor < 10 else f"x{factor:,.0f}"
    return f"about 10^{round(size / math.log(10))} to 1"


def amount(x: float) -> str:
    """A signed ledger amount: ``"+2.02"``, ``"-0.48"``."""
    return f"{x:+.2f}"


def folded(count: int, total: float) -> str:
    """The line that stands for the entries not shown: ``"212 smaller entries: +3.10"``."""
    return f"{plural(count, 'smaller entry', 'smaller entries')}: {amount(total)}"


def flip_sentence(flip, limit: int = FLIP_SHOWN) -> str:
    """The flip set of :class:`explain.analysis.evidence.FlipSet` in plain words."""
    if not flip.removals:
        reason = flip.reason or "no removal of words changes it"
        return f"{reason[0].upper()}{reason[1:]}."
    names = [f"'{shown(t)}'" + (f" ({plural(n, 'time')})" if n > 1 else "") for t, n in flip.removals[:limit]]
    more = len(flip.removals) - limit
    if more > 0:
        names.append(plural(more, "more word"))
    listed = names[0] if len(names) == 1 else ", ".join(names[:-1]) + " and " + names[-1]
    how = (
        "no smaller set does"
        if flip.exact
        else "found by removing words one at a time and re-scoring, so a smaller set may exist"
    )
    return f"Removing {listed} would change the decision to {flip.new_decision}; {how}."
