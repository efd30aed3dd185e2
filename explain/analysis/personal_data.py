"""Finding people in a message: the one detector of personal data for every output.

:func:`find_personal` returns the ``(start, end, kind)`` spans of the values
that point to a person; redaction (:mod:`explain.analysis.redaction`,
:func:`explain.analysis.ledger.redacted`) masks them and the vocabulary's
``personal`` flag (:func:`explain.analysis.risk.token_traits`) asks the same
questions of single tokens. The kinds, their checks and their sources:

``e-mail``, ``url``
    Patterns (RFC 5322 addr-spec, simplified; a scheme, ``www.`` or a bare web
    address).
``ip``
    IPv4 and IPv6 addresses, confirmed by the standard library's
    :mod:`ipaddress` (RFC 4291 text forms, zone and brackets allowed).
``card``
    13 to 19 digits, spaces or dashes between, that pass the Luhn check of
    ISO/IEC 7812-1 (``stdnum.luhn``).
``iban``
    Country code, check digits and account, spaced or not, whose ISO 13616
    check digits (mod 97-10, ISO 7064) hold (``stdnum.iban``).
``sort-code``, ``account``
    A UK sort code (``12-34-56``) and a bank account number (6 to 10 digits)
    named as such nearby ("sort code", "account", "a/c"), or standing beside
    each other. Neither carries a check digit that a library can test.
``phone``
    Numbers that ``phonenumbers`` (the Python port of libphonenumber) finds
    as possible numbers of the regions given (default GB and US) or, with a
    ``+``, of any region.
``postcode``
    UK postcodes (the shape of the Royal Mail's PAF: outward and inward
    code), US ZIP codes after a state abbreviation or the word ZIP, Canadian
    postal codes.
``birth-date``
    A date in any common writing (``12/03/1984``, ``1984-03-12``, ``12th
    March 1984``, ``March 12, 1984``) after "born", "DOB", "date of birth" or
    "birthday".
``address``
    A house number and up to four words ending in a street word (Street,
    Road, Lane, Yard ...), or a flat, unit or apartment number.
``name``
    People's names, found by where they stand rather than by a statistical
    model: the display names of address header lines (From, To, Cc ...);
    the words after a greeting (``Dear``, ``Hi`` ...), a title (``Mr``,
    ``Dr`` ...) or an introduction (``my name is``); the line under a
    sign-off (``Kind regards,``); known given names (the ``nicknames``
    package's hand-curated list) with the capitalised words after them; a
    pair of capitalised words inside a sentence; a short run of letters of
    another script inside Latin-script text. Every word found as a name is
    then masked wherever else it occurs in the same text.
``digits``
    Any other run of seven or more digits.

The choice of rules over a statistical named-entity model, and the measured
precision and recall per kind, are in ``docs/redaction.md``.
"""

from __future__ import annotations

import ipaddress
import re
import unicodedata
from functools import lru_cache

KINDS = (
    "e-mail", "url", "ip", "iban", "card", "sort-code", "account", "birth-date", "phone", "address",
    "postcode", "name", "digits",
)
#: Default regions whose national phone numbers are recognised without a ``+``.
DEFAULT_REGIONS = ("GB", "US")

