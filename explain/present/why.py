"""Presenting an :class:`~explain.analysis.evidence.Explanation`: terminal and JSON.

Nothing here computes a score; every figure comes from the explanation.

JSON schema (``nbledger why --format json``), schema version 1:

=====================  ==========================================================
key                    meaning
=====================  ==========================================================
``schema``             ``"nbledger.why/1"``
``model``              ``{path, sha256}`` of the model file
``classes``            class labels in the model's order
``predicted``          most probable class (scikit-learn's ``predict``)
``runner_up``          second most probable class
``probabilities``      class -> posterior probability (``predict_proba``)
``log_odds``           ``jll[predicted] - jll[runner_up]`` (natural log)
``baseline``           ``b[predicted] - b[runner_up]``: prior + absence evidence
``baseline_prior``     the log-prior part of ``baseline``
``baseline_absence``   BernoulliNB's absent-token part of ``baseline`` (else 0)
``threshold``          threshold on P(not normal), or null for argmax
``normal_class``       the class that lets a message through, or null
``flag_probability``   P(not normal), or null without a normal class
``decision``           the class decided under the threshold (or argmax)
``tokens``             list of ``{token, occurrences, value, per_unit, evidence,
                       odds_factor, spans}``; ``baseline + sum(evidence) ==
                       log_odds``; ``spans`` are ``[start, end)`` character
                       offsets into the message, ``null`` when unknown
``spans_note``         why spans are unknown, or null
``unknown_tokens``     list of ``{token, count}``: not in the vocabulary, no effect
``flip_set``           list of ``{token, occurrences}`` whose removal changes
                       the decision (empty when none can)
``flip_exact``         true when the flip set is the proven minimum
``flip_method``        ``"exact"`` or ``"greedy"``
``flip_decision``      the decision after the removals, or null
``flip_reason``        why the flip set is empty, or null
``feature_kind``       ``counts``, ``binary`` or ``tfidf``
``variant``            ``multinomial``, ``complement`` or ``bernoulli``
``email``              for a raw e-mail, what was read (``text_view``, redacted
                       ``subject`` and ``sender``, ``attachments``,
                       ``undecodable_parts``, ``problems``); null for plain text
=====================  ==========================================================
"""

from __future__ import annotations

import math

from rich.console import Console
from rich.table import Table
from rich.text import Text

from explain.analysis.evidence import Explanation
from explain.present.email_lines import email_header_lines, email_json
from explain.present.token_display import shown

SCHEMA = "nbledger.why/1"

# Our own two-hue scale, chosen to stay apart for the common colour-vision
# deficiencies: warm amber for evidence toward the predicted class, deep blue
# for evidence against it; three strengths each (weak, medium, strong).
TOWARD = ("#f6d8a8", "#eaa24b", "#b8610f")
AGAINST = ("#c9daf2", "#7da3d9", "#2f5c9e")
DISPLAY_LIMIT = 4000
FLIP_SHOWN = 20


def to_json(expl: Explanation, model=None) -> dict:
    """The documented JSON object of one explanation."""
    return {
        "schema": SCHEMA,
        "model": None if model is None else {"path": str(model.path), "sha256": model.sha256},
        "classes": list(expl.classes),
        "predicted": expl.predicted,
        "runner_up": expl.runner_up,
        "probabilities": {c: float(p) for c, p in zip(expl.classes, expl.probabilities)},
        "log_odds": expl.log_odds,
        "baseline": expl.baseline,
        "baseline_prior": expl.baseline_prior,
        "baseline_absence": expl.baseline_absence,
        "threshold": expl.threshold,
        "normal_class": expl.normal_class,
        "flag_probability": expl.flag_probability,
        "decision": expl.decision,
        "tokens": [
            {
                "token": t.token,
                "occurrences": t.occurrences,
                "value": t.value,
                "per_unit": t.per_unit,
                "evidence": t.evidence,
                "odds_factor": _finite(t.odds_factor),
                "spans": [list(s) for s in t.spans] if expl.spans_note is None else None,
            }
            for t in sorted(expl.tokens, key=lambda t: -abs(t.evidence))
        ],
        "spans_note": expl.spans_note,
        "unknown_tokens": [{"token": t, "count": n} for t, n in expl.unknown_tokens],
        "flip_set": [{"token": t, "occurrences": n} for t, n in expl.flip.removals],
        "flip_exact": expl.flip.exact,
        "flip_method": expl.flip.method,
        "flip_decision": expl.flip.new_decision,
        "flip_reason": expl.flip.reason,
        "feature_kind": expl.feature_kind,
        "variant": expl.variant,
        "email": email_json(expl.mail),
    }


def _finite(x: float) -> float | None:
    return x if math.isfinite(x) else None


def _strength(evidence: float, scale: float) -> int:
    share = abs(evidence) / scale if scale > 0 else 0
    return 0 if share < 1 / 3 else 1 if share < 2 / 3 else 2


