"""Risk flags on the tokens of a filter's vocabulary, and the redaction mask.

A reviewer asks of every token the filter treats as evidence: should that
word be evidence at all, and is the evidence to be trusted? Each token gets
these flags (names as they appear in every table and file):

``thin``
    Strong evidence resting on few training occurrences: ``|ratio| >=
    strong_log_odds`` and fewer than ``thin_below`` training occurrences in
    the two sides of the comparison together. Defaults: ``thin_below = 10``,
    ``strong_log_odds = ln 4`` (one occurrence at least quadruples, or
    quarters, the odds). Both are settable; the defaults are a reviewer's
    rule of thumb (common practice, no source).
``personal``
    Looks like personal data: an e-mail address, a URL, an IP address, a
    phone number (7 or more digits with separators) or a long digit run (7
    or more digits). The kind found is kept in ``TokenTraits.personal_kind``.
    Detection works on tokens as the vectorizer made them: a vectorizer that
    splits ``name@example.org`` into ``name``, ``example`` and ``org`` leaves
    nothing recognisable to flag.
``numeric``
    Has a digit and no letter.
``mixed_script``
    Letters from more than one writing system in one token, a common
    obfuscation (a Cyrillic ``а`` inside a Latin word). A letter's script is
    the first word of the Unicode name of its compatibility decomposition
    (NFKD): ``LATIN``, ``CYRILLIC``, ``GREEK`` ..., so that ``ª`` or a
    fullwidth ``ｆ`` count as Latin. Only letters (Unicode categories Lu,
    Ll, Lt, Lo) count, and not those of scripts whose writers run words
    together or routinely embed Latin words (Han, Hiragana, Katakana,
    Hangul, Thai, Lao, Khmer, Myanmar): a Japanese phrase with a Latin
    product name in it is ordinary writing, not obfuscation.
``stopword``
    A function word from scikit-learn's English list
    (``sklearn.feature_extraction.text.ENGLISH_STOP_WORDS``), whatever its
    evidence: the reviewer sees every stop word the filter leans on, weak or
    strong, and can sort by the lens.
``watchlist``
    A term of the reviewer's watchlist file.
``watchlist_strong``
    A watchlist term whose evidence is strong toward a flagged class: the
    side of the comparison its ratio points to holds only flagged classes
    (with no normal class known, either side counts).

Flag names are snake_case keys; screens show :data:`FLAG_LABELS`.

Everything is vectorised over the vocabulary: character classes are looked
up once per distinct code point and reduced per token with array operations;
the personal-data patterns then run only on the few tokens holding their
trigger characters (``@``, ``:``, ``/``, ``.``, seven digits).

Redaction replaces every ``personal`` token by a numbered placeholder such as
``[e-mail 1]`` before any table or picture sees the vocabulary.
"""

from __future__ import annotations

import re
import unicodedata
from dataclasses import dataclass
from math import log
from pathlib import Path
from types import MappingProxyType
from typing import Callable, Mapping, Sequence

import numpy as np

from explain.errors import NbledgerError
from explain.model.input_files import term_text
from explain.model.token_patterns import BARE_WEB_ADDRESS

FLAGS = ("thin", "personal", "numeric", "mixed_script", "stopword", "watchlist", "watchlist_strong")
#: How screens and pictures name each flag (the glossary's words).
FLAG_LABELS = {name: name.replace("_", "-") for name in FLAGS}
PERSONAL_KINDS = (
    "e-mail", "url", "ip", "digits", "phone", "card", "iban", "sort-code", "account", "birth-date", "address",
    "postcode", "name",
)
DEFAULT_THIN_BELOW = 10.0
DEFAULT_STRONG_LOG_ODDS = log(4.0)

# Each pattern is tried only on tokens that hold its trigger characters, so
# the regular expressions run on a handful of tokens, not the vocabulary.
# Earlier kinds win when several match.
_PERSONAL_PATTERNS = (
    re.compile(r"[\w.%+-]+@[\w-]+(?:\.[\w-]+)+"),
    re.compile(r"(?:\b[a-z][a-z0-9+.-]*://|\bwww\.)\S|\b[a-z0-9-]+(?:\.[a-z0-9-]+)*\.[a-z]{2,}/|" + BARE_WEB_ADDRESS, re.I),
    re.compile(
        r"(?<![\d.])(?:\d{1,3}\.){3}\d{1,3}(?![\d.])"
        r"|^(?=[0-9a-f:]*::|(?:[0-9a-f]{0,4}:){5})[0-9a-f:]*[0-9a-f][0-9a-f:]*$",
        re.I,
    ),
    re.compile(r"\d{7,}"),
    re.compile(r"(?<!\w)\+?\(?\d(?:[ ().-]{0,2}\d){6,}(?!\w)"),
)
# Scripts written without spaces between words, or that routinely embed Latin words.
_UNSPACED_SCRIPTS = frozenset({"CJK", "HIRAGANA", "KATAKANA", "HANGUL", "THAI", "LAO", "KHMER", "MYANMAR"})
_LETTER_CATEGORIES = frozenset({"Lu", "Ll", "Lt", "Lo"})