_EMAIL = re.compile(r"[\w.%+-]+@[\w-]+(?:\.[\w-]+)+")
_URL = re.compile(
    r"\b(?:[a-z][a-z0-9+.-]*://|www\.)[^\s<>\"']+"
    r"|\b[a-z0-9-]+(?:\.[a-z0-9-]+)*\.(?:com|org|net|co\.uk|org\.uk|uk|io|info|biz|xyz|top|ru|cn|de|eu)/[^\s<>\"']*",
    re.I,
)
_IPV4 = re.compile(r"(?<![\w.])(?:\d{1,3}\.){3}\d{1,3}(?![\w]|\.\d)")
_IPV6 = re.compile(r"\[?(?<![\w:])[0-9a-f]{0,4}(?::[0-9a-f]{0,4}){2,7}(?:%\w+)?(?![\w:])\]?", re.I)
_CARD = re.compile(r"(?<![\d-])\d(?:[ -]?\d){12,18}(?![\d-])")
_IBAN_START = re.compile(r"\b[A-Z]{2}\d{2}(?=[ ]?[A-Z0-9])", re.I)
_SORT_CODE = re.compile(r"(?<![\d-])\d{2}([- ]?)\d{2}\1\d{2}(?![\d-])")
_ACCOUNT = re.compile(r"(?<![\d-])\d{4}[ ]?\d{2,6}(?![\d-])|(?<![\d-])\d{6,10}(?![\d-])")
_SORT_WORDS = re.compile(r"\b(?:sort[ -]?code|s/c|sort)\b\W{0,4}(?:(?:is|no\.?|number|:)\W{0,3})?$", re.I)
_ACCOUNT_WORDS = re.compile(
    r"\b(?:account|acct|acc|a/c)\.?(?:[ ]+(?:number|no\.?|num|#))?\W{0,4}(?:(?:is|:)\W{0,3})?$", re.I
)
_MONTHS = (
    r"(?:jan(?:uary)?|feb(?:ruary)?|mar(?:ch)?|apr(?:il)?|may|june?|july?|aug(?:ust)?|sep(?:t(?:ember)?)?"
    r"|oct(?:ober)?|nov(?:ember)?|dec(?:ember)?)"
)
_DATE = re.compile(
    r"\b(?:\d{1,2}[/.-]\d{1,2}[/.-](?:\d{4}|\d{2})|\d{4}[/.-]\d{1,2}[/.-]\d{1,2}"
    rf"|\d{{1,2}}(?:st|nd|rd|th)?(?:\s+of)?\s+{_MONTHS}\.?,?\s+\d{{4}}"
    rf"|{_MONTHS}\.?\s+\d{{1,2}}(?:st|nd|rd|th)?,?\s+\d{{4}})\b",
    re.I,
)
_BIRTH_WORDS = re.compile(
    r"\b(?:born|b\.|dob|d\.o\.b\.?|date\s+of\s+birth|birth\s*date|birthday)\b[^\n\d]{0,24}$", re.I
)
_STREET_WORDS = (
    r"(?:street|st|road|rd|lane|ln|avenue|ave|close|way|drive|court|ct|place|crescent|cres|terrace|tce"
    r"|gardens|gdns|row|walk|boulevard|blvd|square|sq|mews|hill|grove|yard|wharf|quay|parade|rise|view"
    r"|embankment|passage|steps|green)"
)
_ADDRESS = re.compile(
    r"(?:\b(?:flat|apt|apartment|unit|suite)\.?\s*\d+[a-z]?\b,?\s*)?"
    rf"\b\d{{1,4}}[a-z]?(?:-\d{{1,4}})?,?\s+(?:(?!(?:the|a|an|in|on|at|of|by|to|and|my|your|our)\b)[^\W\d_][\w'’-]*\s+){{1,4}}{_STREET_WORDS}\b\.?"
    r"|\b(?:flat|apt|apartment|unit|suite)\.?\s*\d+[a-z]?\b",
    re.I,
)
_POSTCODE = re.compile(
    r"\b(?:[A-Z]{1,2}\d[A-Z\d]?\s?\d[ABD-HJLNP-UW-Z]{2})\b"  # UK (PAF inward letters)
    r"|\b[A-Z]\d[A-Z]\s?\d[A-Z]\d\b"  # Canada
    r"|(?<=\b[A-Z]{2}\s)\d{5}(?:-\d{4})?\b"  # US, after a state abbreviation
    r"|(?<=\bZIP\s)\d{5}(?:-\d{4})?\b|(?<=\bZIP:\s)\d{5}(?:-\d{4})?\b",
)
_POSTCODE_LOWER = re.compile(r"\b[a-z]{1,2}\d[a-z\d]?\s\d[abd-hjlnp-uw-z]{2}\b")
_DIGITS = re.compile(r"\d{7,}")

# --- names --------------------------------------------------------------------

