"""Masking personal data in message texts and tokens before anything is presented.

A report circulates, so its default is to show no e-mail address, URL, IP
address, phone number or long digit run. The patterns are the vocabulary
review's own (:mod:`explain.analysis.risk`), run here over whole texts; a
masked value becomes a placeholder naming its kind (``[e-mail]``,
``[url]`` ...). Redaction happens on the result objects, so every presenter
(PDF, HTML, JSON, pictures) receives the same masked values.

Modes (``--redact``): ``personal`` masks those values everywhere;
``bodies`` also withholds every message text, keeping only token evidence;
``none`` shows everything.
"""

from __future__ import annotations

import dataclasses

import numpy as np

from explain.analysis.risk import _PERSONAL_PATTERNS, PERSONAL_KINDS, token_traits

MODES = ("personal", "bodies", "none")


def personal_spans(text: str) -> list[tuple[int, int, str]]:
    """Non-overlapping ``(start, end, kind)`` of every personal-looking value in ``text``, in order.

    Kinds earlier in :data:`~explain.analysis.risk.PERSONAL_KINDS` win where
    matches overlap (an e-mail address is not also reported as a URL).
    """
    found: list[tuple[int, int, str]] = []
    for kind, pattern in zip(PERSONAL_KINDS, _PERSONAL_PATTERNS):
        for m in pattern.finditer(text):
            start, end = m.span()
            if kind == "url":  # the URL pattern matches a prefix only; take the URL to its end
                while end < len(text) and not text[end].isspace() and text[end] not in "\"'<>()[]{}":
                    end += 1
                while end > start and text[end - 1] in ".,;:!?":
                    end -= 1
            if end > start and all(end <= a or start >= b for a, b, _ in found):
                found.append((start, end, kind))
    return sorted(found)


def mask_text(text: str) -> tuple[str, list[tuple[int, int, int]]]:
    """``text`` with each personal value replaced by ``[kind]``, and where offsets moved.

    The second item lists ``(start, end, shift)`` per masked value: an offset
    ``i >= end`` of the original moves by the ``shift`` of the last value
    ending at or before it; offsets inside ``[start, end)`` no longer exist.
    """
    parts, shifts, last, moved = [], [], 0, 0
    for start, end, kind in personal_spans(text):
        placeholder = f"[{kind}]"
        parts += [text[last:start], placeholder]
        moved += len(placeholder) - (end - start)
        shifts.append((start, end, moved))
        last = end
    parts.append(text[last:])
    return "".join(parts), shifts


def move_spans(spans, shifts) -> tuple[tuple[int, int], ...]:
    """Character spans of the original text, carried into the masked text; spans touching a masked value drop out."""
    out = []
    for a, b in spans:
        if any(a < end and b > start for start, end, _ in shifts):
            continue
        delta = next((shift for start, end, shift in reversed(shifts) if end <= a), 0)
        out.append((a + delta, b + delta))
    return tuple(out)


def mask_token(token: str) -> str:
    """A token, or ``[kind]`` when it looks personal as a whole or holds a personal value."""
    traits = token_traits([token])
    kind = int(traits.personal_kind[0])
    if kind >= 0:
        return f"[{PERSONAL_KINDS[kind]}]"
    return mask_text(token)[0]


def mask_tokens(tokens) -> np.ndarray:
    """:func:`mask_token` over an array of tokens (object array of the same shape)."""
    return np.array([mask_token(str(t)) for t in tokens], dtype=object)


def redact_explanation(explanation, mode: str):
    """An :class:`~explain.analysis.evidence.Explanation` with personal values masked (``bodies``: no text at all)."""
    if mode == "none":
        return explanation
    masked, shifts = mask_text(explanation.text)
    tokens = tuple(
        dataclasses.replace(t, token=mask_token(t.token), spans=() if mode == "bodies" else move_spans(t.spans, shifts))
        for t in explanation.tokens
    )
    flip = dataclasses.replace(
        explanation.flip, removals=tuple((mask_token(tok), n) for tok, n in explanation.flip.removals)
    )
    return dataclasses.replace(
        explanation,
        text="" if mode == "bodies" else masked,
        tokens=tokens,
        unknown_tokens=tuple((mask_token(tok), n) for tok, n in explanation.unknown_tokens),
        flip=flip,
    )


def redact_assessment(assessment, mode: str):
    """An :class:`~explain.analysis.assessment.Assessment` whose error review shows no personal value (ids and tokens)."""
    errors = assessment.errors
    if mode == "none" or errors is None:
        return assessment

    def message(m):
        return dataclasses.replace(
            m,
            id=mask_text(m.id)[0],
            toward_flag=tuple(dataclasses.replace(p, token=mask_token(p.token)) for p in m.toward_flag),
            toward_normal=tuple(dataclasses.replace(p, token=mask_token(p.token)) for p in m.toward_normal),
        )

    def drivers(ds):
        return tuple(dataclasses.replace(d, token=mask_token(d.token)) for d in ds)

    masked = dataclasses.replace(
        errors,
        false_alarms=tuple(map(message, errors.false_alarms)),
        missed=tuple(map(message, errors.missed)),
        borderline=tuple(map(message, errors.borderline)),
        false_alarm_drivers=drivers(errors.false_alarm_drivers),
        missed_drivers=drivers(errors.missed_drivers),
    )
    return dataclasses.replace(assessment, errors=masked)