def tinted_text(expl: Explanation, limit: int = DISPLAY_LIMIT) -> Text:
    """The message with each token's characters tinted by direction and strength."""
    shown = expl.text[:limit]
    text = Text(shown)
    if expl.spans_note is not None:
        return text
    scale = max((abs(t.evidence) / max(t.occurrences, 1) for t in expl.tokens), default=0.0)
    # Weaker first, so that where n-grams overlap the stronger tint is on top.
    for t in sorted(expl.tokens, key=lambda t: abs(t.evidence)):
        per_occurrence = t.evidence / max(t.occurrences, 1)
        palette = TOWARD if per_occurrence > 0 else AGAINST
        level = _strength(per_occurrence, scale)
        style = f"{'white' if level == 2 else 'black'} on {palette[level]}"
        for start, end in t.spans:
            if start < len(shown):
                text.stylize(style, start, min(end, len(shown)))
    return text


def _signed(x: float) -> str:
    return f"{x:+.3f}"


def _odds(f: float) -> str:
    if not math.isfinite(f) or f == 0:
        return "-"
    return f"x{f:.3g}" if f >= 1 else f"/{1 / f:.3g}"


def render(expl: Explanation, console: Console, top: int = 10) -> None:
    """Print the explanation for a person at a terminal."""
    head = Text()
    head.append("decision: ", style="bold")
    head.append(expl.decision, style="bold")
    if expl.threshold is not None:
        head.append(
            f"   (flagged when P(not {expl.normal_class}) >= {expl.threshold:g}; "
            f"here {expl.flag_probability:.4f})"
        )
    elif expl.normal_class is not None and expl.flag_probability is not None:
        head.append(f"   (most probable class; P(not {expl.normal_class}) = {expl.flag_probability:.4f})")
    else:
        head.append("   (most probable class)")
    console.print(head)
    if expl.mail is not None:
        for line in email_header_lines(expl.mail):
            console.print(line, markup=False, highlight=False)
        console.print()

    probs = Table(show_header=True, header_style="bold", box=None, pad_edge=False)
    probs.add_column("class")
    probs.add_column("probability", justify="right")
    probs.add_column("")
    for c, p in sorted(zip(expl.classes, expl.probabilities), key=lambda cp: -cp[1]):
        probs.add_row(Text(c), f"{p:.4f}", "#" * int(round(p * 30)))
    console.print(probs)
    console.print()

    console.print(
        Text.assemble(("message", "bold"), f"  (amber: toward {expl.predicted}, blue: toward {expl.runner_up}; darker is stronger)")
    )
    console.print(tinted_text(expl))
    if len(expl.text) > DISPLAY_LIMIT:
        console.print(f"[... {len(expl.text) - DISPLAY_LIMIT} more characters not shown; the evidence covers all of them]")
    if expl.spans_note is not None:
        console.print(f"(no tinting: {expl.spans_note})")
    console.print()

    for side, title in (("for", f"toward {expl.predicted}"), ("against", f"toward {expl.runner_up}")):
        rows = expl.strongest(top, side)
        table = Table(title=f"strongest evidence {title}", title_justify="left", header_style="bold")
        table.add_column("token")
        table.add_column("count", justify="right")
        table.add_column("value", justify="right")
        table.add_column("evidence (log-odds)", justify="right")
        table.add_column("odds", justify="right")
        for t in rows:
            table.add_row(Text(shown(t.token)), str(t.occurrences), f"{t.value:.4g}", _signed(t.evidence), _odds(t.odds_factor))
        if not rows:
            table.add_row("(none)", "", "", "", "")
        console.print(table)

    rest = expl.evidence_sum
    console.print(
        f"log-odds {expl.predicted} vs {expl.runner_up}: baseline {_signed(expl.baseline)}"
        + (f" (prior {_signed(expl.baseline_prior)}, absent tokens {_signed(expl.baseline_absence)})" if expl.variant == "bernoulli" else "")
        + f" + evidence of {len(expl.tokens)} tokens {_signed(rest)} = {_signed(expl.log_odds)}"
        f"  (odds {_odds(math.exp(min(expl.log_odds, 700)))})"
    )
    if expl.unknown_tokens:
        names = ", ".join(shown(t) + (f" x{n}" if n > 1 else "") for t, n in expl.unknown_tokens[:15])
        more = len(expl.unknown_tokens) - 15
        console.print(
            f"not in the vocabulary (no effect): {names}" + (f" and {more} more" if more > 0 else ""),
            markup=False,
        )
    flip = expl.flip
    if flip.removals:
        items = ", ".join(f"'{shown(t)}'" + (f" x{n}" if n > 1 else "") for t, n in flip.removals[:FLIP_SHOWN])
        if len(flip.removals) > FLIP_SHOWN:
            items += f" and {len(flip.removals) - FLIP_SHOWN} more tokens ({flip.size} occurrences in all; the JSON lists them)"
        label = "the smallest such set" if flip.exact else "found greedily, re-scored exactly; may not be the smallest"
        console.print(f"removing {items} changes the decision to {flip.new_decision} ({label})", markup=False)
    else:
        console.print(f"no removal of tokens changes the decision: {flip.reason}", markup=False)