# A word of any script: a letter, then letters, combining marks (Devanagari vowel signs), apostrophes, hyphens.
_WORD = re.compile(r"[^\W\d_](?:[^\s\d_.,;:!?()\[\]{}<>\"/\\@#&+=*|~`^$%]*[^\s\d_.,;:!?()\[\]{}<>\"/\\@#&+=*|~`^$%'’-])?")
# Greeting words before a name at the start of a line (common practice, no source).
_GREETING = re.compile(
    r"^[ \t>]*(?:dear|hi|hello|hey|hiya|hallo|howdy|morning|evening|afternoon|good\s+(?:morning|afternoon|evening)"
    r"|greetings|welcome|congratulations|congrats|thanks|thank\s+you|sorry|attn\.?:?|attention:?|to)[ \t,]+",
    re.I | re.M,
)
# Addressees that are not people.
_NOT_NAMES = frozenset(
    "all everyone everybody team there folks friends neighbour neighbours neighbor neighbors members member "
    "customer customers sir madam you guys both again so for the a an and or it this that your our my we i "
    "whom concern resident residents committee board co-op coop tideway commons winner user client valued "
    "again again! much very in on at of by from with is are was be wishes regards thanks dob".split()
)
_INTRODUCTION = re.compile(
    r"\b(?:my\s+name\s+is|my\s+name's|it’s|i’m|spoke\s+to|spoken\s+to|talked\s+to|asked|thanks\s+to|name\s*:|i\s+am|i'm|this\s+is|it's|it\s+is|signed|c/o|care\s+of|ask\s+for"
    r"|speak\s+to|speak\s+with|talk\s+to|contact|call|ring|text|tell|from|with|and|met|saw|thanks|thank|by|for"
    r"|named|called|neighbour|neighbor|tenant|member|resident|son|daughter|wife|husband|partner|mum|dad)[ \t]+",
    re.I,
)
_SELF = re.compile(r"(?:i\s+am|i'm|i’m|this\s+is|it's|it’s|it\s+is)\b", re.I)
_SELF_AFTER = re.compile(r"[ \t]*(?:from|here|at|of|in|on|with|[,.!;:—-])", re.I)
_STRONG_INTRODUCTION = re.compile(
    r"my\s+name|name\s*:|signed|c/o|care\s+of|called|named|spoke|speak|talk|ask|thank|met\b|tell|contact", re.I
)
_SIGN_OFF = re.compile(
    r"^[ \t]*(?:(?:kind|best|warm|warmest|many|with)\s+(?:regards|wishes|thanks)|regards|best|thanks|thank\s+you"
    r"|many\s+thanks|cheers|sincerely|yours(?:\s+(?:sincerely|faithfully|truly))?|love|take\s+care|all\s+the\s+best"
    r"|ta|speak\s+soon|see\s+you|bye|x+|--|—|-)[ \t]*[,.!]?[ \t]*(?:x+)?[ \t]*$",
    re.I,
)
_SIGN_OFF_SAME_LINE = re.compile(
    r"(?:^|[.!?]\s+|\n)[ \t]*(?:(?:kind|best|warm|many)\s+(?:regards|wishes|thanks)|regards|thanks|cheers|love|best|ta"
    r"|--|—|-|~)[ \t]*(?:[,!]|--|—|-)[ \t]*(?=\S)|(?:^|\n)[ \t]*(?:--|—|-|~)[ \t]*(?=\S)",
    re.I,
)
_TITLE = re.compile(
    r"\b(?:mr|mrs|ms|miss|mx|dr|prof|professor|sir|dame|lady|lord|rev|revd|reverend|fr|father|sister|brother"
    r"|aunt|auntie|uncle|nan|granny|grandma|grandpa|cllr|councillor)\b\.?[ \t]+",
    re.I,
)
# Lower-case particles inside a family name ("van der Berg", "Ní Bhriain" is capitalised anyway).
_PARTICLES = frozenset("van der den de da di del della dos du von le la bin binti ibn al el ter ten".split())
# Words that end a place's or a body's name, so two capitalised words ending in one are not a person.
_PLACE_WORDS = frozenset(
    (
        "street st road rd lane avenue ave close way drive court place crescent terrace gardens row walk "
        "boulevard square mews hill grove park yard wharf quay parade rise view commons common office "
        "hall house centre center store shop room club board committee bank council group team day night "
        "week month year road station market school college university hospital church trust society "
        "association services service ltd limited inc plc co company fitness gym cafe café bar pub "
        "garden bridge river lake estate block building tower court point dock harbour harbor "
        # businesses ("Golden Anchor Takeaway", "Anchor Driving School")
        "takeaway bakery salon studio garage kitchen deli removals lettings cleaning plumbing tutors academy "
        "surgery pharmacy clinic nursery barbers hotel inn shipping motors"
    ).split()
)
# Capitalised words that often open or sit inside a sentence and are not names (common practice, no source).
_COMMON_CAPITALS = frozenset(
    (
        "i i'm i've i'll i'd the a an and or but so if when while this that these those there here we you "
        "they he she it my your our their his her its please thanks thank hi hello dear yes no ok okay "
        "monday tuesday wednesday thursday friday saturday sunday january february march april may june july "
        "august september october november december christmas easter new year agm co-op coop tideway commons "
        "reminder notice update urgent free win winner congratulations act now click call text reply "
        "just also only all any some every each both not don't can't won't is are was were be been has have "
        "had do does did will would shall should can could might must let let's what who why how where which "
        "good great best kind regards cheers love see meeting members member residents resident committee "
        "board office gull harbour harbor yard"
    ).split()
)
# Given names of the gazetteer that are everyday English words: a name only with other evidence.
_WORD_NAMES = frozenset(
    (
        "will bill mark may june april august rose grace hope joy faith dawn summer frank jack art rich "
        "sunny dean pat sue rob ray gene don ben sal val bob bud chuck guy harry jean jerry mike nick "
        "penny ruby sandy sky star stone wade win woody young major earl duke king prince bishop baker "
        "carter cook fisher hunter mason miller parker porter page cliff crystal daisy holly ivy iris lily "
        "hazel heather violet amber jewel pearl ginger candy honey angel autumn brook chase clay cole "
        "drew glen grant heath lane lee mo neil norm pete ed al eddie bell belle bo bea gay sonny "
        "willy dot dolly patty peggy polly ann anne kitty mercy patience prudence charity constance "
        "victor victoria august augusta christian dick left life duty fall link pink chat cage bias kill "
        "mock moss fate king dunk levy ford herb hank hope liberty trinity temperance love"
    ).split()
)


