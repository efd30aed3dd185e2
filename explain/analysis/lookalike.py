"""Words disguised with look-alike letters ("tіdеway" with a Cyrillic і and е).

Unicode Technical Standard #39, "Unicode Security Mechanisms", section 4
("Confusable Detection"), calls two strings confusable when their
*skeletons* are equal: the skeleton maps every character to the prototype
of its class of visually confusable characters (the data file
``confusables.txt``). We take the data from the maintained
``confusable-homoglyphs`` package, which ships ``confusables.txt`` as a table
of each character's confusable characters. That table lists confusables in
both directions but not always the whole class, so the classes are its
connected components (union-find), and each class is represented by its
lowest code point. Two characters then share a skeleton exactly when the
data links them, directly or through other members of their class.

Limits: only one-character confusables are used (``rn`` against ``m`` is
not), and the skeleton is taken after Unicode normalisation NFD, as the
standard does.
"""

from __future__ import annotations

import unicodedata
from functools import lru_cache

# The package wraps right-to-left characters in LEFT-TO-RIGHT MARKs for display.
_DISPLAY_MARKS = "\u200e\u200f"


@lru_cache(maxsize=1)
def _prototypes() -> dict[int, str]:
    """``str.translate`` table: code point -> the lowest code point of its confusable class."""
    from confusable_homoglyphs.confusables import confusables_data

    parent: dict[str, str] = {}

    def root(c: str) -> str:
        while parent.get(c, c) != c:
            parent[c] = parent.get(parent[c], parent[c])
            c = parent[c]
        return c

    for char, homoglyphs in confusables_data.items():
        for glyph in homoglyphs:
            other = glyph["c"].strip(_DISPLAY_MARKS)
            if len(char) == 1 and len(other) == 1:
                a, b = root(char), root(other)
                if a != b:
                    parent[max(a, b)] = min(a, b)
    return {ord(c): root(c) for c in parent if root(c) != c}


def skeleton(text: str) -> str:
    """The UTS #39 skeleton of ``text`` (NFD, map to prototypes, NFD).

    Examples
    --------
    >>> skeleton("t\\u0456d\\u0435way") == skeleton("tideway")
    True
    """
    mapped = unicodedata.normalize("NFD", text).translate(_prototypes())
    return unicodedata.normalize("NFD", mapped)


def lookalikes(unknown, vocabulary) -> dict[str, str]:
    """Each unknown token whose skeleton equals a known token's -> that known token.

    ``unknown`` are tokens the model does not know; ``vocabulary`` the
    model's tokens. An unknown token that is only another spelling with the
    same letters (no confusable character) cannot match, since a known token
    with the same skeleton and the same letters would be the token itself.
    When several known tokens share the skeleton, the first in vocabulary
    order is named.
    """
    wanted = {skeleton(t): t for t in unknown}
    # Only tokens of a matching length can share a skeleton: skip the rest cheaply.
    lengths = {n for t in unknown for n in (len(t), len(unicodedata.normalize("NFD", t)), len(skeleton(t)))}
    found: dict[str, str] = {}
    for token in vocabulary:
        token = str(token)
        if len(token) not in lengths and len(unicodedata.normalize("NFD", token)) not in lengths:
            continue
        disguised = wanted.get(skeleton(token))
        if disguised is not None and disguised != token and disguised not in found:
            found[disguised] = token
    return found