@dataclass(frozen=True, eq=False)
class TokenTraits:
    """What a token is, regardless of the evidence it carries (arrays of shape (F,)).

    ``personal_kind[j]`` indexes :data:`PERSONAL_KINDS`, or is -1.
    ``stopword`` marks membership of the English stop-word list.
    """

    personal_kind: np.ndarray
    numeric: np.ndarray
    mixed_script: np.ndarray
    stopword: np.ndarray

    @property
    def personal(self) -> np.ndarray:
        return self.personal_kind >= 0


@dataclass(frozen=True)
class RiskThresholds:
    """When evidence counts as strong, and when its support counts as thin."""

    thin_below: float = DEFAULT_THIN_BELOW
    strong_log_odds: float = DEFAULT_STRONG_LOG_ODDS

    def __post_init__(self):
        if not self.thin_below >= 0:
            raise NbledgerError(f"the thin threshold must be a count >= 0, got {self.thin_below}")
        if not self.strong_log_odds > 0:
            raise NbledgerError(f"strong evidence must be a log-odds > 0, got {self.strong_log_odds}")


# Trigger characters of the personal-data patterns, one bit each.
_TRIGGERS = {"@": 1, ":": 2, "/": 4, ".": 8}


def _script(ch: str) -> str:
    """The script of a letter that counts towards mixing, or "" for anything else."""
    base = unicodedata.normalize("NFKD", ch)[:1] or ch
    if unicodedata.category(base) not in _LETTER_CATEGORIES:
        return ""
    first = unicodedata.name(base, "").split(" ")[0]
    return "" if first in _UNSPACED_SCRIPTS else first


@dataclass(frozen=True, eq=False)
class _Letters:
    """Per-token summaries of the characters, each of shape (F,)."""

    lowest_script: np.ndarray  # smallest script id among the counted letters, or -1 without any
    highest_script: np.ndarray  # largest script id, or -1
    letters: np.ndarray  # number of letters of any script
    digits: np.ndarray  # number of decimal digits
    triggers: np.ndarray  # OR of the _TRIGGERS bits present


def _letters(tokens: list[str]) -> _Letters:
    """Classify every distinct code point once, then reduce over each token's characters.

    A token mixes scripts exactly when its smallest and largest script ids
    differ, so no per-token set is needed.
    """
    n = len(tokens)
    lengths = np.fromiter(map(len, tokens), dtype=np.int64, count=n)
    # A trailing space keeps every reduceat start inside the array, even for empty last tokens.
    codes = np.frombuffer(("".join(tokens) + " ").encode("utf-32-le"), dtype="<u4").astype(np.int64)
    present = np.flatnonzero(np.bincount(codes))
    scripts: dict[str, int] = {}
    script_table = np.full(present[-1] + 1, -1, dtype=np.int64)
    digit_table = np.zeros(present[-1] + 1, dtype=np.int64)
    letter_table = np.zeros(present[-1] + 1, dtype=np.int64)
    trigger_table = np.zeros(present[-1] + 1, dtype=np.int64)
    for cp in present:
        ch = chr(cp)
        name = _script(ch)
        if name:
            script_table[cp] = scripts.setdefault(name, len(scripts))
        digit_table[cp] = unicodedata.category(ch) == "Nd"
        letter_table[cp] = unicodedata.category(ch).startswith("L")
        trigger_table[cp] = _TRIGGERS.get(ch, 0)
    starts = np.concatenate([[0], np.cumsum(lengths)[:-1]]) if n else np.zeros(0, np.int64)
    script = script_table[codes]
    empty = lengths == 0
    lowest = np.minimum.reduceat(np.where(script >= 0, script, np.iinfo(np.int64).max), starts)
    highest = np.maximum.reduceat(script, starts)
    return _Letters(
        lowest_script=np.where(empty | (highest < 0), -1, lowest),
        highest_script=np.where(empty, -1, highest),
        letters=np.where(empty, 0, np.add.reduceat(letter_table[codes], starts)),
        digits=np.where(empty, 0, np.add.reduceat(digit_table[codes], starts)),
        triggers=np.where(empty, 0, np.bitwise_or.reduceat(trigger_table[codes], starts)),
    )