@lru_cache(maxsize=1)
def given_names() -> frozenset[str]:
    """Lower-case given names and nicknames of the ``nicknames`` package (hand-curated, Apache-2.0)."""
    from nicknames import name_triplets

    # Full names from 3 letters, nicknames from 4: the short nicknames ("see", "one", "day") are mostly words.
    names = set()
    for triplet in name_triplets():
        names.add(triplet.name1.lower())
        names.add(triplet.name2.lower() if len(triplet.name2) >= 4 else "")
    return frozenset(n for n in names if len(n) >= 3 and n.isalpha())


def is_given_name(word: str) -> bool:
    """A known given name that is not also an everyday English word (``will``, ``mark``)."""
    w = re.sub(r"['’]s$", "", word.lower())
    return w in given_names() and w not in _WORD_NAMES


def token_kind(token: str) -> str | None:
    """The kind of a single token (as a vectorizer made it) by the checks that apply to one word.

    ``ip`` (with the punctuation around it, ``2001:db8::17.``), ``card`` (Luhn,
    ISO/IEC 7812-1), ``iban`` (ISO 13616 check digits) and ``name`` (a known given
    name that is not an everyday word); None otherwise.
    """
    from stdnum import iban, luhn

    bare = token.strip(".,;:!?()[]{}<>\"'")
    if ":" in bare or bare.count(".") == 3:
        try:
            ipaddress.ip_address(bare.split("%")[0])
            return "ip"
        except ValueError:
            pass
    compact = re.sub(r"[ -]", "", token)
    if compact.isdigit():
        return "card" if 13 <= len(compact) <= 19 and luhn.is_valid(compact) else None
    if 15 <= len(compact) <= 34 and compact[:2].isalpha() and compact[2:4].isdigit():
        return "iban" if iban.is_valid(compact.upper()) else None
    if compact.isalpha() and is_given_name(compact):
        return "name"
    return None


def _cased(ch: str) -> bool:
    return ch.isupper() or ch.islower()


def _name_like(word: str) -> bool:
    """A word that can be part of a name: starts with a capital, or with a letter of an uncased script."""
    head = word[:1]
    return bool(head) and head.isalpha() and (head.isupper() or not _cased(head)) and word.lower() not in _NOT_NAMES


def _script_of(ch: str) -> str:
    return unicodedata.name(ch, "").split(" ")[0]


# --- the detector -------------------------------------------------------------


