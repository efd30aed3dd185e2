"""The letter to the member whose message was held: what was decided, why in plain words, how to appeal.

A team paper (the ledger, the sheet, the report) shows every figure. The
member's letter shows none: no log-odds, no scores, no priors, no debit or
credit, and nothing about which words to remove or add (that would teach a
sender how to get past the filter). It says what was decided and when, the
words of the message that weighed most toward the decision, that a
statistical model decided and that people review decisions on request, and
how to ask for that review.

The organisation's name, contact and appeal route come from
:class:`LetterSettings` (options, or a small TOML settings file).
"""

from __future__ import annotations

import tomllib
from dataclasses import dataclass, fields
from pathlib import Path

from explain.errors import NbledgerError

#: Words of the message named as reasons, at most.
REASON_WORDS = 4
#: Flags of tokens never named as reasons: function words, numbers and anything that may identify a person.
_SKIPPED_FLAGS = frozenset({"stopword", "numeric", "personal"})


@dataclass(frozen=True)
class LetterSettings:
    """Who writes the letter and how a member appeals (all three are needed)."""

    organisation: str
    contact: str
    appeal: str


def letter_settings(path: Path | None, **given: str | None) -> LetterSettings:
    """Settings from the TOML file ``path`` (keys: organisation, contact, appeal), each overridden by an option given."""
    known = [f.name for f in fields(LetterSettings)]
    values: dict[str, str] = {}
    if path is not None:
        try:
            loaded = tomllib.loads(Path(path).read_bytes().decode("utf-8-sig"))
        except FileNotFoundError:
            raise NbledgerError(f"the letter settings file {path} does not exist") from None
        except OSError as exc:
            raise NbledgerError(f"cannot read the letter settings file {path}: {exc.strerror or exc}") from None
        except (UnicodeDecodeError, tomllib.TOMLDecodeError) as exc:
            raise NbledgerError(f"the letter settings file {path} is not UTF-8 TOML: {exc}") from None
        unknown = sorted(set(loaded) - set(known))
        if unknown:
            raise NbledgerError(
                f"the letter settings file {path} has unknown keys: {', '.join(unknown)} (known: {', '.join(known)})"
            )
        bad = [k for k, v in loaded.items() if not isinstance(v, str)]
        if bad:
            raise NbledgerError(f"in the letter settings file {path}, {', '.join(bad)} must be text in quotes")
        values.update(loaded)
    values.update({k: v for k, v in given.items() if v is not None})
    missing = [k for k in known if not str(values.get(k, "")).strip()]
    if missing:
        raise NbledgerError(
            "a member letter needs " + ", ".join(missing) + ": give --" + ", --".join(missing)
            + " or a --letter-settings file"
        )
    return LetterSettings(**{k: " ".join(str(values[k]).split()) for k in known})


@dataclass(frozen=True)
class MemberLetter:
    """Everything the member's letter says; presenters only word it."""

    settings: LetterSettings
    date: str
    reference: str | None
    decision: str
    normal_class: str
    reasons: tuple[str, ...]


def member_letter(ledger, settings: LetterSettings, date: str, reference: str | None) -> MemberLetter:
    """The letter about one held message (a :class:`~explain.analysis.ledger.Ledger`, redacted or not).

    ``reasons`` are the distinct words of the message with the largest
    entries toward the decided class, strongest first, leaving out function
    words, numbers and anything personal (:data:`REASON_WORDS` at most).
    ``reference`` is how the member quotes the message (an id, or None).
    """
    if ledger.normal_class is None:
        raise NbledgerError("a member letter needs the model's normal class (the one that lets a message through): "
                            "give --normal-class")
    if ledger.decision == ledger.normal_class:
        raise NbledgerError(f"the message was not held (decided {ledger.normal_class}): there is no decision to "
                            "write to the member about")
    toward = [e for e in ledger.entries if e.toward == ledger.decision and e.amount != 0
              and not (_SKIPPED_FLAGS & set(e.flags)) and not e.token.startswith("[")]
    toward.sort(key=lambda e: -abs(e.amount))
    reasons = tuple(dict.fromkeys(e.token for e in toward))[:REASON_WORDS]
    return MemberLetter(settings, date, reference, ledger.decision, ledger.normal_class, reasons)