def token_traits(tokens, names=frozenset()) -> TokenTraits:
    """Personal-data kind, numeric, mixed-script and stop-word traits of each token.

    Examples
    --------
    >>> t = token_traits(["harbour", "warden@example.org", "2024", "пaint"])
    >>> t.personal.tolist(), t.numeric.tolist(), t.mixed_script.tolist()
    ([False, True, False, False], [False, False, True, False], [False, False, False, True])
    """
    from sklearn.feature_extraction.text import ENGLISH_STOP_WORDS

    tokens = list(map(str, tokens))
    chars = _letters(tokens)

    def having(*symbols: str) -> np.ndarray:
        return (chars.triggers & sum(_TRIGGERS[c] for c in symbols)) > 0

    many_digits = chars.digits >= 7
    triggers = (having("@"), having(":", "/", "."), having(".", ":"), many_digits, many_digits)
    kind = np.full(len(tokens), -1, dtype=np.int8)
    for index, (pattern, trigger) in enumerate(zip(_PERSONAL_PATTERNS, triggers)):
        for j in np.flatnonzero(trigger & (kind < 0)):
            if pattern.search(tokens[j]):
                kind[j] = index
    _detector_kinds(tokens, chars, kind)
    if names:
        # values the detector found in the messages at hand (a member's name the list does not know, a date of
        # birth); ``names`` maps a lower-case word to its kind (a plain set means names)
        for j in np.flatnonzero(kind < 0):
            word = tokens[j].lower().strip(".,;:!?()[]\"'")
            if word in names:
                kind[j] = PERSONAL_KINDS.index(names.get(word, "name") if isinstance(names, Mapping) else "name")
    return TokenTraits(
        personal_kind=kind,
        numeric=(chars.digits > 0) & (chars.letters == 0),
        mixed_script=chars.lowest_script != chars.highest_script,
        stopword=np.fromiter(map(ENGLISH_STOP_WORDS.__contains__, tokens), dtype=bool, count=len(tokens)),
    )


def _detector_kinds(tokens: list[str], chars: _Letters, kind: np.ndarray) -> None:
    """Mark, in place, the tokens that the text detector's single-token checks find.

    A Luhn-valid card number or a checksum-valid IBAN wins over ``digits`` and
    ``phone``; a known given name (not an everyday word) is a ``name``
    (:mod:`explain.analysis.personal_data`). Only candidates are looked at.
    """
    from explain.analysis.personal_data import token_kind

    candidates = (chars.digits >= 13) | ((chars.digits >= 2) & (chars.letters >= 2)) | ((chars.letters > 1) & (kind < 0))
    for j in np.flatnonzero(candidates):
        found = token_kind(tokens[j])
        if found is not None and (kind[j] < 0 or found in ("card", "iban")):
            kind[j] = PERSONAL_KINDS.index(found)


def risk_flags(
    traits: TokenTraits,
    ratio,
    support,
    watched,
    thresholds: RiskThresholds,
    flagged_sides: tuple[bool, bool] = (True, True),
) -> np.ndarray:
    """The flags of :data:`FLAGS` for one comparison, a bool array of shape (len(FLAGS), F).

    ``ratio`` is the per-occurrence evidence of the comparison (> 0 toward
    its target), ``support`` the training support on both of its sides
    together, ``watched`` marks the watchlist's tokens. ``flagged_sides``
    says whether the target, and the other side, hold only flagged classes.
    """
    ratio = np.asarray(ratio)
    strong = np.abs(ratio) >= thresholds.strong_log_odds
    watched = np.asarray(watched, dtype=bool)
    toward_flagged = (flagged_sides[0] & (ratio > 0)) | (flagged_sides[1] & (ratio < 0))
    return np.stack(
        [
            strong & (np.asarray(support) < thresholds.thin_below),
            traits.personal,
            traits.numeric,
            traits.mixed_script,
            traits.stopword,
            watched,
            watched & strong & toward_flagged,
        ]
    )