def find_personal(text: str, regions=DEFAULT_REGIONS) -> list[tuple[int, int, str]]:
    """``(start, end, kind)`` of every personal value in ``text``, left to right, not overlapping.

    Kinds are tried in the order of :data:`KINDS`; where two overlap, the
    earlier kind keeps its span (a Luhn-valid card number is a ``card``, not
    a ``phone``).

    >>> find_personal("Dear Priya, call 020 7946 0018 or write to warden@example.org")
    [(5, 10, 'name'), (17, 30, 'phone'), (43, 61, 'e-mail')]
    """
    found: list[tuple[int, int, str]] = []

    def add(spans, kind):
        for start, end in spans:
            while end > start and text[end - 1] in ".,;:!?)]}'\"":
                end -= 1
            while start < end and text[start] in "[{'\"" or (text[start] == "(" and ")" not in text[start:end]):
                start += 1
            if end > start and not any(s < end and start < e for s, e, _ in found):
                found.append((start, end, kind))

    add(((m.start(), m.end()) for m in _EMAIL.finditer(text)), "e-mail")
    add(((m.start(), m.end()) for m in _URL.finditer(text)), "url")
    add(_ips(text), "ip")
    add(_ibans(text), "iban")
    add(_cards(text), "card")
    sort_codes, accounts = _bank_numbers(text)
    add(sort_codes, "sort-code")
    add(accounts, "account")
    add(_birth_dates(text), "birth-date")
    add(_phones(text, regions), "phone")
    add(((m.start(), m.end()) for m in _ADDRESS.finditer(text)), "address")
    add(((m.start(), m.end()) for m in _POSTCODE.finditer(text)), "postcode")
    add(((m.start(), m.end()) for m in _POSTCODE_LOWER.finditer(text)), "postcode")
    add(find_names(text), "name")
    add(((m.start(), m.end()) for m in _DIGITS.finditer(text)), "digits")
    return sorted(found)


def _ips(text: str):
    for m in _IPV4.finditer(text):
        try:
            ipaddress.IPv4Address(m.group())
        except ValueError:
            continue
        yield m.start(), m.end()
    for m in _IPV6.finditer(text):
        value = m.group().strip("[]")
        if value.count(":") < 2:
            continue
        try:
            ipaddress.IPv6Address(value)
        except ValueError:
            continue
        yield m.start(), m.end()


def _cards(text: str):
    from stdnum import luhn

    for m in _CARD.finditer(text):
        digits = re.sub(r"\D", "", m.group())
        if 13 <= len(digits) <= 19 and luhn.is_valid(digits):
            yield m.start(), m.end()


def _ibans(text: str):
    """Every span of space-separated groups from a country code on whose IBAN check digits hold (longest first)."""
    from stdnum import iban

    for m in _IBAN_START.finditer(text):
        groups = list(re.finditer(r"[A-Z0-9]+", text[m.start(): m.start() + 60], re.I))
        ends = []
        for g in groups:
            if g.start() and text[m.start() + g.start() - 1] not in " ":
                break
            ends.append(m.start() + g.end())
        for end in sorted(ends, reverse=True):
            if iban.is_valid(text[m.start(): end].upper()):
                yield m.start(), end
                break


def _bank_numbers(text: str):
    """Sort codes and account numbers named as such, or standing side by side."""
    sorts = [m for m in _SORT_CODE.finditer(text)]
    accounts = [m for m in _ACCOUNT.finditer(text)]
    sort_spans = []
    for m in sorts:
        before = text[max(0, m.start() - 30): m.start()]
        beside = any(_near(text, m.end(), a.start()) or _near(text, a.end(), m.start()) for a in accounts
                     if not (a.start() < m.end() and m.start() < a.end()))
        if _SORT_WORDS.search(before) or (beside and m.group(1)):
            sort_spans.append((m.start(), m.end()))
    account_spans = []
    for a in accounts:
        if any(s < a.end() and a.start() < e for s, e in sort_spans):
            continue
        before = text[max(0, a.start() - 30): a.start()]
        beside = any(_near(text, e, a.start()) or _near(text, a.end(), s) for s, e in sort_spans)
        if _ACCOUNT_WORDS.search(before) or beside:
            account_spans.append((a.start(), a.end()))
    return sort_spans, account_spans


