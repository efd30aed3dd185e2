"""Redaction modes of the report, and masking of the short values an assessment lists.

A report circulates, so its default is to show no personal value: the one
detector, :func:`explain.analysis.personal_data.find_personal`, finds e-mail
addresses, phone numbers, card numbers, IBANs, sort codes and account numbers,
postcodes, dates of birth, street addresses, IP addresses, URLs and people's
names. Message texts and their tokens are masked by
:func:`explain.analysis.ledger.redacted`; this module masks what else the
report prints: the tokens of the error review and the names of slices.

Message ids identify messages, not people: they are shown as given, so that
the team can look a message up. An id holding an e-mail address is shown as
a keyed pseudonym (:class:`IdPseudonyms`, HMAC-SHA-256 of RFC 2104 with the
organisation's secret from ``--id-key-file``), never as ``[e-mail 1]``.

Modes (``--redact``): ``personal`` masks those values everywhere;
``bodies`` also withholds every message text, keeping only token evidence;
``none`` shows everything.
"""

from __future__ import annotations

import dataclasses
import hashlib
import hmac
import re
import secrets
from pathlib import Path

from explain.errors import NbledgerError

from explain.analysis.risk import PERSONAL_KINDS, personal_spans, token_traits

MODES = ("personal", "bodies", "none")


def mask_value(value: str, names: frozenset[str] = frozenset()) -> str:
    """A short string (a token, a slice name) with each personal value replaced by ``[kind]``.

    ``names``: words found as people's names in the messages at hand
    (:func:`explain.analysis.personal_data.names_in`), masked as ``[name]`` too.
    """
    kind = int(token_traits([value], names).personal_kind[0])
    if kind >= 0:
        return f"[{PERSONAL_KINDS[kind]}]"
    out, at = [], 0
    for start, end, found in personal_spans(value):
        out += [value[at:start], f"[{found}]"]
        at = end
    return "".join(out) + value[at:]


_ADDRESS_IN_ID = re.compile(r"[^\s<>@]+@[\w-]+(?:\.[\w-]+)+")
#: Bytes a key file must hold at least (RFC 2104 section 3: a key shorter than the hash output, 32 bytes, weakens it).
MIN_KEY_BYTES = 16


def read_id_key(path) -> bytes:
    """The secret of ``--id-key-file``: the file's bytes, surrounding white space removed."""
    path = Path(path)
    try:
        key = path.read_bytes().strip()
    except FileNotFoundError:
        raise NbledgerError(f"the id key file {path} does not exist") from None
    except IsADirectoryError:
        raise NbledgerError(f"the id key file {path} is a folder, not a file") from None
    except OSError as exc:
        raise NbledgerError(f"cannot read the id key file {path}: {exc.strerror or exc}") from None
    if not key:
        raise NbledgerError(f"the id key file {path} is empty; put the organisation's secret in it")
    if len(key) < MIN_KEY_BYTES:
        raise NbledgerError(f"the id key file {path} holds {len(key)} bytes; a key needs at least {MIN_KEY_BYTES}")
    return key


class IdPseudonyms:
    """Message ids as team papers show them: as given, or a keyed pseudonym when an id holds an e-mail address.

    The pseudonym is ``id-`` and the first 16 hex digits of HMAC-SHA-256
    (RFC 2104) of the whole id under ``key``: the same id and key give the
    same pseudonym in every run, so the team can find the message again by
    computing it; without the key nobody can test a guessed address. With
    no key a random one is drawn for this run (``stable`` is then false).

    >>> IdPseudonyms(b"0123456789abcdef")("<77.warden@example.org>")
    'id-e877e16af1095b5a'
    >>> IdPseudonyms(b"0123456789abcdef")("tc-00042")
    'tc-00042'
    """

    def __init__(self, key: bytes | None = None):
        self.stable = key is not None
        self._key = key if key is not None else secrets.token_bytes(32)

    def __call__(self, value):
        if value is None or not _ADDRESS_IN_ID.search(str(value)):
            return value
        return pseudonym(self._key, str(value))


def pseudonym(key: bytes, value: str) -> str:
    """``id-`` and the first 16 hex digits of HMAC-SHA-256 (RFC 2104) of ``value`` (UTF-8) under ``key``."""
    return "id-" + hmac.new(key, value.encode("utf-8"), hashlib.sha256).hexdigest()[:16]


def redact_assessment(assessment, mode: str, ids: IdPseudonyms | None = None, names=frozenset()):
    """An :class:`~explain.analysis.assessment.Assessment` whose error review shows no personal value.

    Tokens and slice names are masked (``names``: the words found as people's
    names, or a word -> kind mapping, in the messages at hand, as for
    :func:`mask_value`); ids are kept as given, except those holding an
    e-mail address, which become their keyed pseudonym (``ids``).
    """
    if mode == "none":
        return assessment
    ids = ids if ids is not None else IdPseudonyms()
    errors = assessment.errors

    def pushes(ps):
        return tuple(dataclasses.replace(p, token=mask_value(p.token, names)) for p in ps)

    def message(m):
        return dataclasses.replace(
            m, id=ids(m.id), toward_flag=pushes(m.toward_flag), toward_normal=pushes(m.toward_normal)
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
            dataclasses.replace(s, id=ids(s.id), toward_favoured=pushes(s.toward_favoured),
                                toward_label=pushes(s.toward_label))
            for s in suspected.suspected
        ))
    slices = assessment.slices
    if slices is not None:
        # a slice is named by a value of the data (a sender, a term): masked like any token
        def named(group):
            return tuple(dataclasses.replace(x, name=mask_value(x.name, names)) for x in group)

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


def redact_probe(result, names=frozenset()):
    """A :class:`~explain.analysis.probe.ProbeResult` whose weak points and attacks show no personal token
    (``names`` as for :func:`mask_value`: names and values found in the messages at hand)."""
    if result is None or result.evasion is None:
        return result

    def budget(b):
        return dataclasses.replace(
            b,
            additions=tuple(tuple((mask_value(t, names), n) for t, n in attack) for attack in b.additions),
            weak_points=tuple(dataclasses.replace(w, token=mask_value(w.token, names)) for w in b.weak_points),
        )

    evasion = dataclasses.replace(result.evasion, repeats=budget(result.evasion.repeats),
                                  distinct=budget(result.evasion.distinct))
    return dataclasses.replace(result, evasion=evasion)


def masked_text(text: str) -> str:
    """``text`` with every personal value (:func:`explain.analysis.personal_data.find_personal`) replaced by a
    numbered placeholder, one number per value: the one call for any screen that shows message text
    (the review desk's included).

    >>> masked_text("Dear Oksana, call (202) 555-0142. Thanks, Oksana")
    'Dear [name 1], call [phone 2]. Thanks, [name 1]'
    """
    from explain.analysis.ledger import placeholder_numbers
    from explain.analysis.personal_data import find_personal

    found = find_personal(text)
    out, at = [], 0
    for (start, end, kind), n in zip(found, placeholder_numbers(text, found)):
        out += [text[at:start], f"[{kind} {n}]"]
        at = end
    return "".join(out) + text[at:]
