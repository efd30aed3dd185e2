"""Reading ``docs/glossary.md``, the one source of nbledger's terms, for the tests.

The glossary's tables have four columns: the term as shown on screens, its
JSON key / CSV column (snake_case, in backticks; ``<class>``-style parts stand
for any name), the definition and the formula. A screen term may give other
accepted forms in round brackets after a space: "support (training support)".
"""

from __future__ import annotations

import re
from functools import lru_cache
from pathlib import Path

GLOSSARY = Path(__file__).resolve().parent.parent / "docs" / "glossary.md"
SNAKE_CASE = re.compile(r"[a-z][a-z0-9]*(?:_[a-z0-9]+)*")
# JSON objects whose keys are data (class names, library names), not names the tool chose.
DATA_KEYED = frozenset({
    "probabilities", "support_by_class", "rows_per_class", "training_rows_per_class", "f1_per_class", "versions",
})


@lru_cache(maxsize=1)
def rows() -> tuple[tuple[str, str, str, str], ...]:
    """(screen term, keys cell, definition, formula) of every glossary table row."""
    found = []
    for line in GLOSSARY.read_text(encoding="utf-8").splitlines():
        if not line.startswith("|") or set(line) <= set("|- "):
            continue
        cells = [c.strip() for c in line.strip()[1:-1].split("|")]
        assert len(cells) == 4, f"glossary row without four cells: {line}"
        if cells[0] == "term on screens":
            continue
        found.append(tuple(cells))
    return tuple(found)


@lru_cache(maxsize=1)
def screen_terms() -> frozenset[str]:
    """Every accepted screen form, lower-cased."""
    terms = set()
    for term, *_ in rows():
        main, _, alternative = term.partition(" (")
        terms.add(main.strip().lower())
        if alternative:
            # a comma between alternatives, not the thousands comma of "per 10,000 ok messages"
            terms.update(a.strip().lower() for a in re.split(r",(?!\d{3})", alternative.rstrip(")")))
    return frozenset(terms)


@lru_cache(maxsize=1)
def key_patterns() -> tuple[re.Pattern, ...]:
    """A full-match pattern per glossary key; ``<class>`` parts match any text."""
    patterns = []
    for _, keys, _, _ in rows():
        for key in re.findall(r"`([^`]+)`", keys):
            patterns.append(re.compile(re.sub(r"<[^>]+>", ".+", re.escape(key).replace(r"\<", "<").replace(r"\>", ">"))))
    return tuple(patterns)


def is_term(text: str) -> bool:
    return text.strip().lower() in screen_terms()


def is_key(name: str) -> bool:
    return any(p.fullmatch(name) for p in key_patterns())


def json_keys(document, path: str = "") -> list[tuple[str, str]]:
    """(path, key) of every key the tool named in a JSON document; keys of :data:`DATA_KEYED` maps are data."""
    found = []
    if isinstance(document, dict):
        for key, value in document.items():
            found.append((path, key))
            if key not in DATA_KEYED:
                found += json_keys(value, f"{path}/{key}")
    elif isinstance(document, list):
        for value in document:
            found += json_keys(value, f"{path}[]")
    return found


def not_snake_case(document) -> list[str]:
    """Paths of the keys of ``document`` that are not snake_case."""
    return [f"{path}/{key}" for path, key in json_keys(document) if not SNAKE_CASE.fullmatch(key)]