def _near(text: str, end: int, start: int) -> bool:
    """Two numbers side by side: on one line, at most a short label between (``s/c 12-34-56 a/c 12345678``)."""
    gap = text[end:start]
    return 0 < start - end <= 16 and "\n" not in gap and not any(ch.isdigit() for ch in gap)


def _birth_dates(text: str):
    for m in _DATE.finditer(text):
        if _BIRTH_WORDS.search(text[max(0, m.start() - 40): m.start()]):
            yield m.start(), m.end()


def _phones(text: str, regions):
    import phonenumbers

    seen = set()
    for region in regions:
        for match in phonenumbers.PhoneNumberMatcher(text, region, leniency=phonenumbers.Leniency.POSSIBLE):
            span = (match.start, match.end)
            if span not in seen and sum(c.isdigit() for c in match.raw_string) >= 7:
                seen.add(span)
                yield span


def find_names(text: str) -> list[tuple[int, int]]:
    """``(start, end)`` of people's names in ``text`` (see the module's ``name`` kind)."""
    spans: list[tuple[int, int]] = [(s, e) for s, e, _ in display_names(text)]
    spans += _after(text, _GREETING, strong=True)
    spans += _after(text, _TITLE, strong=True)
    spans += _after(text, _INTRODUCTION, strong=False)
    spans += _signatures(text)
    spans += _known_names(text)
    spans += _foreign_runs(text)
    return _propagated(text, spans)


# A header line that names people (RFC 5322 section 3.6.2-3.6.3), with its folded continuation lines.
_ADDRESS_HEADER = re.compile(
    r"^(?:from|to|cc|bcc|reply-to|sender|resent-from|resent-to|resent-cc|return-path|delivered-to|disposition-notification-to)"
    r"[ \t]*:[^\n]*(?:\n[ \t]+[^\n]*)*",
    re.I | re.M,
)


def display_names(text: str) -> list[tuple[int, int, str]]:
    """``(start, end, "name")`` of the display names in a message's address header lines.

    In ``From: Jane Doe <jane@example.org>`` the address is found by the
    e-mail pattern; the name before it is personal data too: quoted or not,
    with a comma inside (``To: Doe, Jane <jane@example.org>``, not valid
    RFC 5322 but common), or as a comment after a bare address
    (``jane@example.org (Jane Doe)``).
    """
    spans = []
    for line in _ADDRESS_HEADER.finditer(text):
        value_at = line.start() + line.group().index(":") + 1
        at = value_at
        for addr in re.finditer(r"<[^<>\n]*>", text[value_at: line.end()]):
            start, end = at, value_at + addr.start()
            name = text[start:end]
            lead = len(name) - len(name.lstrip(' \t\n,;"'))
            trail = len(name) - len(name.rstrip(' \t\n,;"'))
            if end - trail > start + lead:
                spans.append((start + lead, end - trail, "name"))
            at = value_at + addr.end()
        for comment in re.finditer(r"@[^\s()<>,]+[ \t]*\(([^()\n]+)\)", text[value_at: line.end()]):
            spans.append((value_at + comment.start(1), value_at + comment.end(1), "name"))
    return spans


def names_in(texts) -> frozenset[str]:
    """Lower-case words that stand as people's names in ``texts`` (for the vocabulary's ``personal`` flag).

    Only the positions that say a name follows count (header display names,
    greetings, titles, introductions, sign-offs, the capitalised words after a
    known given name: "Keziah Quayle"), and a word is kept only when
    the texts write it with a capital at least as often as without: "Parcel"
    in a business's name does not make the token ``parcel`` a person.
    """
    import collections

    from sklearn.feature_extraction.text import ENGLISH_STOP_WORDS

    candidates: set[str] = set()
    cased: collections.Counter = collections.Counter()
    for text in map(str, texts):
        spans = [(s, e) for s, e, _ in display_names(text)]
        spans += _after(text, _GREETING, strong=True) + _after(text, _TITLE, strong=True)
        spans += _after(text, _INTRODUCTION, strong=False) + _signatures(text) + _given_name_runs(text)
        for s, e in spans:
            candidates.update(w.group().lower() for w in _WORD.finditer(text, s, e))
        for w in _WORD.finditer(text):
            cased[w.group().lower(), w.group()[:1].islower()] += 1
    skip = _COMMON_CAPITALS | _PLACE_WORDS | _WORD_NAMES | _NOT_NAMES | ENGLISH_STOP_WORDS
    return frozenset(w for w in candidates
                     if len(w) > 1 and w not in skip and cased[w, False] >= cased[w, True])


