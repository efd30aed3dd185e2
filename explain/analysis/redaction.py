"""Redaction modes of the report, and masking of the short values an assessment lists.

A report circulates, so its default is to show no e-mail address, URL, IP
address, phone number or long digit run. Message texts and their tokens are
masked by :func:`explain.analysis.ledger.redacted`; this module masks what
else the report prints: message ids and the tokens of the error review. Both
use the vocabulary review's own patterns (:mod:`explain.analysis.risk`).

Modes (``--redact``): ``personal`` masks those values everywhere;
``bodies`` also withholds every message text, keeping only token evidence;
``none`` shows everything.
"""

from __future__ import annotations

import dataclasses

from explain.analysis.risk import PERSONAL_KINDS, personal_spans, token_traits

MODES = ("personal", "bodies", "none")


def mask_value(value: str) -> str:
    """A short string (a token, an id) with each personal-looking value replaced by ``[kind]``."""
    kind = int(token_traits([value]).personal_kind[0])
    if kind >= 0:
        return f"[{PERSONAL_KINDS[kind]}]"
    out, at = [], 0
    for start, end, found in personal_spans(value):
        out += [value[at:start], f"[{found}]"]
        at = end
    return "".join(out) + value[at:]


def redact_assessment(assessment, mode: str):
    """An :class:`~explain.analysis.assessment.Assessment` whose error review shows no personal value (ids and tokens)."""
    if mode == "none":
        return assessment
    errors = assessment.errors

    def pushes(ps):
        return tuple(dataclasses.replace(p, token=mask_value(p.token)) for p in ps)

    def message(m):
        return dataclasses.replace(
            m, id=mask_value(m.id), toward_flag=pushes(m.toward_flag), toward_normal=pushes(m.toward_normal)
        )

    if errors is not None:
        errors = dataclasses.replace(
            errors,
            false_alarms=tuple(map(message, errors.false_alarms)),
            missed=tuple(map(message, errors.missed)),
            borderline=tuple(map(message, errors.borderline)),
            false_alarm_drivers=pushes(errors.false_alarm_drivers),
            missed_drivers=pushes(errors.missed_drivers),
        )
    suspected = assessment.label_errors
    if suspected is not None:
        suspected = dataclasses.replace(suspected, suspected=tuple(
            dataclasses.replace(s, id=mask_value(s.id), toward_favoured=pushes(s.toward_favoured),
                                toward_label=pushes(s.toward_label))
            for s in suspected.suspected
        ))
    slices = assessment.slices
    if slices is not None:
        # a slice is named by a value of the data (a sender, a term): masked like any token
        def named(group):
            return tuple(dataclasses.replace(x, name=mask_value(x.name)) for x in group)

        slices = dataclasses.replace(slices, slices=named(slices.slices), differing=named(slices.differing),
                                     most_different=named(slices.most_different))
    return dataclasses.replace(assessment, errors=errors, label_errors=suspected, slices=slices)


def withhold_text(ledger):
    """A redacted :class:`~explain.analysis.ledger.Ledger` without its text or any character position (``bodies``)."""
    return dataclasses.replace(
        ledger,
        text="",
        entries=tuple(dataclasses.replace(e, spans=()) for e in ledger.entries),
        unknown=tuple(dataclasses.replace(u, spans=()) for u in ledger.unknown),
        explanation=dataclasses.replace(
            ledger.explanation,
            text="",
            tokens=tuple(dataclasses.replace(t, spans=()) for t in ledger.explanation.tokens),
        ),
    )
