"""The labelled set of invented Tideway Commons messages for measuring redaction (``tests/data/personal_set.jsonl``).

Every value is invented or reserved: e-mail domains and URLs of RFC 2606
(example.org/.net/.com), IP addresses of RFC 5737 (192.0.2.0/24,
198.51.100.0/24, 203.0.113.0/24) and RFC 3849 (2001:db8::/32), phone numbers
of the 555-0100 to 555-0199 block and Ofcom's drama ranges (020 7946 0xxx,
07700 900xxx), card numbers of the card networks' published test numbers or
made Luhn-valid here, IBANs made checksum-valid here with ``stdnum.iban``, and
people, streets and postcodes made up for the scenario. ``python tests/personal_set.py``
writes the file again (the same bytes: one seeded generator); the test reads
the committed file.

A message is ``{"id", "text", "spans": [[start, end, kind], ...]}``; any
part of the text not in a span is not personal (dates of meetings, prices,
places, the co-operative's own name are there on purpose as decoys).
"""

from __future__ import annotations

import json
import random
from pathlib import Path

PATH = Path(__file__).parent / "data" / "personal_set.jsonl"

GIVEN = [
    "Priya", "Tomasz", "Oksana", "Kwame", "Siobhán", "Zoë", "José", "Mei", "Björn", "Aoife", "Femi", "Agnieszka",
    "Yusuf", "Ingrid", "Rhiannon", "Dev", "Chidi", "Marisol", "Hamish", "Keziah", "Lorcan", "Noor", "Amara",
    "Sunita", "Leon", "Wren", "Iwan", "Bronwen", "Kasia", "Olu", "Teodora", "Rafael", "Anneliese", "Hiroshi",
]
FAMILY = [
    "Raman", "Nowak", "Petrenko", "Mensah", "Ní Bhriain", "Kowalczyk", "Álvarez", "Lin", "Åberg", "Okafor",
    "Adeyemi", "Chaudhry", "Pengelly", "Tremayne", "Abernethy", "Mbeki-Hart", "Varga", "O'Driscoll", "Sandoval",
    "Quayle", "Harte", "Lusk", "Drury", "Haddad", "Takahashi", "van der Berg",
]
SCRIPT_NAMES = ["Ольга Петренко", "Ελένη Παππά", "ليلى حداد", "王芳", "प्रिया", "Дмитро", "נועה כהן", "김민준", "Σοφία"]
STREETS = ["Ropewalk Lane", "Quay Street", "Chandlers Row", "Lantern Hill", "Tide Mill Road", "Slipway Close",
           "Kelp Street", "Lifeboat Lane", "Breakwater Road", "Gull Yard", "Beacon Walk", "Harbour Terrace"]
POSTCODES = ["TD4 7QX", "TR1 2AB", "PL9 3HN", "EX2 8LW", "TD14 5DE", "TR18 4QQ", "SW1A 1AA", "M60 2LA"]


def _luhn_complete(r, prefix: str, length: int) -> str:
    from stdnum import luhn

    body = prefix + "".join(str(r.randrange(10)) for _ in range(length - len(prefix) - 1))
    return body + luhn.calc_check_digit(body)


def _iban(r, country: str, bban: str) -> str:
    from stdnum import iban

    for check in range(100):
        value = f"{country}{check:02d}{bban}"
        if iban.is_valid(value):
            return value
    raise AssertionError(bban)


class _Message:
    def __init__(self):
        self.parts: list[tuple[str, str | None]] = []

    def add(self, text: str, kind: str | None = None):
        self.parts.append((text, kind))
        return self

    def record(self, mid: str) -> dict:
        text, spans = "", []
        for piece, kind in self.parts:
            if kind is not None:
                spans.append([len(text), len(text) + len(piece), kind])
            text += piece
        return {"id": mid, "text": text, "spans": spans}


def _name(r) -> str:
    pick = r.random()
    if pick < 0.15:
        return r.choice(SCRIPT_NAMES)
    if pick < 0.55:
        return r.choice(GIVEN)
    return f"{r.choice(GIVEN)} {r.choice(FAMILY)}"


def _phone(r) -> str:
    n = r.randrange(100, 200)
    return r.choice([
        f"555-01{n % 100:02d}", f"(202) 555-01{n % 100:02d}", f"202-555-01{n % 100:02d}", f"+1 202 555 01{n % 100:02d}", f"202.555.01{n % 100:02d}",
        f"020 7946 0{n % 1000:03d}", f"+44 20 7946 0{n % 1000:03d}", f"07700 900{n % 1000:03d}", f"+44 7700 900{n % 1000:03d}",
        f"+1 555 555 01{n % 100:02d}", f"555-01{n % 100:02d}", f"0207 946 0{n % 1000:03d}",
    ])