#: Kinds whose whole values, when written without a space, may reach a vocabulary as one token.
_VALUE_KINDS = frozenset({"birth-date", "card", "iban", "account", "sort-code", "postcode", "phone"})


def personal_words_in(texts) -> dict[str, str]:
    """Lower-case word -> kind, of the people's names (:func:`names_in`) and of the values written as one word
    (a date of birth ``12/03/1984``, an account number) found in ``texts``: the vocabulary marks such tokens."""
    found = {w: "name" for w in names_in(texts)}
    for text in map(str, texts):
        for s, e, kind in find_personal(text):
            value = text[s:e]
            if kind in _VALUE_KINDS and not any(ch.isspace() for ch in value):
                found.setdefault(value.lower(), kind)
    return found


def _name_run(text: str, at: int, strong: bool, limit: int = 3) -> tuple[int, int] | None:
    """The run of name words starting at ``at`` (same line), or None.

    ``strong``: the context alone says a name follows (a greeting, a title),
    so a capitalised word will do; otherwise the first word must be a known
    given name or a capitalised word followed by another one.
    """
    words, named = [], 0  # named: the words that are not particles, at most ``limit``
    for m in _WORD.finditer(text, at):
        gap = text[words[-1].end(): m.start()] if words else text[at: m.start()]
        if "\n" in gap or (words and gap.strip(" \t") not in ("",)) or (not words and gap.strip()):
            break
        if m.group().lower() in _PARTICLES and named < limit:
            # "Rhiannon van der Berg", "Dr van der Berg": lower-case particles inside a family name
            nxt = _WORD.match(text, m.end() + 1)
            if (words or strong) and nxt and text[m.end()] == " " and (_name_like(nxt.group()) or nxt.group().lower() in _PARTICLES):
                words.append(m)
                continue
        after = text[m.end(): m.end() + 3]
        addressed = strong and not words and re.match(r"[ \t]*(?:[,!:\n]| -|$)", after) is not None
        if not _name_like(m.group()) and not (strong and not words and (is_given_name(m.group()) or addressed)):
            break
        if m.group().lower() in _NOT_NAMES:
            break
        if words and m.group().lower() in _PLACE_WORDS:
            if not strong:
                return None  # "Golden Anchor Takeaway", "Tide Mill Road": a business or a place
            break  # "Kind regards, Priya Raman Lettings": where a name must stand, the words before it are kept
        words.append(m)
        named += 1
        if named == limit:
            break
    if not words:
        return None
    first = words[0].group()
    if first.lower() in _COMMON_CAPITALS or first.lower() in _PLACE_WORDS or (first.isupper() and len(first) > 1):
        return None
    if not strong and not (is_given_name(first) or len(words) >= 2 or not _cased(first[0])):
        return None
    return words[0].start(), words[-1].end()


def _after(text: str, context: re.Pattern, strong: bool) -> list[tuple[int, int]]:
    spans = []
    for m in context.finditer(text):
        sure = strong or bool(_STRONG_INTRODUCTION.match(m.group()))
        run = _name_run(text, m.end(), sure)
        if run is None and _SELF.match(m.group()):
            # "it's Dev from the Sail Loft", "this is Mo here": a capitalised word that introduces the writer
            run = _name_run(text, m.end(), True, limit=2)
            if run is not None and not _SELF_AFTER.match(text, run[1]):
                run = None
        while run is not None:
            spans.append(run)
            # "Hi Ana and Tomasz", "Dear Mr and Mrs Okafor"
            more = re.match(r"[ \t]*(?:&|and|\+)[ \t]+", text[run[1]:], re.I)
            if not more:
                break
            run = _name_run(text, run[1] + more.end(), sure)
    return spans