# Reserved example values (RFC 2606 names, RFC 5737 addresses, 555-01xx numbers), one per
# PERSONAL_KINDS entry, that the model's own tokenizer is tried on.
PERSONAL_PROBES = {
    "e-mail": "warden@example.org",
    "url": "https://tideway.example.net/notices",
    "ip": "192.0.2.14",
    "digits": "20260101",
    "phone": "555-555-0134",
    "card": "4111111111111111",
    "iban": "GB82WEST12345698765432",
    "name": "Margaret",
}


@dataclass(frozen=True)
class RedactionCheck:
    """What the personal-data check looked at and found.

    ``checked`` tokens of the vocabulary were tested for every kind of
    :data:`PERSONAL_KINDS`; ``found[k]`` is how many matched kind ``k``.
    ``tokenizer_splits`` lists the kinds the model's tokenizer cannot keep
    whole (tried on :data:`PERSONAL_PROBES`): such values reach the
    vocabulary only in pieces (``example``, ``org``) that no check can
    recognise. None when no tokenizer was given to try.
    """

    checked: int
    found: Mapping[str, int]
    tokenizer_splits: tuple[str, ...] | None

    @property
    def total(self) -> int:
        return sum(self.found.values())


def redaction_check(traits: TokenTraits, analyzer: Callable[[str], Sequence[str]] | None = None) -> RedactionCheck:
    """Count each personal kind among the tokens, and try the tokenizer on one example of each."""
    counts = np.bincount(traits.personal_kind[traits.personal_kind >= 0], minlength=len(PERSONAL_KINDS))
    splits = None
    if analyzer is not None:
        splits = tuple(
            kind
            for k, kind in enumerate(PERSONAL_KINDS)
            if kind in PERSONAL_PROBES and not (token_traits(list(analyzer(PERSONAL_PROBES[kind]))).personal_kind == k).any()
        )
    return RedactionCheck(
        checked=len(traits.personal_kind),
        found=MappingProxyType({kind: int(counts[k]) for k, kind in enumerate(PERSONAL_KINDS)}),
        tokenizer_splits=splits,
    )


def redaction_mask(traits: TokenTraits) -> np.ndarray:
    """The tokens that redaction hides: every token flagged ``personal``."""
    return traits.personal


def redact(tokens, traits: TokenTraits) -> np.ndarray:
    """``tokens`` with each personal token replaced by ``[<kind> <n>]``, numbered in column order."""
    out = np.array(tokens, dtype=object, copy=True)
    for n, j in enumerate(np.flatnonzero(redaction_mask(traits)), start=1):
        out[j] = f"[{PERSONAL_KINDS[traits.personal_kind[j]]} {n}]"
    return out


@dataclass(frozen=True)
class Watchlist:
    """Terms a reviewer wants reported whatever their evidence, in file order."""

    terms: tuple[str, ...]
    source: str


def parse_watchlist(text: str, source: str) -> Watchlist:
    """One term a line; blank lines and lines starting with ``#`` are skipped; duplicates dropped."""
    lines = (line.strip() for line in text.splitlines())
    terms = tuple(dict.fromkeys(line for line in lines if line and not line.startswith("#")))
    if not terms:
        raise NbledgerError(f"the watchlist {source} has no terms (only blank lines and # comments)")
    return Watchlist(terms, source)


def read_watchlist(path) -> Watchlist:
    """Read a watchlist file (UTF-8, an optional byte-order mark allowed)."""
    path = Path(path)
    return parse_watchlist(term_text(path, "watchlist"), str(path))


def watchlist_columns(terms, tokens) -> np.ndarray:
    """Column of each term in the vocabulary (-1 when absent).

    A term matches a token exactly, or else in lower case (vectorizers
    lower-case by default, reviewers may not).
    """
    wanted = {t: None for term in terms for t in (term, term.lower())}
    found = {str(t): j for j, t in enumerate(tokens) if t in wanted}
    return np.array(
        [found.get(term, found.get(term.lower(), -1)) for term in terms], dtype=np.int64
    )


def display_names(text: str) -> list[tuple[int, int, str]]:
    """The display names of address header lines (:func:`explain.analysis.personal_data.display_names`)."""
    from explain.analysis.personal_data import display_names as names

    return names(text)


def personal_spans(text: str) -> list[tuple[int, int, str]]:
    """``(start, end, kind)`` of the personal values in free text, left to right, not overlapping.

    The one detector, :func:`explain.analysis.personal_data.find_personal`:
    e-mail addresses, URLs, IP addresses, card numbers, IBANs, sort codes and
    account numbers, dates of birth, phone numbers, street addresses,
    postcodes, people's names and long digit runs.
    """
    from explain.analysis.personal_data import find_personal

    return find_personal(text)