def _card(r) -> str:
    number = r.choice([_luhn_complete(r, "4", 16), _luhn_complete(r, "51", 16), _luhn_complete(r, "37", 15),
                       "4111111111111111", "5555555555554444", "378282246310005", _luhn_complete(r, "6011", 16)])
    style = r.randrange(3)
    if style == 0 and len(number) == 16:
        return " ".join(number[i:i + 4] for i in range(0, 16, 4))
    if style == 1 and len(number) == 16:
        return "-".join(number[i:i + 4] for i in range(0, 16, 4))
    return number


def _iban_value(r) -> str:
    country, bban = r.choice([
        ("GB", "TIDE" + "".join(str(r.randrange(10)) for _ in range(14))),
        ("GB", "WEST" + "".join(str(r.randrange(10)) for _ in range(14))),
        ("DE", "".join(str(r.randrange(10)) for _ in range(18))),
        ("NL", "ABNA" + "".join(str(r.randrange(10)) for _ in range(10))),
        ("FR", "".join(str(r.randrange(10)) for _ in range(23))),
        ("IE", "AIBK" + "".join(str(r.randrange(10)) for _ in range(14))),
    ])
    value = _iban(r, country, bban)
    return " ".join(value[i:i + 4] for i in range(0, len(value), 4)) if r.random() < 0.6 else value


def _address(r) -> str:
    return r.choice([f"{r.randrange(1, 60)} {r.choice(STREETS)}", f"Flat {r.randrange(1, 40)}{r.choice(['', 'A', 'B'])}",
                     f"{r.randrange(1, 60)}a {r.choice(STREETS)}", f"Flat {r.randrange(1, 9)}, {r.randrange(1, 60)} {r.choice(STREETS)}"])


def _dob(r) -> tuple[str, str]:
    d, m, y = r.randrange(1, 28), r.randrange(1, 13), r.randrange(1940, 2008)
    month = ["January", "February", "March", "April", "May", "June", "July", "August", "September", "October",
             "November", "December"][m - 1]
    lead = r.choice(["DOB ", "DOB: ", "born ", "born on ", "date of birth ", "Date of birth: ", "my birthday is ", "D.O.B. "])
    value = r.choice([f"{d:02d}/{m:02d}/{y}", f"{d}/{m}/{y}", f"{y}-{m:02d}-{d:02d}", f"{d} {month} {y}",
                      f"{d}th {month} {y}", f"{month} {d}, {y}", f"{d}.{m}.{y}", f"{d}-{m:02d}-{y}"])
    return lead, value


DECOYS = [
    "The AGM is on 12/03/2026 at 7pm in the common room.", "Bins go out on Tuesday.", "Tideway Commons newsletter, issue 41.",
    "The workshop costs £19.99 and starts at 10:30.", "Order ref TC-2041 is ready at the Harbour Office.",
    "Gull Yard will be closed for resurfacing.", "The 8:15 bus was late again.", "Meeting moved to Thursday 18:00.",
    "Room 4 is booked for the repair cafe.", "3 chairs and 2 tables free to collect.", "We raised £1,240 at the fair!",
    "Please read section 2.3 of the rules.", "Version 1.4.2 of the app is out.", "Rent goes up 3.5% from April.",
    "Will you bring the ladder on Monday?", "Mark the date: 14 June 2026.", "May we use the bike store?",
    "Free Wi-Fi in the Sail Loft from today.", "Call the Harbour Office if the lift breaks.",
]


