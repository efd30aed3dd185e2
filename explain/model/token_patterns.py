"""Named token patterns for ``nbledger train --tokens``.

Each is a plain ``token_pattern`` regular expression for scikit-learn's
``CountVectorizer`` / ``TfidfVectorizer``, so a model trained with one is
still a pipeline of stock scikit-learn parts that skops loads without
trusting any code, and the word spans of :mod:`explain.model.featurizer`
follow it unchanged.

``words`` is scikit-learn's own default (two or more word characters).
``entities`` (ours) first tries, at each position, the values that the word
pattern would cut into fragments an analyst cannot read ("http", "example",
"49" from "£2.49"), and keeps each whole:

- URLs (``https://...``, ``www...``) and bare web addresses (``name.example.org/path``),
- e-mail addresses,
- IPv4 addresses,
- amounts with a currency sign before or after the number (``£2.49``, ``$1,200``, ``40€``),
- phone numbers (``555-0134``, ``(01632) 555-0142``, ``+1 202-555-0143``),

and falls back to the ``words`` pattern everywhere else. The pattern has no
capturing group (scikit-learn takes group 1 when there is one) and is
case-insensitive, so it works with or without lower-casing.
"""

from __future__ import annotations

from explain.errors import NbledgerError

WORDS = r"(?u)\b\w\w+\b"

_CURRENCY = "$£€¥₹₩₽¢"
# Top-level names a bare address must end in, so that "end.then" (a missing
# space) stays two words; country names that are also English words
# (at, be, in, it, me, no, so, us) are left out for the same reason.
TOP_LEVEL = "|".join(sorted((
    "com org net edu gov mil int info biz io co uk de fr eu ca au nz ie nl es ch se dk fi pl pt jp cn ru br "
    "tv app dev online shop site xyz club top"
).split(), key=len, reverse=True))
#: A host name ending in a common top-level name, not inside a longer word or address
#: (also how the vocabulary review recognises a bare web address as personal).
BARE_WEB_ADDRESS = rf"(?<![\w.@-])(?:[a-z0-9](?:[a-z0-9-]*[a-z0-9])?\.)+(?:{TOP_LEVEL})(?![\w-])"
_ENTITY_PARTS = (
    # scheme or www., then everything up to white space or a quote, less trailing punctuation
    r"(?:[a-z][a-z0-9+.-]*://|www\.)[^\s<>\"']*[^\s<>\"'.,;:!?)\]}]",
    # e-mail address
    r"[\w.%+-]+@[\w-]+(?:\.[\w-]+)*\.[a-z]{2,}",
    # IPv4 address
    r"(?<![\w.])(?:\d{1,3}\.){3}\d{1,3}(?![\w.])",
    # bare web address, with an optional path
    BARE_WEB_ADDRESS + r"(?:/[^\s<>\"']*[^\s<>\"'.,;:!?)\]}])?",
    # amount with a currency sign before or after the number
    rf"[{_CURRENCY}]\s?\d+(?:[.,]\d+)*|(?<![\w.,])\d+(?:[.,]\d+)*\s?[{_CURRENCY}]",
    # phone number: optional +country and area code, then 3-4 digits, a separator, 4 digits
    r"(?<![\w+])(?:\+\d{1,3}[ .-]?)?(?:\(\d{1,5}\)[ .-]?|\d{2,5}[ .-])?\d{3,4}[.-]\d{4}(?![\w-])",
)
ENTITIES = "(?iu)" + "|".join(_ENTITY_PARTS) + r"|\b\w\w+\b"

TOKEN_PATTERNS = {"words": WORDS, "entities": ENTITIES}


def token_pattern(name: str) -> str:
    """The regular expression of a named pattern (``words`` or ``entities``)."""
    try:
        return TOKEN_PATTERNS[name]
    except KeyError:
        raise NbledgerError(f"--tokens must be one of {', '.join(TOKEN_PATTERNS)}, got {name!r}") from None