def _signatures(text: str) -> list[tuple[int, int]]:
    """Names on the line under a sign-off, after one on the same line, or alone on the last line."""
    spans = []
    lines = [(m.start(), m.group()) for m in re.finditer(r"[^\n]*", text) if m.group().strip()]
    for i, (at, line) in enumerate(lines):
        if _SIGN_OFF.match(line) and i + 1 < len(lines):
            nxt_at, nxt = lines[i + 1]
            lead = len(nxt) - len(nxt.lstrip())
            run = _name_run(text, nxt_at + lead, strong=True, limit=4)
            if run is not None:
                spans.append(run)
    for m in _SIGN_OFF_SAME_LINE.finditer(text):
        run = _name_run(text, m.end(), strong=True)
        if run is not None and not text[run[1]:].split("\n", 1)[0].strip(" \t.,!x"):
            spans.append(run)
    if lines:
        at, last = lines[-1]
        lead = len(last) - len(last.lstrip())
        run = _name_run(text, at + lead, strong=False)
        if run is not None and not text[run[1]: at + len(last)].strip(" \t.,!x"):
            spans.append(run)
    return spans


def _given_name_runs(text: str) -> list[tuple[int, int]]:
    """Known given names written with a capital, with the capitalised words after them (a surname)."""
    spans = []
    for m in _WORD.finditer(text):
        word = m.group()
        if not word[:1].isupper() or not is_given_name(word) or word.lower() in _COMMON_CAPITALS:
            continue
        run = _name_run(text, m.start(), strong=True)
        if run is not None:
            spans.append(run)
    return spans


def _known_names(text: str) -> list[tuple[int, int]]:
    """Known given names with the capitalised words after them, and pairs of capitalised words in a sentence."""
    spans = _given_name_runs(text)
    # Two capitalised words inside a sentence ("I met Oksana Petrenko at the AGM").
    for m in re.finditer(r"(?:(?<=[a-z,;:] )|(?<=[.!?] )|(?<=^)|(?<=\n))([^\W\d_][\w'’-]+)[ \t]+([^\W\d_][\w'’-]+)", text):
        a, b = m.group(1), m.group(2)
        after = re.match(r"[ \t]+([^\W\d_][\w'’-]+)", text[m.end(2):])
        if after and after.group(1)[0].isupper() and after.group(1).lower() in _PLACE_WORDS:
            continue  # a business or a place: "Golden Anchor Takeaway", "Anchor Driving School"
        if (a[0].isupper() and b[0].isupper() and a.lower() not in _COMMON_CAPITALS
                and b.lower() not in _PLACE_WORDS and b.lower() not in _COMMON_CAPITALS
                and a.lower() not in _PLACE_WORDS and not a.isupper() and not b.isupper()):
            spans.append((m.start(1), m.end(2)))
    return spans


def _foreign_runs(text: str) -> list[tuple[int, int]]:
    """Up to three words of a non-Latin script inside mostly Latin text: a name written in its own script."""
    letters = [ch for ch in text if ch.isalpha()]
    latin = sum(_script_of(ch) == "LATIN" for ch in letters)
    if not letters or latin < 0.6 * len(letters):
        return []
    spans: list[list[int]] = []
    for m in _WORD.finditer(text):
        if any(_script_of(ch) == "LATIN" for ch in m.group()):
            continue
        if spans and not text[spans[-1][1]: m.start()].strip(" \t·・") and spans[-1][2] < 3:
            spans[-1][1:] = [m.end(), spans[-1][2] + 1]
        else:
            spans.append([m.start(), m.end(), 1])
    return [(s, e) for s, e, _ in spans]


def _propagated(text: str, spans) -> list[tuple[int, int]]:
    """The spans, and every other whole-word occurrence of a word found in one of them."""
    words = set()
    for s, e in spans:
        for w in _WORD.finditer(text, s, e):
            if len(w.group()) > 1 and w.group().lower() not in _COMMON_CAPITALS:
                words.add(w.group().lower())
    spans = list(spans)
    if words:
        for m in _WORD.finditer(text):
            # the same word written as a name (capital or uncased script): "levy" is not "Levy"
            if m.group().lower() in words and not m.group()[:1].islower():
                spans.append((m.start(), m.end()))
    # merge overlapping or touching runs of one name
    merged: list[list[int]] = []
    for s, e in sorted(spans):
        if merged and s <= merged[-1][1] + (1 if text[merged[-1][1]: s].strip() == "" else 0) and s <= merged[-1][1] + 1:
            merged[-1][1] = max(merged[-1][1], e)
        else:
            merged.append([s, e])
    return [(s, e) for s, e in merged]