def _body_items(r) -> list[tuple[str, str | None]]:
    """Sentences of running text, each holding zero or one personal value."""
    who = _name(r)
    items = r.choice([
        [("I spoke to ", None), (who, "name"), (" about the leak yesterday.", None)],
        [("My name is ", None), (who, "name"), (" and I live upstairs.", None)],
        [("Ask for ", None), (who, "name"), (" at the desk.", None)],
        [("Mr ", None), (r.choice(FAMILY), "name"), (" says the boiler is fixed.", None)],
        [("Dr ", None), (r.choice(FAMILY), "name"), (" will run the first aid session.", None)],
        [(who, "name"), (" left a parcel by the door.", None)],
        [("I met ", None), (f"{r.choice(GIVEN)} {r.choice(FAMILY)}", "name"), (" at the garden day.", None)],
        [("Thanks to ", None), (who, "name"), (" for the cakes.", None)],
        [("Call me on ", None), (_phone(r), "phone"), (" after six.", None)],
        [("My number is ", None), (_phone(r), "phone"), (".", None)],
        [("Text ", None), (_phone(r), "phone"), (" to book a slot.", None)],
        [("Pay with card ", None), (_card(r), "card"), (" today.", None)],
        [("My card number is ", None), (_card(r), "card"), (", expiry 09/28.", None)],
        [("Send it to IBAN ", None), (_iban_value(r), "iban"), (" please.", None)],
        [("Our IBAN: ", None), (_iban_value(r), "iban"), ("", None)],
        [("Sort code ", None), (f"{r.randrange(10, 99)}-{r.randrange(10, 99)}-{r.randrange(10, 99)}", "sort-code"),
         (", account ", None), (f"{r.randrange(10**7, 10**8)}", "account"), (".", None)],
        [("s/c ", None), (f"{r.randrange(10, 99)} {r.randrange(10, 99)} {r.randrange(10, 99)}", "sort-code"),
         (" a/c ", None), (f"{r.randrange(10**7, 10**8)}", "account"), ("", None)],
        [("Account number: ", None), (f"{r.randrange(10**7, 10**8)}", "account"), (".", None)],
        [("I live at ", None), (_address(r), "address"), (".", None)],
        [("Deliveries to ", None), (_address(r), "address"), (", ", None), (r.choice(POSTCODES), "postcode"), (".", None)],
        [("Postcode ", None), (r.choice(POSTCODES).lower() if r.random() < 0.2 else r.choice(POSTCODES), "postcode"), (" for the sat nav.", None)],
        [("It ships to Springfield, IL ", None), (f"627{r.randrange(10, 99)}", "postcode"), (".", None)],
        [*((lambda lead, value: [(lead, None), (value, "birth-date")])(*_dob(r))), (" for the form.", None)],
        [("Write to ", None), (f"{r.choice(GIVEN).lower()}.{r.choice(['warden', 'rota', 'home'])}@example.org", "e-mail"), (".", None)],
        [("Details at ", None), (r.choice(["https://tideway.example.net/notices", "www.example.org/rota",
                                           "http://example.com/claim?id=77", "example.net/prize"]), "url"), (" today.", None)],
        [("Its address is [", None), ("2001:db8::1", "ip"), ("], port 8080.", None)],
        [("The printer is on ", None), (f"192.0.2.{r.randrange(1, 255)}", "ip"), (".", None)],
        [("Logged from ", None), (r.choice(["2001:db8::17", "2001:db8:0:0:1::7", "2001:0db8:85a3:0000:0000:8a2e:0370:7334",
                                            f"198.51.100.{r.randrange(1, 255)}", f"203.0.113.{r.randrange(1, 255)}"]), "ip"),
         (" at 02:14.", None)],
    ])
    return [*items, (" ", None), (r.choice(DECOYS), None)]


def _headers(r, m: _Message) -> None:
    who, other = _name(r), _name(r)
    local = r.choice(GIVEN).lower()
    style = r.randrange(4)
    if style == 0:
        m.add("From: ").add(who, "name").add(" <").add(f"{local}@example.org", "e-mail").add(">\n")
    elif style == 1:
        m.add('From: "').add(who, "name").add('" <').add(f"{local}@example.net", "e-mail").add(">\n")
    elif style == 2:
        m.add("From: ").add(f"{local}@example.com", "e-mail").add(" (").add(who, "name").add(")\n")
    else:
        fam, given = r.choice(FAMILY), r.choice(GIVEN)
        m.add("From: ").add(f"{fam}, {given}", "name").add(" <").add(f"{given.lower()}@example.org", "e-mail").add(">\n")
    m.add("To: ").add(other, "name").add(" <").add(f"{r.choice(GIVEN).lower()}@example.net", "e-mail").add(">\n")
    if r.random() < 0.3:
        m.add("Subject: call ").add(_phone(r), "phone").add("\n")
    else:
        m.add("Subject: ").add(r.choice(["Rota", "Bike store", "Your parcel", "Garden day", "URGENT: account"])).add("\n")
    m.add("\n")


def build(n: int = 360, seed: int = 18) -> list[dict]:
    r = random.Random(seed)
    out = []
    for i in range(n):
        m = _Message()
        if r.random() < 0.25:
            _headers(r, m)
        greet = r.random()
        if greet < 0.55:
            opener = r.choice(["Dear ", "Hi ", "Hello ", "Hey ", "Morning ", "Good evening ", "hi "])
            who = _name(r)
            if opener == "hi " and " " not in who:
                who = who.lower() if who.isascii() else who
            m.add(opener).add(who, "name").add(r.choice([",\n", "!\n", " - ", ", "]))
        for _ in range(r.randrange(1, 3)):
            for piece, kind in _body_items(r):
                m.add(piece, kind)
            m.add(" ")
        end = r.random()
        if end < 0.6:
            m.add(r.choice(["\nKind regards,\n", "\nThanks,\n", "\nCheers\n", "\nBest wishes,\n", "\nMany thanks\n", "\nLove,\n"]))
            m.add(_name(r), "name")
        elif end < 0.8:
            m.add(r.choice(["\nThanks, ", "\n- ", "\n-- "])).add(_name(r), "name")
        out.append(m.record(f"ps-{i + 1:04d}"))
    return out


def load() -> list[dict]:
    return [json.loads(line) for line in PATH.read_text(encoding="utf-8").splitlines()]


def measure(messages, detect) -> dict[str, dict[str, float]]:
    """Precision and recall per kind of ``detect(text) -> [(start, end, kind)]`` on labelled ``messages``.

    A labelled value is found when spans of its own kind cover every one of its
    characters; a detected span is right when it overlaps a labelled value of
    its kind (common practice for span-level scoring, no source).
    """
    from collections import Counter

    labelled, found, right, detected = Counter(), Counter(), Counter(), Counter()
    misses: dict[str, list[str]] = {}
    wrong: dict[str, list[str]] = {}
    for m in messages:
        text, spans = m["text"], m["spans"]
        got = detect(text)
        for s, e, kind in spans:
            labelled[kind] += 1
            covered = set()
            for a, b, k in got:
                if k == kind:
                    covered.update(range(max(a, s), min(b, e)))
            if all(i in covered or text[i].isspace() for i in range(s, e)):
                found[kind] += 1
            else:
                misses.setdefault(kind, []).append(f"{m['id']}: {text[s:e]!r}")
        for a, b, k in got:
            detected[k] += 1
            if any(k == kind and a < e and s < b for s, e, kind in spans):
                right[k] += 1
            else:
                wrong.setdefault(k, []).append(f"{m['id']}: {text[a:b]!r}")
    kinds = sorted(set(labelled) | set(detected))
    return {
        k: {"labelled": labelled[k], "found": found[k],
            "recall": found[k] / labelled[k] if labelled[k] else float("nan"),
            "detected": detected[k], "right": right[k],
            "precision": right[k] / detected[k] if detected[k] else float("nan"),
            "misses": misses.get(k, []), "wrong": wrong.get(k, [])}
        for k in kinds
    }


TABLE_HEAD = (
    "| kind | labelled | found | recall | recall, 95% lower end | detected | right | precision |\n"
    "| --- | ---: | ---: | ---: | ---: | ---: | ---: | ---: |\n"
)


def table(figures: dict[str, dict]) -> str:
    """The "Measured" table of ``docs/redaction.md``, made from :func:`measure`'s figures.

    ``recall, 95% lower end`` is the lower end of the two-sided Wilson score
    interval (Wilson 1927) of found / labelled, through
    :func:`explain.analysis.stats.wilson_interval`: with few labelled values a
    recall of 1.000 promises little. ``test_personal_data`` compares this
    table with the one in the docs, so the two cannot drift apart.
    """
    from explain.analysis.stats import wilson_interval

    def share(value: float) -> str:
        return "-" if value != value else f"{value:.3f}"

    rows = []
    for kind, f in figures.items():
        low = float(wilson_interval(f["found"], f["labelled"])[0]) if f["labelled"] else float("nan")
        rows.append(
            f"| `{kind}` | {f['labelled']} | {f['found']} | {share(f['recall'])} | {share(low)} | "
            f"{f['detected']} | {f['right']} | {share(f['precision'])} |\n"
        )
    return TABLE_HEAD + "".join(rows)


def table_in(markdown: str) -> str:
    """The table under ``## Measured`` in ``markdown`` (from its heading row to the first line not a row)."""
    start = markdown.index(TABLE_HEAD.splitlines()[0])
    lines = []
    for line in markdown[start:].splitlines(keepends=True):
        if not line.startswith("|"):
            break
        lines.append(line)
    return "".join(lines)


if __name__ == "__main__":
    import sys

    if sys.argv[1:] == ["table"]:
        # python tests/personal_set.py table: the figures for docs/redaction.md
        from explain.analysis.personal_data import find_personal

        print(table(measure(load(), find_personal)), end="")
    else:
        PATH.parent.mkdir(exist_ok=True)
        PATH.write_text("".join(json.dumps(x, ensure_ascii=False) + "\n" for x in build()), encoding="utf-8")
