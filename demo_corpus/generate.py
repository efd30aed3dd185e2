#!/usr/bin/env python3
"""Generate the Tideway Commons demo corpus (invented data, standard library only).

Tideway Commons is an invented housing co-operative in the invented harbour
town of Brackenmouth.  Its members' app carries direct messages; moderators
sort them into ``ok``, ``scam`` and ``advert``.  Every name, street, business,
number and address below is made up; personal-looking values come only from
reserved ranges (example.org / example.net / example.com, 555-0100..555-0189,
192.0.2.0/24).

Usage::

    python demo_corpus/generate.py              # write demo_corpus/messages.csv
    python demo_corpus/generate.py --out x.csv  # write elsewhere
    python demo_corpus/generate.py --check      # compare with the committed CSV

The output is byte-identical on every machine: one seeded ``random.Random``,
no set iteration, no locale, no clock.
"""

from __future__ import annotations

import argparse
import csv
import datetime as dt
import hashlib
import io
import random
import re
import sys
from pathlib import Path

SEED = 20260114
N_MESSAGES = 6000
N_SCAM = 900  # 15 %
N_ADVERT = 480  # 8 %
# Deliberately flipped labels: (true label, shown label, how many).
NOISE_PLAN = (
    ("ok", "scam", 18),
    ("scam", "ok", 18),
    ("ok", "advert", 10),
    ("advert", "ok", 10),
    ("scam", "advert", 2),
    ("advert", "scam", 2),
)
YEAR = 2026
HERE = Path(__file__).resolve().parent
DEFAULT_OUT = HERE / "messages.csv"
NOISE_OUT = HERE / "label_noise.csv"

# ---------------------------------------------------------------------------
# Vocabulary of the invented scenario
# ---------------------------------------------------------------------------

NAMES = [
    "Aisha", "Bronwen", "Callum", "Dev", "Effie", "Femi", "Gwen", "Hamish",
    "Ines", "Jonah", "Kasia", "Leon", "Marisol", "Niamh", "Oskar", "Priya",
    "Rhiannon", "Sami", "Tomasz", "Ursula", "Vik", "Wren", "Yusuf", "Zofia",
    "Alfie", "Bea", "Cormac", "Dilys", "Eamon", "Farah", "Greer", "Hal",
    "Isla", "Jago", "Keziah", "Lorcan", "Mabli", "Nadia", "Ossie", "Pip",
    "Rosa", "Seren", "Tegan", "Theo", "Ada", "Morwenna", "Kofi", "Mei",
    "Lars", "Ruth", "Stan", "Joy", "Arlo", "Elspeth", "Hugo", "Iwan",
    "Lowri", "Mo", "Sunita", "Declan", "Agnieszka", "Benji", "Carys", "Olu",
]
SURNAMES = [
    "Pengelly", "Okafor", "Tremayne", "Nowak", "Abernethy", "Chaudhry",
    "Rowe", "Kettleby", "Mbeki-Hart", "Lusk", "Varga", "Penhallow", "Drury",
    "Sandoval", "Quayle", "Harte",
]
STREETS = [
    "Ropewalk Lane", "Quay Street", "Chandlers Row", "Lantern Hill",
    "Tide Mill Road", "Cooper's Steps", "Harbour Terrace", "Slipway Close",
    "Kelp Street", "Lifeboat Lane", "Smokehouse Row", "Breakwater Road",
    "Gull Yard", "Beacon Walk",
]
CUSTOMS_QUAY = "Customs House Quay"
CUSTOMS_QUAY_SHARE = 0.05
BLOCKS = [
    "Netloft House", "the Sail Loft", "Chandlery Court", "Pilot's Row",
    "the Granary", "Gantry House",
]
FLATS = ["1A", "2B", "3C", "4", "7", "9", "12", "14", "15B", "21", "3", "6A", "18", "22"]
DAYS = ["Monday", "Tuesday", "Wednesday", "Thursday", "Friday", "Saturday", "Sunday"]
WHEN = [
    "tomorrow", "this weekend", "on Saturday", "on Sunday", "tonight",
    "later today", "on Thursday evening", "Friday after work", "first thing Monday",
    "next week", "this afternoon", "on Wednesday",
]
TIMES = [
    "9", "9.30", "10", "10am", "11", "half 11", "12", "1pm", "2", "half 2",
    "3", "4pm", "5", "5.30", "6", "6pm", "7", "7.30", "8",
]
TOOLS = [
    "drill", "ladder", "step ladder", "pressure washer", "sewing machine",
    "jigsaw", "hedge trimmer", "wallpaper steamer", "carpet cleaner", "gazebo",
    "folding table", "track pump", "tile cutter", "stud finder", "mitre saw",
    "orbital sander", "paddling pool", "camping stove", "travel cot",
    "high chair", "spirit level", "socket set", "glue gun", "leaf blower",
    "wheelbarrow", "set of jump leads", "strimmer", "pasta machine", "projector",
    "tent", "sack truck", "stepladder", "angle grinder", "soldering iron",
]
FURNITURE = [
    ("sofa", 40, 180), ("two-seater sofa", 30, 120), ("wardrobe", 25, 90),
    ("dining table", 30, 140), ("chest of drawers", 15, 60),
    ("bookcase", 10, 45), ("bunk beds", 40, 110), ("armchair", 15, 70),
    ("desk", 15, 60), ("kids' bike", 10, 40), ("cot", 20, 60), ("pram", 30, 120),
    ("fridge freezer", 40, 150), ("washing machine", 50, 160), ("mirror", 5, 30),
    ("rug", 10, 50), ("coffee table", 10, 40), ("sideboard", 30, 95),
    ("office chair", 10, 35), ("double bed frame", 30, 100),
    ("set of four chairs", 20, 60), ("TV stand", 5, 25), ("bike", 40, 150),
    ("microwave", 10, 25), ("bedside tables", 10, 30), ("sofa bed", 50, 160),
]
CHILD_TASKS = [
    "do the school run", "pick up from Harbour Primary", "have the kids for an hour",
    "take them to swimming", "grab the little one from nursery",
    "watch the kids while I'm at the dentist", "do pick-up",
    "have the boys after school", "take both girls to football practice",
    "sit with them till their dad gets back",
]
KIDS = ["Milo", "Ffion", "Rudy", "Asha", "Kit", "Noor", "Bram", "Elsie", "Tomos", "Lila", "Jude", "Pia"]
EVENTS = [
    ("harbour clean-up", (3, 4, 9, 10)), ("quiz night", None), ("potluck", None),
    ("summer fete", (6, 7)), ("film night", None), ("AGM", (5,)),
    ("bonfire night", (10, 11)), ("plant swap", (3, 4, 5)), ("repair cafe", None),
    ("carol singing", (12,)), ("Christmas party", (11, 12)),
    ("kids' sports day", (6, 7)), ("open workshop afternoon", None),
    ("litter pick on the beach", (4, 5, 8, 9)), ("coffee morning", None),
    ("bake sale", None), ("boat day", (7, 8)),
]
VENUES = ["the common room", "the workshop", "the drying green", "the roof terrace", "the courtyard", "the bike store"]
WORKSHOP_KIT = ["bandsaw", "lathe", "pillar drill", "bench sander", "router table", "welder", "3D printer", "kiln", "sewing bench", "spray booth"]
PLANTS = ["courgettes", "tomato plants", "runner beans", "rhubarb", "spider plant cuttings", "chilli seedlings", "strawberry runners", "mint", "squash", "basil"]
PARCEL_FIRMS = ["Harbour Post", "Tideway Post Room", "Parcel Desk", "HarbourExpress", "the parcel service", "Harbour Parcels Ltd", "Parcel Delivery Team"]
COOP_ROLES = ["treasurer", "maintenance rep", "membership secretary", "events group", "office", "housing committee"]

# Outside businesses (all invented).
BUSINESSES = [
    # name, site host, services (noun phrases), pitches (sentences), offers
    ("Brightpane Window Cleaning", "brightpane.example.com",
     ["window cleaning", "a regular window clean", "conservatory roof cleaning"],
     ["We use pure water poles so we can reach the top floors without ladders.", "Frames, sills and doors included.", "Same cleaner every visit."],
     ["first clean free", "£12 a fortnight for flats", "20% off for new customers", "no contract, cancel anytime"]),
    ("ClearView Harbour", "clearview-harbour.example.com",
     ["window cleaning", "gutter and fascia cleaning"],
     ["We're already doing a few streets near the harbour so we can fit you in easily.", "Reliable, friendly and fully insured."],
     ["£10 a visit for upper floors", "your first clean free", "two months half price"]),
    ("SunQuay Solar", "sunquay-solar.example.com",
     ["solar panels", "battery storage", "a free roof survey"],
     ["Energy prices are going up again, so now is the time to make your own.", "Our installers are local and fully accredited.", "Most systems pay for themselves in a few years."],
     ["savings of up to £600 a year", "0% finance", "a free survey this month only"]),
    ("Harbourlight Energy", "harbourlight.example.com",
     ["solar panels", "heat pumps", "a home energy assessment"],
     ["We can check whether your building qualifies for a grant.", "Cut your bills and your carbon.", "Households on benefits may qualify for a fully funded install."],
     ["free quotes", "£250 off installs booked before the end of the month", "a free energy assessment"]),
    ("Golden Anchor Takeaway", "goldenanchor.example.com",
     ["fish and chips", "takeaway delivered to your door"],
     ["Fresh fish straight off the boats every morning.", "We deliver all over Brackenmouth till 11pm."],
     ["2 for 1 on Tuesdays", "10% off your first order with code TIDE10", "free chips with any large order"]),
    ("Spice Harbour", "spiceharbour.example.com",
     ["curry night sorted", "Indian takeaway"],
     ["Our new menu has loads of vegan options.", "Order online and it's with you in 40 minutes."],
     ["20% off collection orders", "a free naan on orders over £25", "a meal deal for two at £19.99"]),
    ("Pizza Quay", "pizzaquay.example.com",
     ["stone baked pizza", "late night delivery"],
     ["Proper sourdough bases, cooked in a wood fired oven.", "We're open till midnight Friday and Saturday."],
     ["any large pizza for £9.99 on Mondays", "free garlic bread with code HARBOUR", "buy one get one free this weekend"]),
    ("Anchor Driving School", "anchordriving.example.com",
     ["driving lessons", "an intensive driving course", "motorway lessons"],
     ["Patient, friendly instructors with a high first time pass rate.", "Pick up and drop off from your door."],
     ["your first 3 lessons for £60", "a block booking discount", "lessons in automatic or manual"]),
    ("Keel & Clutch Driving Lessons", "keelclutch.example.com",
     ["driving lessons", "mock tests before the real thing"],
     ["Nervous drivers are very welcome.", "Evening and weekend slots available."],
     ["first lesson half price", "lessons at £28 an hour", "10 hours for £260"]),
    ("Tidy Gutters", "tidygutters.example.com",
     ["gutter clearing", "moss removal", "small roof repairs"],
     ["Blocked gutters cause damp, don't leave it till winter.", "We send you before and after photos."],
     ["gutters cleared from £45", "a free camera inspection", "10% off for co-op residents"]),
    ("Harbour Heat & Gas", "harbourheat.example.com",
     ["a boiler service", "a new boiler", "a gas safety check"],
     ["Qualified, registered engineers, no call-out charge.", "Don't wait for it to break down in January.", "Free boiler replacements for homes on benefits, ask if you qualify."],
     ["servicing from £59", "new boilers from £1,850 fitted", "a free quote"]),
    ("QuayNet Fibre", "quaynet.example.com",
     ["full fibre broadband", "faster internet"],
     ["We've just finished laying fibre along the harbour front.", "No price rises mid-contract, ever."],
     ["£22 a month for 18 months", "the first 3 months free", "free installation"]),
    ("Salty Paws Grooming", "saltypaws.example.com",
     ["dog grooming", "dog walking", "puppy daycare"],
     ["Small groups, lots of beach walks and plenty of treats.", "Fully insured and background checked."],
     ["first groom for £20", "10% off weekly walks", "a free nail trim with any groom"]),
    ("Lighthouse Removals & Storage", "lighthouse-removals.example.com",
     ["a man and van", "house removals", "a storage unit"],
     ["Moving out of the co-op? We know the narrow lanes round the harbour.", "Careful, quick and cheap."],
     ["vans from £35 an hour", "your first month's storage free", "free boxes with every move"]),
    ("FreshStep Carpet Cleaning", "freshstep.example.com",
     ["carpet cleaning", "sofa and upholstery cleaning"],
     ["Carpets dry in a couple of hours.", "Great before you move out and want your deposit back."],
     ["3 rooms for £69", "any sofa cleaned for £35", "free pet stain treatment"]),
    ("Beacon Tutors", "beacontutors.example.com",
     ["maths and English tutoring", "GCSE revision", "11+ prep"],
     ["All our tutors are qualified teachers.", "Sessions online or at your kitchen table."],
     ["a free trial lesson", "lessons from £25 an hour", "small group sessions from £12"]),
    ("Harbourside Fitness", "harboursidefit.example.com",
     ["a gym membership", "personal training", "spin classes"],
     ["New equipment, sauna and a sea view from the treadmills.", "Classes every morning from 6."],
     ["no joining fee this month", "membership for £19.99 a month", "a free 7 day pass"]),
    ("Quayside Lettings & Sales", "quayside-homes.example.com",
     ["a free valuation", "help selling or letting"],
     ["Properties near the harbour are in high demand right now.", "We have buyers waiting in your area."],
     ["a 0.9% selling fee", "a free valuation this week", "no sale, no fee"]),
    ("FixIt Harbour Phone Repair", "fixitharbour.example.com",
     ["phone and tablet repairs", "a new screen"],
     ["Most repairs done while you wait.", "We also buy old phones for cash."],
     ["screens from £39", "10% off with this message", "a free phone case with any repair"]),
    ("Pearl & Polish", "pearlpolish.example.com",
     ["nails, lashes and brows", "a mobile beauty visit"],
     ["I come to you, so no need to find a babysitter!", "Gel nails that actually last three weeks."],
     ["gel nails for £18", "25% off your first visit", "£5 off when you refer a friend"]),
    ("Harbour Pest Control", "harbourpest.example.com",
     ["pest control", "mouse and rat treatments", "wasp nest removal"],
     ["Discreet unmarked vans.", "Same day call-outs most days."],
     ["wasp nests from £55", "a free survey", "a 3 month guarantee"]),
    ("Greenwake Gardens", "greenwake.example.com",
     ["garden clearance", "hedge cutting", "landscaping"],
     ["We take all the green waste away with us.", "No job too small, even a balcony."],
     ["free quotes", "£20 off your first visit", "free green waste removal"]),
    ("Quay Skip Hire", "quayskips.example.com",
     ["skip hire", "rubbish removal"],
     ["We sort the council permit for you.", "Same day delivery if you call before 10."],
     ["mini skips from £99", "wait and load from £120", "a free permit"]),
    ("Harbour Light Photography", "harbourlight-photo.example.com",
     ["a family photo shoot", "pet portraits"],
     ["Relaxed shoots on the beach or in your home.", "Photos make the best presents."],
     ["mini shoots for £45", "a free print with every booking", "20% off shoots booked this month"]),
]
# What a one-person outfit would say it does (for adverts that sound like a neighbour).
TRADES = {
    "Brightpane Window Cleaning": "window cleaning", "ClearView Harbour": "windows and gutters",
    "Tidy Gutters": "gutter clearing", "Salty Paws Grooming": "dog walking and grooming",
    "Lighthouse Removals & Storage": "man and van jobs", "FreshStep Carpet Cleaning": "carpet cleaning",
    "Beacon Tutors": "maths tutoring", "Pearl & Polish": "nails and lashes", "Greenwake Gardens": "garden tidy-ups",
    "Harbour Light Photography": "family photos", "Keel & Clutch Driving Lessons": "driving lessons",
    "FixIt Harbour Phone Repair": "phone screen repairs", "Harbour Heat & Gas": "boiler servicing",
}
ADVERT_SENDERS = ["Kev", "Shaz", "Dom", "Paula", "Gary", "Tina", "Marc", "Lou", "Jas", "Becca", "Ron", "Dani"]

ADVERT_SOFT_SHARE = 0.32
ADVERT_FOLLOWUP_SHARE = 0.1

SCAM_SENDERS = ["James", "Mark Collins", "Sarah", "Daniel Wright", "Anna", "Dr Helen Moore", "Michael", "Grace", "Robert Lee", "Emily", "Tom H"]

_TOKEN_ALPHABET = "abcdefghijkmnpqrstuvwxyz23456789"

# ---------------------------------------------------------------------------
# Template expansion
# ---------------------------------------------------------------------------

_BRACE = re.compile(r"\{([^{}]*)\}")


class Filler:
    """Expands ``{a|b|c}`` alternatives and ``{slot}`` names with one rng."""

    def __init__(self, rng: random.Random, label: str = "ok"):
        self.rng = rng
        self.label = label
        self.cache: dict[str, str] = {}

    # slot values -----------------------------------------------------------
    def slot(self, name: str) -> str:
        if name in self.cache:
            return self.cache[name]
        r = self.rng
        base = name.rstrip("0123456789")
        if base == "name":
            v = r.choice(NAMES)
        elif base == "fullname":
            v = f"{r.choice(NAMES)} {r.choice(SURNAMES)}"
        elif base == "kid":
            v = r.choice(KIDS)
        elif base == "street":
            # The quay named after the old customs house turns up only in
            # members' own messages, and rarely: see examples/false_alarm.txt.
            odd = self.label == "ok" and r.random() < CUSTOMS_QUAY_SHARE
            v = CUSTOMS_QUAY if odd else r.choice(STREETS)
        elif base == "advphone":
            # Not every business puts its number in a first message.
            v = self.slot("phone") if r.random() < 0.6 else r.choice(["the number on our website", "the number on our van", "the number on the leaflet"])
        elif base == "okurl":
            v = link(r, OK_HOSTS)
        elif base == "scamurl":
            v = link(r, SCAM_HOSTS)
        elif base == "mail":
            who = r.choice(NAMES).lower() + r.choice(["", ".", "_"]) + r.choice([r.choice(SURNAMES).lower(), str(r.randrange(1, 99)), ""])
            v = f"{who}@{r.choice(RESERVED_DOMAINS)}"
        elif base == "scammail":
            v = f"{r.choice(SCAM_MAILBOXES)}@{r.choice(RESERVED_DOMAINS)}"
        elif base == "block":
            v = r.choice(BLOCKS)
        elif base == "flat":
            v = r.choice(FLATS)
        elif base == "day":
            v = r.choice(DAYS)
        elif base == "when":
            v = r.choice(WHEN)
        elif base == "time":
            v = r.choice(TIMES)
        elif base == "tool":
            v = r.choice(TOOLS)
        elif base == "furn":
            item, lo, hi = r.choice(FURNITURE)
            self.cache["price" + name[len(base):]] = f"£{r.randrange(lo, hi + 1, 5)}"
            v = item
        elif base == "price":
            v = f"£{r.randrange(5, 120, 5)}"
        elif base == "small":
            v = f"£{r.choice([2, 3, 4, 5, 5, 6, 8, 10])}"
        elif base == "child":
            v = r.choice(CHILD_TASKS)
        elif base == "event":
            v = r.choice(EVENTS)[0]
        elif base == "venue":
            v = r.choice(VENUES)
        elif base == "kit":
            v = r.choice(WORKSHOP_KIT)
        elif base == "plant":
            v = r.choice(PLANTS)
        elif base == "phone":
            # 555-0190..0199 stay unused, so tests can plant a number the corpus never holds.
            n = r.randrange(0, 100)
            v = f"555-01{n - 10 if n >= 90 else n:02d}"
        elif base == "ip":
            v = f"192.0.2.{r.randrange(1, 255)}"
        elif base == "tok":
            v = "".join(r.choice(_TOKEN_ALPHABET) for _ in range(r.randrange(5, 9)))
        elif base == "ref":
            v = "".join(r.choice("ABCDEFGHJKLMNPQRSTUVWXYZ") for _ in range(2)) + str(r.randrange(10000, 99999))
        elif base == "fee":
            v = r.choice(["£1.99", "£2.99", "£1.45", "£3.20", "£2.50", "£0.99", "£1.79", "£4.95"])
        elif base == "levy":
            v = f"£{r.choice([48, 55, 60, 72, 85, 96, 120, 135])}" + r.choice(["", "", ".00"])
        elif base == "pct":
            v = f"{r.choice([4, 5, 6, 7, 8, 9, 11, 12, 15])}%"
        elif base == "big":
            v = r.choice(["£250", "£300", "£450", "£500", "£750", "£1,000", "£2,000"])
        elif base == "bigger":
            v = r.choice(["£3,000", "£4,500", "£5,000", "£8,000", "£10,000", "£12,500"])
        elif base == "insure":
            v = r.choice(["£19.99", "£25", "£29.50", "£35", "£40"])
        elif base == "parcelfirm":
            v = r.choice(PARCEL_FIRMS)
        elif base == "role":
            v = r.choice(COOP_ROLES)
        elif base == "scammer":
            v = r.choice(SCAM_SENDERS)
        elif base == "hr":
            v = str(r.randrange(1, 10))
        elif base == "fin":
            v = r.choice(["treasurer", "finance officer", "assistant treasurer"])
        elif base == "month":
            v = r.choice(["January", "February", "March", "April", "May", "June", "July",
                          "August", "September", "October", "November", "December"])
        elif base == "span":
            start = r.randrange(9, 19)
            end = start + r.randrange(1, 4)
            h = lambda x: str((x - 1) % 12 + 1)
            ap = lambda x: h(x) + ("am" if x < 12 else "pm")
            v = r.choice([f"{h(start)}-{h(end)}", f"from {h(start)} till {h(end)}", f"{ap(start)} to {ap(end)}"])
        elif base in ("bizname", "service", "offer"):
            bname, _host, services, _pitches, offers = r.choice(BUSINESSES)
            self.cache["bizname"] = bname
            self.cache["service"] = r.choice(services)
            self.cache["offer"] = r.choice(offers)
            return self.cache[name]
        elif base == "num":
            v = str(r.randrange(2, 9))
        else:  # pragma: no cover - template typo
            raise KeyError(f"unknown slot {name!r}")
        self.cache[name] = v
        return v

    def fill(self, template: str) -> str:
        text = template
        while True:
            m = _BRACE.search(text)
            if not m:
                break
            inner = m.group(1)
            if "|" in inner:
                rep = self.rng.choice(inner.split("|"))
            else:
                rep = self.slot(inner)
            text = text[: m.start()] + rep + text[m.end():]
        return re.sub(r"  +", " ", text).strip()


def tidy(text: str) -> str:
    text = re.sub(r"\s+([,.!?])", r"\1", text)
    text = re.sub(r"\s+", " ", text).strip()
    text = re.sub(r"\.\.(?!\.)", ".", text)
    text = re.sub(r"\b([Aa]) (?=[aeiouAEIOU])", r"\1n ", text)
    text = re.sub(r"([.!?] )(?!https?:|www\.|[\w-]+\.example\.)([a-z])", lambda m: m.group(1) + m.group(2).upper(), text)
    # capitalise after sentence ends when the template started lower case
    if text and text[0].islower() and not text.startswith(("http", "www.")):
        text = text[0].upper() + text[1:]
    return text


# ---------------------------------------------------------------------------
# Casual style: lower case, dropped punctuation, slang, typos
# ---------------------------------------------------------------------------

_SLANG = [
    (r"\byou\b", "u"), (r"\bare\b", "r"), (r"\bthanks\b", "thx"), (r"\btomorrow\b", "tmrw"),
    (r"\bplease\b", "pls"), (r"\bbecause\b", "cos"), (r"\btonight\b", "tonite"),
    (r"\bdon't\b", "dont"), (r"\bI'm\b", "im"), (r"\bcan't\b", "cant"), (r"\bit's\b", "its"),
    (r"\bthat's\b", "thats"), (r"\bokay\b", "ok"), (r"\bwould\b", "wud"),
]


def _protected(word: str) -> bool:
    return any(ch.isdigit() for ch in word) or "@" in word or "http" in word or "example" in word or "£" in word


def typo(rng: random.Random, text: str, n: int = 1) -> str:
    words = text.split(" ")
    idx = [i for i, w in enumerate(words) if len(w) > 4 and w.isalpha() and not _protected(w)]
    for _ in range(n):
        if not idx:
            break
        i = rng.choice(idx)
        w = words[i]
        k = rng.randrange(1, len(w) - 1)
        op = rng.randrange(4)
        if op == 0:  # swap
            w = w[:k] + w[k + 1] + w[k] + w[k + 2:]
        elif op == 1:  # drop
            w = w[:k] + w[k + 1:]
        elif op == 2:  # double
            w = w[:k] + w[k] + w[k:]
        else:  # neighbour key
            near = {"a": "s", "e": "r", "i": "o", "o": "p", "n": "m", "t": "r", "s": "d", "r": "e", "l": "k", "h": "j"}
            c = w[k].lower()
            w = w[:k] + near.get(c, c) + w[k + 1:]
        words[i] = w
    return " ".join(words)


def casual(rng: random.Random, text: str, level: float) -> str:
    """Roughen text: level is the chance of each kind of sloppiness."""
    if rng.random() < level * 0.5:
        # lower-case everything except protected tokens
        text = " ".join(w if _protected(w) else w.lower() for w in text.split(" "))
        text = re.sub(r"\bi\b", "i", text)
    if rng.random() < level:
        for pat, rep in _SLANG:
            if rng.random() < 0.5:
                text = re.sub(pat, rep, text, flags=re.IGNORECASE)
    if rng.random() < level * 0.7:
        text = text.rstrip(".")
    if rng.random() < level * 0.5:
        text = text.replace(", ", " ", 1)
    if rng.random() < level * 0.45:
        text = typo(rng, text, 1 + (rng.random() < 0.2))
    return text


# ---------------------------------------------------------------------------
# OK messages
# ---------------------------------------------------------------------------

HELLO = "{Hi|Hiya|Hey|Hello|Morning|Evening|Hi {name}|Hey {name}|Hello {name}|}"
SIGN = "{| Thanks!| Thanks x| Cheers| Ta| x| Thank you :)| Cheers, {name}| - {name}, flat {flat}| - {name} ({block})|}"

OK_TEMPLATES: dict[str, list[str]] = {
    "borrow": [
        HELLO + " does anyone have a {tool} I could borrow {when}? {Only need it for an hour or so.|Putting up shelves finally.|Will bring it straight back.|Happy to swap for cake!|Mine's packed up.|Need it for about half a day.}" + SIGN,
        HELLO + ", is the {tool} from the tool shelf still with you? {No rush, just wanted to book it for {day}.|Someone's asked after it.|It's not on the sign-out sheet.}" + SIGN,
        "{Could I|Can I|Any chance I could} borrow your {tool} {when}? I'm in {block}, flat {flat}.{| I'll drop it back the same day.| Can collect whenever suits.}" + SIGN,
        HELLO + " - I've got a {tool} if anyone needs one. {Just message me.|Knock on {flat} {block}.|It's been sat in the cupboard all year.|Free to borrow, just bring it back clean!}",
        "Is anyone using the {tool} {when}? {Need to sort the fence.|Want to get the patio done before the rain.|My brother's helping me move a wardrobe.}",
        "{Thanks|Thank you|Cheers} for lending me the {tool}{| {name}}! {It's back on the shelf in the workshop.|I've left it outside your door.|Saved me a fortune.|Worked a treat.|Sorry it took so long, I've topped up the blades.}",
        "I've put the {tool} back {in the workshop|in the bike store|in the tool cupboard by the lift|on the shelf, all cleaned up}.{| Let me know if anything's wrong with it.}",
        "hi, {name} said you've got a {tool}. any chance i could borrow it {when}? ill be really careful",
        "Does the co-op have a {tool} in the tool library or should I ask around? {Need one for {day}.|Only for a quick job.}",
        HELLO + " I've borrowed the {tool} off {name} but it needs a {drill bit|spare blade|extension lead|battery}, has anyone got one?",
        "Would anyone mind if I kept the {tool} till {day}? {Job's taken longer than I thought.|Still got the bathroom to do.}",
        "The {tool} on the shelf has a {cracked handle|broken switch|missing guard}, I've put a note on it. Don't use it till {name} has had a look.",
        "{name} - your {tool} is by my door, I'm out {when} so just grab it.",
        "Found a {tool} in the bike store with no name on it, is it yours? {Happy to hang on to it.|Left it with {name} at {flat}.}",
    ],
    "sell": [
        "{Selling|For sale:|Getting rid of|Clearing out} my {furn}, {price}{| ono| or nearest offer| or swap for a {tool}}. {Good condition.|Bit scuffed but solid.|Barely used.|Comes apart for moving.|Collection from {block}.|Needs gone by {day}, moving out.}{| Message me if interested.}",
        HELLO + " is the {furn} still available? {Could pick up {when}.|I'm in {block} so could carry it round.|Would you take {price2}?|Does it come apart?|What are the measurements?}" + SIGN,
        "Yes it's still here! {You can come and look {when}.|Measurements are roughly 180 by 90.|I can knock a bit off if you collect {when}.|Pay on collection, cash or bank transfer is fine.}{| I'm at flat {flat}.}",
        "{Sorry,|Sorry} the {furn} has gone now, {name} from {block} snapped it up. {I'll let you know if anything else comes up.|Good luck with the flat!}",
        "Can I come and see the {furn} {when}? {I'm at work till {time} but could come after.|My partner will bring the van.}",
        "I'll take the {furn} for {price}. When's good to collect? {I can pay cash.|I'll bring a friend to help carry.|Is the lift working?}",
        "{furn} free to a good home! {Just needs a clean.|Collection only, {street}.|First to message gets it.}",
        "Still got the {furn} if you want it, {price}. {Someone else asked but never came back.|Can drop it round on the trolley.}",
        "I've paid you for the {furn}, {thanks again|cheers}! {Will pick up {when}.|It looks great in the living room.}",
        "How much for the {furn}? {Saw it on the noticeboard.|My daughter's moving into her first flat.|And would you deliver to {street}?}",
        "{Hi|Hello} - just to say I won't need the {furn} after all, {sorry for messing you about|my sister found one}. {Hope it sells quickly!|}",
        "Would you take {price} for the {furn}? I can collect {when} with cash.",
        "I've got a {furn} going if anyone in {block} wants it before it goes to the tip. {Free.|Was {price} new.}",
    ],
    "childcare": [
        HELLO + " could you {child} {when}? {I'm stuck at work till {time}.|I've got a hospital appointment.|I'll do {day} for you in return.|Happy to return the favour any time.}" + SIGN,
        "Can I swap my {day} for your {day2}? {Got a late shift.|Parents evening clash.|Need to take {kid} to the dentist.}",
        "{name} is happy to {child} on {day} if you can do {day2}. Does that work?",
        "Thanks so much for having {kid} {yesterday|today|on Saturday}! {They haven't stopped talking about it.|Let me know when I can have yours.|I owe you one.}",
        "Is {kid} ok to come over after school on {day}? I can give them tea and walk them back by {time}.",
        "Can anyone {child} {when}? {Will bring snacks!|They'll be no trouble, promise.|{kid} is already in their uniform.}",
        "The childcare swap rota for {month} is on the noticeboard in {venue}. {Put your name down for any gaps.|Tuesdays are still empty.}",
        "I'm running late, could you keep {kid} till {time}? {So sorry!|Bus hasn't turned up.|Traffic on {street} is awful.}",
        "{kid} left their {coat|water bottle|PE kit|reading book|scooter} at yours I think, could you drop it back {when}?",
        "Yes I can {child} {when}, no problem. {Just text me when you're leaving.|Does {kid} have any allergies?|I'll be outside the gate at {time}.}",
        "hi {name} can u {child} tmrw? sorry for short notice x",
    ],
    "workshop": [
        "{Can I|Could I} book the workshop {when} {span}? {Want to use the {kit}.|Just need the bench.|Building a planter.}",
        "Workshop's booked for {day} {span} for the {kit} induction. {Bring closed toe shoes.|Max 4 people.|Ask {name} if you want a place.}",
        "Just a reminder the workshop fee is {small} a session to cover {blades and sandpaper|wood glue and consumables|the {kit} servicing}, pay it in the honesty tin by the door.",
        "Hi, is there a fee for using the {kit}? I haven't done the induction yet.",
        "Yes it's {small} for members for a half day, it goes towards consumables. {Pay {name} or put it in the tin.|You can pay on the booking page https://tideway.example.org/workshop.}",
        "Somebody left the {kit} running in the workshop {last night|this morning}. {Please switch it off at the wall when you're done.|Please check before you lock up!}",
        "I've booked the workshop on the calendar for {day} but I can move if someone needs it.",
        "{name} can you sign me off on the {kit}? I've done the {safety briefing|induction} and paid the {small} fee.",
        "The workshop is closed {when} while the {kit} gets fixed. {Sorry!|Should be back by {day}.}",
        "Is the workshop free {when}? Want to finish the {chairs|bird boxes|cot|shelving unit|boat oars} before {month}.",
        "Booking link for the workshop is https://tideway.example.org/book, fees are {small} for half a day and they go straight to the co-op.",
        "Reminder: the late fee for bringing tools back after the weekend is now {small}. {It's only to stop the {tool} disappearing for weeks.|Sorry, committee decision.}",
    ],
    "event": [
        "{event} on {day} at {venue}, {time} start! {Bring a dish.|Everyone welcome.|Kids very welcome.|Bring your own cups please.|We need volunteers for setting up.}",
        "Anyone want to help organise the {event}? {We're meeting {when} in {venue}.|Need people to do posters and a tea urn.|Sign up sheet is by the lift.}",
        "Thanks everyone who came to the {event}! {We raised {price} for the hardship fund.|Lost property is in {venue}.|Photos are on the noticeboard.}",
        "Is the {event} still happening {when}? {The forecast looks grim.|Haven't seen a poster.}",
        "Can I bring {num} friends to the {event}? They're thinking of joining the co-op.",
        "We're short of chairs for the {event}, could we borrow the folding tables and chairs from {venue}?",
        "Tickets for the {event} are {small} each, kids free. {Pay on the door.|All money goes to the boat fund.}",
        "Planning meeting for the {event} has moved to {day} at {time}. Sorry for the faff!",
        "Who's doing the raffle for the {event}? I can donate a {prize hamper|bottle of wine|voucher for my bakery stall|set of mugs}.",
        "Don't forget the {event} on {day}! We still need cakes for the stall.",
        "Great news, the council said yes to us using the slipway for the {event}.",
    ],
    "raffle": [
        "Congratulations! You won the {hamper|meal for two|bottle of rum|hand-knitted blanket|kids' bike|bird box} in the {event} raffle. {Collect it from {venue} any evening this week.|{name} has it in flat {flat}.|Ticket number was {num}4.}",
        "Your ticket won a prize in the raffle! {You can pick it up from {name} at {flat} {block}.|It's a £{num}0 voucher for the harbour cafe.|No need to do anything, I'll drop it round.}",
        "Raffle results from the {event}: first prize (the hamper) went to {name}, second to {name2}. {Well done and thanks for buying tickets!|Prizes are in {venue}.}",
        "You're a winner! {name} drew your ticket for the {event} raffle. Come and claim your prize {when}, it's in {venue}.",
        "Hi, I think you won the {event} raffle but I don't know which flat you're in. {Could you let me know?|I've got your prize here.}",
        "Someone still hasn't claimed the raffle prize, ticket {num}1 (pink). It's with {name} at {flat}.",
    ],
    "coop": [
        "Reminder from the {fin}: the annual levy is due by the end of {month}. {Most of you pay by standing order so you don't need to do anything.|You can pay at the office or by standing order, never by a link in a message.|Ask me if you need to spread it out.}",
        "Hi, this is {name} (co-op {fin}). Your levy is paid up, thanks! {Receipt is in your pigeonhole.|Just let me know if you change bank.}",
        "The lift in {block} is out again, {engineer coming {day}|reported it|the maintenance rep knows}. Sorry to those on the top floor!",
        "AGM papers are in everyone's pigeonhole. {Please read the bit about the levy going up by {small}.|Voting on the new bike store.}",
        "Bins go out {day} night this week because of the bank holiday.",
        "Could whoever is parking in the disabled bay at {block} please move, {name} can't get in.",
        "Heads up, water's off {when} from {time} while they fix the pipe in {block}.",
        "Please don't share your app login with anyone. The co-op will never ask for your password or card details in a message.",
        "Has anyone else had a dodgy message about the levy with a link? {It's not from us, don't click it.|I've reported it to the moderators.}",
        "The {role} says the new gate code is on the letter in your pigeonhole. Not posting it here!",
        "Maintenance request: dripping tap in the laundry room. {I've put a bucket under it.|Reported on the app.}",
        "Anyone know when the {fin} is next in the office? Need to sort my levy direct debit.",
        "Meeting minutes are up on https://tideway.example.org/minutes if anyone wants to read them.",
        "The co-op printer in {venue} is on 192.0.2.{num}0 if your laptop can't find it.",
        "New members welcome evening on {day} at {time} in {venue}. Please say hello to the folks who just moved into {block}!",
    ],
    "parcel": [
        "Hi, I've got a parcel for you, {it came this morning|the driver left it with me|it was on the stairs}. {I'm in flat {flat}.|Will drop it round later.|Pick up whenever.}",
        "Got your parcel! {Thanks for taking it in.|Sorry it was so heavy.|Can I grab it {when}?}",
        "Are you expecting a parcel? There's one with your name on it in the post room.",
        "Delivery driver left a big box for {flat} outside my door. Is it yours {name}?",
        "Could someone take in a parcel for me {when}? I'm out till {time}. {It's just a small box.|It needs a signature sorry.}",
        "Does anyone else get their parcels left at the wrong block? Mine keeps ending up in {block}.",
        "Hi {name}, the courier dropped your parcel at mine by mistake. Shall I bring it up?",
        "Someone's parcel has been sitting in the post room for a week, label says {block} {flat}.",
    ],
    "recommend": [
        "Does anyone know a good {plumber|electrician|window cleaner|locksmith|bike mechanic|chimney sweep|piano tuner}? {Mine's retired.|Ideally someone local.|Cheap and cheerful is fine.}",
        "We used {name} for our {bathroom|windows|boiler|kitchen tiles} and they were great, number is {phone}. {Tell them I sent you.|Very reasonable.}",
        "Can anyone recommend {driving lessons|a tutor for GCSE maths|a dog walker|someone to clean the carpets} round here? {Prices seem crazy.|Happy to pay a bit more for someone reliable.}",
        "Avoid the window cleaner who's been knocking on doors on {street}, he {charged my mum double|never came back|left streaks everywhere}.",
        "The new takeaway on {street} is really good btw, {we had fish and chips|the curry was lovely|massive portions} {last night|on Friday}.",
        "{name} from {block} does alterations, really reasonable. She {took up my trousers for {small}|fixed my coat zip}.",
        "Does anyone have solar panels? Thinking about it but {not sure it's worth it on our roof|the quotes were all over the place}.",
        "My son passed his driving test, big thanks to {name} for the practice drives!",
        "I've got a spare voucher for the gym on {street} if anyone wants it, I'm never going to use it.",
        "Looking for a decent broadband deal, who's everyone with? The current one drops out every evening.",
        "Is the pizza place by the harbour any good? Thinking of ordering in {when}.",
    ],
    "general": [
        "Has anyone seen a {ginger|black and white|grey|tabby} cat round {street}? {She's called {kid} and she's not been home since {day}.|He's chipped and a bit shy.}",
        "Found a set of keys on {street} with a {blue|red|green} fob. {I've handed them in at the office.|Message me to claim.}",
        "Sorry about the noise {last night|this evening|on Saturday}, it was my {daughter's birthday|housewarming|brother's leaving do}. Won't happen again!",
        "Thanks for helping me with the shopping {earlier|yesterday}, {really kind of you|made my day}.",
        "Anyone want {plant}? {Got loads from the allotment.|Left a box outside {block}.|Help yourselves.}",
        "Is anyone driving to {the big supermarket|the retail park|the station|the hospital} {when}? Could I get a lift? I'll chip in for petrol.",
        "Welcome to the co-op! If you need anything just knock, I'm at {flat} {block}.",
        "Who left the washing on the drying green in the rain? It's in {venue} now.",
        "The heating in {block} seems to be off again, anyone else cold?",
        "Lovely to meet you at the {event}. We should grab a coffee sometime.",
        "Anyone fancy a walk along the breakwater {when}? {Dog very welcome.|Bring a flask.}",
        "Can someone water my {plant} while I'm away next week? I'll leave a key with {name}.",
        "Is the shop on {street} open {when}? Need milk.",
        "My Wi-Fi keeps dropping, is it just me or the whole of {block}?",
        "The seagulls have ripped open the bin bags again by {block}. Can we get lids?",
        "I'm doing a big shop {when} if anyone needs anything, just message me a list.",
        "Spare tickets for the lifeboat concert {when}, {small} each or free to anyone who can't afford it.",
        "Thanks for the flowers, that was so thoughtful.",
        "Got too many eggs from my sister's hens, anyone want half a dozen?",
        "Just a heads up, there's broken glass on {street} by the steps. Watch the dogs.",
    ],
    "money_talk": [
        "The credit union is doing a talk about saving in {venue} on {day}, {time}. {No selling, just advice.|Free tea and biscuits.}",
        "Anyone interested in a money club? We each put in £20 a month and take turns getting the pot, {a few of us in {block} already do it|totally informal, no interest}.",
        "Reminder that the community share offer for the new boat shed closes {when}. Details are in the AGM papers, no pressure.",
        "I owe you {price} for the {furn}, I'll transfer it {when}, is that ok?",
        "Could you send me your sort code and account number for the {furn}? Or I can pay cash when I collect, whichever's easier.",
        "Paid! Thanks for the {tool}, it was well worth it.",
        "Is anyone doing the energy bill support session at the library {when}? Heard you can get {price} off.",
        "The hardship fund has {price} left this month. If you're struggling talk to the {fin} in confidence.",
    ],
    # Genuine messages that borrow the vocabulary of scams and adverts.
    "lookalike": [
        "Watch out, I just got a message saying my parcel had an unpaid delivery fee of {fee} with a link to pay. Don't click it, it's a scam!",
        "Anyone else had a text about a redelivery fee? I actually am expecting a parcel so I nearly paid it.",
        "Hi, {name} here, the co-op {fin}. Your {month} levy hasn't come through, could you check your standing order? No rush. And please ignore any message asking you to pay the levy by a link, we never do that.",
        "Your levy is a couple of weeks overdue, could you pop into the office or pay by transfer as usual? If money's tight just tell me and we'll set up a plan.",
        "I'm away with work so my brother will collect the {furn} {when}. He'll bring cash, is that ok?",
        "I've sent the money for the {furn} by bank transfer, can you check it's arrived before my dad comes to collect?",
        "Could you post the {tool} to my sister instead? I'll pay the postage, it's about {fee}.",
        "The members' draw results are in: flat {flat} in {block} won the £50 voucher! Collect it from the office.",
        "Photos of the {furn} are here if you want a look before coming round: https://photos.example.org/{tok}",
        "Sign up for the {event} here: https://tideway.example.org/events/{tok} so we know how much food to get.",
        "Has anyone else been messaged about an investment club promising {pct} a week? Sounds dodgy to me, I've reported it.",
        "My dad lost {big} to one of those investment club scams, please warn your parents. If it sounds too good to be true it is.",
        "Please verify your email address in the app settings so you get the AGM papers, the {role} says loads of people haven't.",
        "Security heads up: someone tried to get into my app account. Change your password if you use the same one anywhere else.",
        "Could you send me your email address so I can send the invoice for the {event} stall? Or I'll drop a paper copy in your pigeonhole.",
        "We used {bizname} last month, honestly really good and cheap. Number is {phone}.",
        "Does anyone know if {bizname} is any good? They keep putting leaflets through the door.",
        "We had {bizname} round for a quote, they offered {offer}. Has anyone used them?",
        "Free delivery anywhere in the co-op for the {furn}, I'll bring it round on the trolley. {price}.",
        "Congratulations on passing your test! Those driving lessons paid off.",
        "Got a new phone so I have a new account on here, it's really me! Ask me about the {tool} if you don't believe me haha",
        "I've paid the {small} workshop fee online, the receipt is on https://tideway.example.org/workshop if you need to check.",
        "The lift engineer says it'll cost the co-op {big} to fix. Discussion at the AGM, please come.",
        "I won a {hamper|voucher|bottle of fizz} in the {event} raffle! Thanks to whoever donated it.",
        "Urgent: water is pouring through the ceiling in {block} {flat}! Does anyone have the maintenance rep's number? It's {phone} I think?",
        "Is it normal for the co-op to ask for card details over the app? Got an odd message about a refund.",
        "The co-op has changed banks. The {fin} is writing to everyone on paper with the new standing order details, please don't act on any message on here asking you to change it.",
        "Hi, {name} here, the co-op {fin}. Your levy payment bounced this month, probably the bank change. Could you pop into the office when you get a chance? Nothing to worry about.",
        "Could you transfer me {price} for the {event} food? I paid for everything up front. Sort code and account number are on the sheet in {venue}.",
        "Got your message about the {furn}, yes my cousin can collect it {when}. He'll bring cash. What time suits?",
        "Reminder that I do {alterations|birthday cakes|haircuts|bike repairs|dog walking} from my flat in {block}, members get mates rates. Just message me!",
        "If anyone needs {cakes for the {event}|a hand with their garden|curtains taking up|their bike fixed}, I'm happy to help, just cover the {materials|ingredients|parts}. I'm at {flat} {block}.",
        "My nephew is starting out as a {window cleaner|gardener|decorator|plumber} and needs a few customers, he's very reasonable. {phone} if anyone's interested.",
        "Half price {pizza|curry|fish and chips} at the place on {street} on Mondays, {just so you know|if anyone fancies it|we went last week}!",
        "Reminder: the {event} deposit for the hall is {price}, I've paid it from the events account so nobody needs to send me anything.",
    ],
    # Everyday life that touches the words on examples/watchlist.txt.
    "community": [
        "The wheelchair ramp by {block} is blocked by bikes again, {name} couldn't get out {last night|this morning}. Please use the bike store.",
        "Could someone help push {name}'s wheelchair up Lantern Hill {when}? The new chair is heavy and the pavement's rough.",
        "Does anyone know a taxi firm with a wheelchair accessible car? Mum's visiting {when}.",
        "Pension day at the post office is {day}, I can give anyone a lift who needs it. Leaving {block} at {time}.",
        "Anyone know who to ask about a state pension forecast? The letter from the pension service makes no sense to me.",
        "The pensioners' lunch club is {day} at {time} in {venue}, all welcome, {small} for soup and a pudding.",
        "I'm a pensioner on my own and can't manage the {furn} on the stairs, could someone give me a hand {when}?",
        "Is there a pensioner discount for the {event}? My neighbour is on a fixed income.",
        "Big thanks to the pensioners who knitted the blankets for the {event} raffle!",
        "I'm pregnant and the doctor says no lifting, so could someone help me carry the {furn} down {when}?",
        "Congratulations to {name}, who's pregnant with twins! We're collecting for a double buggy, the tin is in {venue}.",
        "Could whoever parks in the disabled bay outside {block} without a badge please stop, {name} had to park on {street}.",
        "My brother is disabled and staying with me {when}, is the lift in {block} working?",
        "We're collecting coats, toys and bedding for the refugee welcome group, drop them at {flat} {block} by {day}.",
        "The refugee family who moved into {block} would love some help with English, {name} is organising a rota.",
        "Jumble sale at St Brannoc's church {when}, all proceeds to the lifeboat. Bring your bric-a-brac to {venue}.",
        "The church hall on {street} runs a free toddler group on {day} mornings, lovely bunch.",
        "The mosque on Kelp Street is doing a free community supper {when}, everyone welcome, no need to book.",
        "The mosque food bank needs volunteers on {day}, {name} is putting a list together.",
        "Does anyone speak Polish? My new neighbour in {block} is learning English and would love to join the {event}.",
        "The Polish deli on Quay Street has the good rye bread back, get there early!",
        "Polish conversation group meets in {venue} on {day}s, beginners very welcome.",
        "My carer comes at {time}, so could you drop the {tool} round after that?",
        "I'm a carer for my mum so I can't do the {event} stall this year, sorry. Happy to bake though.",
        "Does anyone know if carers get a discount on the workshop fee? Asking for {name}.",
        "The benefits advice session is at the library {when}, free and confidential, no appointment needed.",
        "If you're on benefits you can have the workshop fee waived, just ask the {fin} in confidence.",
        "Anyone been to the benefits drop-in at the community centre? Is it worth going?",
    ],
    "short": [
        "Thanks!", "Cheers {name}", "On my way", "Running 5 mins late sorry", "Sounds good", "Perfect, see you then",
        "Yes please!", "No worries at all", "Ta x", "Brilliant, thank you", "Will do", "Sorry, missed this!",
        "Is {time} ok?", "Yep all good", "Lovely, thanks", "Done :)", "Great thanks, see you {when}",
        "I'm in {flat}", "Ok no problem", "Can't {when}, sorry", "Can do {day}?", "Got it, thanks",
        "Haha yes", "Oh no! Hope it's ok", "Sure, just knock", "Let me check and get back to you",
    ],
}
# Sentences of everyday harbour life added to some ordinary messages, so the
# normal class has a vocabulary of its own beyond function words.
OK_DETAIL_SHARE = 0.3
OK_DETAILS = [
    "Ferry was late again this morning.", "Tide's right up over our slipway tonight.",
    "Kids are off school all week so it's chaos here.", "Our allotment is drowning in {plant}.",
    "Lovely to see harbour lights back on.", "My knee's still playing up so I'm avoiding stairs.",
    "Gulls are nesting on our balcony again.", "Bakery on {street} has cinnamon buns back.",
    "{kid} has chickenpox so we're stuck indoors.", "Fishing boats were all in early because of wind.",
    "We're repainting our hallway so it smells of gloss.", "Lifeboat crew were out practising in our bay.",
    "Our boiler finally got fixed, hooray.", "Nursery is shut {day} for staff training.",
    "Tomatoes on our roof terrace are finally ripening.", "Mum's staying with us till {day}.",
    "Drying green is a swamp after all that rain.", "Seals were back on our breakwater this morning!",
    "I've been on nights all week so apologies if I'm slow to reply.", "New bench by our harbour wall is lovely.",
    "{kid} wants to know if your dog can come to Gull Beach again.", "Chippy queue was out of the door last night.",
    "Library has started doing homework club on {day}s.", "Still unpacking boxes from our move.",
    "Rain's finally stopped, hooray.", "{kid} lost another tooth today, third this month!",
    "Choir practice ran late so I'm shattered.", "Grandkids are coming for half term.",
    "My sourdough starter has gone mad, anyone want some?", "Crab lines are out on Quay steps if your kids fancy it.",
]
OK_WEIGHTS = {
    "borrow": 15, "sell": 14, "childcare": 10, "workshop": 9, "event": 10, "raffle": 2.5,
    "coop": 8, "parcel": 5, "recommend": 6, "general": 12, "money_talk": 3, "short": 8,
    "lookalike": 18, "followup": 3, "favour": 7, "community": 6,
}

# ---------------------------------------------------------------------------
# Scam messages
# ---------------------------------------------------------------------------

# Where a scam sends its victim: mostly a link, sometimes a phone line instead.
PARCEL_URL = "{http://parcel-fee.example.net/{tok}|{scamurl}|the payment line {phone}|the depot desk on {phone}}"
LEVY_URL = "{http://tideway-levy.example.net/pay/{tok}|http://tidewaycommons-members.example.net/levy?id={tok}|http://secure-pay.example.net/tideway/{tok}|http://{ip}/tideway/levy|the co-op payments line {phone}|the payments desk on {phone}}"
LOGIN_URL = "{http://tideway-app-verify.example.net/{tok}|http://members-tideway.example.net/verify?u={tok}|{scamurl}|the support line {phone}}"
INVEST_URL = "{http://harbour-capital.example.net/join/{tok}|http://quaywealth.example.net/{tok}|{scamurl}|my direct line {phone}}"

SCAM_TEMPLATES: dict[str, list[str]] = {
    "parcel": [
        "{parcelfirm}: your parcel could not be delivered due to an unpaid {shipping|delivery|customs|redelivery} fee of {fee}. {Pay now|Pay within 24 hours|Please settle} at " + PARCEL_URL + "{| to rebook delivery| or it will be returned to sender}.",
        "We tried to deliver your package today but no one was home. A redelivery fee of {fee} applies: " + PARCEL_URL,
        "{Hi|Hello}, this is the {parcelfirm}. Your parcel {ref} is on hold. {Confirm your address and pay {fee}|A small fee of {fee} is needed} here " + PARCEL_URL,
        "Your parcel is waiting at the depot. To release it pay the outstanding {fee} at " + PARCEL_URL + " Ref: {ref}",
        "FINAL NOTICE: parcel {ref} will be returned unless the {fee} {postage|customs} charge is paid today " + PARCEL_URL,
        "{Hi|Hello} {name}, sorry to bother you. I'm the driver who came to {block} earlier, your parcel needs a {fee} fee before I can bring it back. It's quick: " + PARCEL_URL,
        "Dear customer, your item could not be delivered because the address label was damaged. Update details and pay {fee}: " + PARCEL_URL,
        "Hi! Quick one, your parcel is at the post room but there's {fee} unpaid postage on it. You can sort it here " + PARCEL_URL + " {thanks!|cheers}",
        "{parcelfirm} notice: delivery attempt failed. Reschedule for {fee} at " + PARCEL_URL + " before {hr}pm today",
        "hello your parcel is stuck in customs need pay {fee} go to " + PARCEL_URL + " thank you",
        "Your parcel is being held at customs. A customs charge of {fee} must be paid before delivery: " + PARCEL_URL,
        "{parcelfirm}: customs clearance for parcel {ref} is incomplete. Pay the {fee} customs fee today at " + PARCEL_URL + " or it will be destroyed.",
        "Hi, it's the courier. Your parcel got stopped by customs, there's {fee} to pay before I can bring it to {block}. " + PARCEL_URL,
    ],
    "courier": [
        "{Hi|Hello}, is the {furn} still available? I'm {working offshore|away with work|abroad at the moment} so my courier will collect. I'll pay {price} plus extra for your trouble.",
        "Hello, I want to buy your {furn} for full asking price. I have sent the payment, please check your email to confirm the transfer and my courier will collect {when}.",
        "Hi, I'm interested in the {furn}. I can't come in person but I will send a courier. Please send me your email address so I can pay you.",
        "Good day, I am happy with the price of the {furn}. I have paid {price} plus {big} for the courier fee by mistake, please refund the {big} to the courier's agent and keep the rest.",
        "I have made the payment for the {furn}, the bank says you must click the link to receive the money: {http://secure-pay.example.net/receive/{tok}|http://{ip}/claim/{tok}}",
        "Hello dear, is your {furn} still for sale? My husband is at sea and I want to surprise him. My courier will collect and I pay by bank transfer today. Send your full name and number.",
        "Yes I will take it!! No need to show me, I trust you. Courier will come {when}, I already sent payment {price} to your email, check it.",
        "Hi I'm {scammer}, I saw your {furn}. Kindly reply with your email so I can send the money via the secure payment page, my courier will then pick up.",
        "Hi is this still available? I pay now and my mover collects. Send me your bank details and I add {big} for moving fee which you pay to the mover when he comes.",
        "Hello, payment for the {furn} is pending. To release the funds you must first pay the {insure} delivery insurance at {http://secure-pay.example.net/insurance/{tok}|http://{ip}/insurance}",
    ],
    "levy": [
        "Tideway Commons: your annual levy of {levy} is overdue. To avoid suspension of your membership pay now at " + LEVY_URL,
        "REMINDER: Co-op fee unpaid. Your account will be suspended in 48 hours. Pay {levy} securely at " + LEVY_URL,
        "Dear member, our records show the {month} levy payment failed. Please update your card details at " + LEVY_URL + " to avoid a late fee of {small}0.",
        "Hi, this is {name}, the co-op {fin}. We've moved to a new payment system and your levy ({levy}) shows as outstanding. Could you pay it here today? " + LEVY_URL + " Thanks so much",
        "Tideway Commons Housing: final reminder, {levy} outstanding. Failure to pay may affect your tenancy. " + LEVY_URL,
        "Your direct debit to Tideway Commons was declined. Please pay the levy manually at " + LEVY_URL + " before {day}.",
        "Hello {name}, hope you're well! Just a gentle nudge that your co-op fees are showing as overdue. It only takes a minute: " + LEVY_URL,
        "Membership renewal: your Tideway Commons membership expires today. Renew for {levy} at " + LEVY_URL + " to keep using the workshop and the tool library.",
        "Hi, {name} here, the co-op {fin}. The co-op has changed banks, so please update your levy standing order to the new account. Reply and I'll send the details today. Thanks!",
        "Hello, quick one from the co-op office: your {month} levy bounced. Could you transfer {levy} to the account I'll send you so it doesn't go to arrears? Thanks so much.",
        "Hi, I'm covering for the {fin} this month. A few levy payments went missing in the system, could you pay yours again and we'll refund the first one?",
        "co-op office: levy overdue {levy}, pay before {hr}pm to avoid a penalty " + LEVY_URL,
        "Dear resident, the maintenance levy for {block} has increased. Please pay the difference of {levy} at " + LEVY_URL,
    ],
    "invest": [
        "Hi {name}, I'm part of a small investment club in Brackenmouth. Our members are making {pct} a week trading. Want me to add you? " + INVEST_URL,
        "Hello neighbour! I turned {big} into {bigger} in a month with our investment club. Only a few places left for co-op members, message me or join here " + INVEST_URL,
        "Are you interested in passive income? Our club has guaranteed returns of {pct} weekly, no experience needed. Start with just {big}. " + INVEST_URL,
        "Sorry for the random message. I saw you on the co-op app and thought you might like to hear about a crypto opportunity my mentor showed me. {Returns are {pct} weekly.|Zero risk.} Reply YES for details.",
        "Good evening, I am {scammer}, a financial adviser helping members of housing co-ops grow their savings. {Minimum investment {big}.|We guarantee {pct} monthly.} Contact me at {invest|advice|wealth}@example.net",
        "Our harbour investment club is looking for new members. {pct} returns every week, paid out every Friday. Join today: " + INVEST_URL,
        "Hi, I don't usually do this but my cousin got me into this trading group and I've made {big} already. Happy to share the link if you want: " + INVEST_URL,
        "Members only offer: invest {big} today and receive {bigger} back in 30 days. Limited to 10 Tideway Commons members. " + INVEST_URL,
        "Hello, I hope you don't mind me messaging. I help people in the area make extra money from home, {pct} a week on average. Shall I send you the details?",
        "Worried your pension won't stretch? Our club turns {big} of pension savings into {bigger} in a year. Book a free call: {scamurl}",
        "Over 55? You can release your pension early and invest it with us at {pct} a month, guaranteed. Don't miss out: " + INVEST_URL,
        "As a pensioner you qualify for our members' bond: {pct} a month, guaranteed. Reply today, places are limited.",
        "Hello, I help pensioners in Brackenmouth move their pension into a guaranteed scheme paying {pct} a week. Reply YES and I'll call you today.",
        "Pension review for Tideway Commons members: you may be owed {big} from an old pension. Check today at {scamurl}",
        "URGENT: pensioners can claim a {big} winter pension top-up before {day}. Send your bank details to {scammail} to receive it.",
        "Your pension provider has frozen your account. Verify your identity within 24 hours to release your pension: {scamurl}",
    ],
    "account": [
        "Tideway Commons app: unusual sign-in detected on your account. Verify your identity within 24 hours or your account will be locked: " + LOGIN_URL,
        "Your members' app account will be closed due to inactivity. Log in here to keep it: " + LOGIN_URL,
        "Security alert: someone tried to change your password. If this wasn't you confirm your details at " + LOGIN_URL,
        "Hi, I'm from the app support team. We need you to confirm the 6-digit code we just sent you so we can keep your account safe. Please reply with it.",
        "Moderator notice: your account has been reported. To avoid suspension verify at " + LOGIN_URL,
        "Dear member, please update your bank details for the {month} rent refund at " + LOGIN_URL,
    ],
    "prize": [
        "Congratulations! You have won a {big} voucher in the Tideway Commons members' draw. Claim your prize at {http://tideway-prizes.example.net/{tok}|http://{ip}/prize} before midnight.",
        "You're a winner! Your flat was selected for a free {hamper|tablet|weekend break|{big} gift card}. Just pay {fee} postage to claim: {http://tideway-prizes.example.net/{tok}|http://{ip}/claim}",
        "Congratulations, you won the {event} raffle! To receive your prize please send your card details for the delivery fee of {fee}.",
        "Dear winner, your raffle ticket has won {big}. Email {claims|prizes|winner}@example.net with your bank details to receive payment.",
        "You have been chosen for a {big} energy rebate from the co-op. Claim at {http://energy-rebate.example.net/{tok}|http://{ip}/rebate}",
    ],
    "polite": [
        "Hi, I'm so sorry to message out of the blue. I'm {scammer}, new in {block}. My bank card has been blocked and I need {price} for the electric meter tonight. Could you transfer it? I'll pay you back {day} I promise.",
        "Hello, hope you're well. I'm helping the workshop rep collect the deposits this month. Could you send {small}0 to the account I'll message you? Thank you so much for your help!",
        "Hi there, sorry to bother you. I accidentally sent you a code by text, could you please tell me what it says? Thank you, and sorry again.",
        "Good morning, I hope this isn't a bother. I'm raising money for my daughter's operation abroad, anything helps. {Here is the link|You can give here}: {http://helpfund.example.net/{tok}|http://{ip}/donate}",
        "Hi {name}, it's me! Lost my phone so this is my new account. Could you do me a massive favour and send {price} to my friend's account? I'll explain later x",
        "Hello neighbour, apologies for the message. The co-op asked me to let everyone know the gate fob replacement is {small}0, payable here: {http://tideway-fobs.example.net/{tok}|http://{ip}/fob}. Thank you!",
        "Dear {name}, I hope you are keeping well. I'm a retired teacher looking after my late brother's estate and I need a trusted person in the UK to receive the funds. You'd keep 10%. Please reply if interested.",
        "Hi, I think I paid you twice for the {tool} by mistake, could you send back the {price}? Here are my details, thanks so much",
        "Hello, I'm really sorry, I'm stuck at the station with no money and my phone is dying. Could you send me {price} for a ticket home? I'm in {block}, I'll knock on your door tomorrow.",
        "Hi, kind regards from the co-op team. Please could you confirm your date of birth and the long number on your card so we can update the levy records? Many thanks.",
    ],
    # Scams that sound like an ordinary neighbour or buyer.
    "soft": [
        "hi is the {furn} still for sale? im away at the moment so my cousin will collect, can i pay by bank now? whats your email",
        "Hey it's {name} from {block}, I've got a new account. Could you lend me {price} till Friday? Bit stuck x",
        "Hi, I'm the new maintenance rep. The workshop deposit has gone up to {small}0, send it to me directly and I'll sort your booking.",
        "Hiya, can you do me a favour? Could you grab a {price} gift card from the shop on {street} and send me the code? I'll pay you back tomorrow, promise",
        "Hi, I'm selling a {tool} as well, cheaper than the shop. Pay up front and I'll post it, just need your card number.",
        "hello, i saw your {furn}, i'll pay {price} and extra for delivery. my driver will come and pay you, just send your bank details first so i can set it up",
        "Hi {name}! Lovely to meet you at the {event}. Could you help me out, I'm short {price} for the rent and the office shuts at {time}. I'll pay you back on {day} x",
        "Hi, sorry to be a pain, {name} said you might lend me {price}. Can you send it to my friend's account, mine is frozen. Will return it {when}.",
        "Hello, I'm organising a surprise collection for {name} in {block}, could you chip in {small}0? Just send it to the account I'll message you.",
    ],
}
SCAM_WEIGHTS = {"soft": 40, "followup": 12, "parcel": 22, "courier": 18, "levy": 18, "invest": 14, "account": 8, "prize": 7, "polite": 13}

# ---------------------------------------------------------------------------
# Adverts
# ---------------------------------------------------------------------------

ADVERT_TEMPLATES = [
    "{bizname}: {service}. {pitch} {Offer|Special offer|Right now}: {offer}. Call {advphone} or visit {site}",
    "{Hi|Hello}! {bizname} {is now covering|now covers} {street} and the Tideway Commons flats. {pitch} We're offering {offer}. Book at {site}",
    "Looking for {service}? {bizname}: {offer}. {pitch} Call or text {advphone}.",
    "{bizname} - {offer}! {pitch} {site}",
    "Hi neighbour! I run {bizname} just round the corner on {street}. {Thought you might be interested|Just letting the co-op know}: {offer}. Give me a ring on {advphone}{| x}",
    "Hiya, it's {advsender} from {bizname}. We're doing {service} for a few flats in {block} next week and can do {offer}. Want me to add you? {phone}",
    "NEW IN BRACKENMOUTH: {bizname}. {pitch} {offer}. {site} / {phone}",
    "Hi, sorry for the DM! {bizname} is offering Tideway Commons residents {offer}. {pitch} Details at {site}",
    "{bizname} | {service} | {offer} | call {advphone} | {site}",
    "Hello from {bizname}! We're new to {street} and wanted to say hi. {pitch} Quote TIDEWAY for {offer}. Call us on {advphone}.",
    "{pitch} {bizname}, {offer}, this week only. Reply STOP to opt out. {site}",
    "Evening! Still thinking about {service}? {bizname} can fit you in {when}, {offer}. {phone}",
    "Hi, I saw someone on the app asking about {service}. I'm {advsender}, I run {bizname}. {pitch} Email me at {biz_email} or call {advphone}.",
    "Hey! Local family business here, {bizname}. {pitch} Ask about {offer}. Check out our reviews at {site}",
    "{bizname} {spring|summer|autumn|winter|new year} offer: {offer}. {pitch} Book online at {site} or ring {advphone}",
    "Don't miss out! {bizname} has {offer}, only {num} slots left in {month}. {site}",
    "Hiya, hope you don't mind me messaging. My mate {advsender} has just started {bizname} and is doing {offer}. Give them a shout on {advphone}, they'd really appreciate it.",
    "hi there {bizname} here, {offer}, ring {advphone} thanks",
    "Dear resident, {bizname} would like to introduce ourselves. {pitch} {pitch2} To celebrate we're offering {offer}. Visit {site} or email {biz_email}.",
]
# Adverts that read like a neighbour: no company name, often no link.
ADVERT_SOFT = [
    "Hi! Sorry, not sure if this is allowed on here. I've just started doing {service} round the harbour, {offer}. Message me if you're interested :)",
    "Hey, saw your post about the {tool}. If you ever need {service} I do mates rates, {phone}.",
    "Hiya, I'm {advsender}, I already do {service} for a few people in {block}. {offer}. Let me know if you want me to pop round!",
    "hi neighbour, my brother does {service}, {offer}, honestly really good. his number's {phone} if you need him",
    "Hi, I do {service} and I'm working on {street} {when}. Can do yours too while I'm there, {offer}. Just reply here.",
    "Hello! Quick one, I'm doing {service} at the moment with {offer} for anyone in the co-op. Tell your neighbours!",
]


def advert_text(f: Filler) -> str:
    r = f.rng
    soft = r.random() < ADVERT_SOFT_SHARE
    pool = [b for b in BUSINESSES if b[0] in TRADES] if soft else BUSINESSES
    name, host, services, pitches, offers = r.choice(pool)
    f.cache["bizname"] = name
    f.cache["service"] = TRADES[name] if soft else r.choice(services)
    f.cache["offer"] = r.choice(offers)
    p1, p2 = r.sample(pitches, 2)
    f.cache["pitch"], f.cache["pitch2"] = p1, p2
    f.cache["site"] = r.choice([f"www.{host}", f"https://{host}", f"{host}", f"https://{host}/tideway"])
    f.cache["biz_email"] = r.choice(["hello", "bookings", "info", "enquiries"]) + "@example.com"
    f.cache["advsender"] = r.choice(ADVERT_SENDERS)
    return f.fill(r.choice(ADVERT_SOFT if soft else ADVERT_TEMPLATES))


# ---------------------------------------------------------------------------
# Placeholders: links, phone numbers, e-mail addresses, IP addresses
# ---------------------------------------------------------------------------
# Every class uses every kind, at its own realistic rate, and the scheme and
# the reserved domain of a link or mailbox are drawn the same way whatever the
# class: a model trained here must find its evidence in the words (fees,
# threats, offers, borrowing), not in which reserved value a class was given.

SCHEMES = ["https://", "http://", "www.", "https://www.", ""]
RESERVED_DOMAINS = ["example.org", "example.net", "example.com"]
OK_HOSTS = [
    "tideway", "photos", "forms", "tideway-coop", "harbour-news", "brackenmouth-council", "lifeboat",
    "tools.tideway", "members.tideway", "docs", "pics", "share", "calendar.tideway", "maps",
    "brackenmouth-library", "harbour-school", "allotments", "ferry-times",
]
SCAM_HOSTS = [
    "parcel-fee", "secure-pay", "tideway-levy", "members-verify", "prize-claim", "harbour-capital",
    "tideway-app", "refund-portal", "track-parcel", "quaywealth", "redelivery", "account-check",
]
SCAM_MAILBOXES = ["claims", "support.team", "refunds", "member.services", "prize.desk", "wealth.advice", "secure.payments"]

_RESERVED_HOST = re.compile(r"(?<![@\w.-])(?:https?://)?(?:www\.)?((?:[\w-]+\.)*?)example\.(?:org|net|com)\b")
_RESERVED_MAIL = re.compile(r"@example\.(?:org|net|com)\b")
_IP_SCHEME = re.compile(r"https?://(?=192\.0\.2\.)")


def link(rng: random.Random, hosts: list[str]) -> str:
    """A web address under a reserved domain, with an optional path."""
    host = rng.choice(hosts)
    path = rng.choice(["", "/" + "".join(rng.choice(_TOKEN_ALPHABET) for _ in range(rng.randrange(4, 8)))])
    return f"{rng.choice(SCHEMES)}{host}.{rng.choice(RESERVED_DOMAINS)}{path}"


def respread(rng: random.Random, text: str) -> str:
    """Redraw the scheme and reserved domain of every link and mailbox in ``text``.

    Templates were written with one domain per class; redrawing them here keeps
    the host words (``parcel-fee``, ``photos``) and drops the class signal.
    """
    text = _RESERVED_HOST.sub(lambda m: f"{rng.choice(SCHEMES)}{m.group(1)}{rng.choice(RESERVED_DOMAINS)}", text)
    text = _RESERVED_MAIL.sub(lambda m: "@" + rng.choice(RESERVED_DOMAINS), text)
    return _IP_SCHEME.sub(lambda m: rng.choice(["http://", "https://", ""]), text)


PLACEHOLDER_PATTERNS = {
    "link": re.compile(r"(?<![@\w.-])(?:https?://|www\.)?(?:[\w-]+\.)*example\.(?:org|net|com)|https?://192\.0\.2\.", re.I),
    "phone": re.compile(r"\b555[- ]01\d\d\b"),
    "email": re.compile(r"@example\.(?:org|net|com)\b"),
    "ip": re.compile(r"\b192\.0\.2\.\d{1,3}\b"),
}
# Chance that a message gets a sentence with a placeholder of each kind
# appended (when it has none of that kind already); README.md states the
# resulting shares per class.
EXTRA_RATES = {
    "ok": {"link": 0.12, "phone": 0.08, "email": 0.04, "ip": 0.006},
    "scam": {"link": 0.08, "phone": 0.08, "email": 0.05, "ip": 0.01},
    "advert": {"link": 0.05, "phone": 0.03, "email": 0.04, "ip": 0.015},
}
EXTRAS = {
    "ok": {
        "link": ["Photos here: {okurl}", "Details are on {okurl}.", "It's all on {okurl} if you want to read it.",
                 "(link: {okurl})", "Map's here {okurl}", "Sign-up sheet is online too: {okurl}", "Pics: {okurl}",
                 "The timetable is on {okurl} btw.", "I put the notes on {okurl}."],
        "phone": ["My number's {phone} if it's easier to text.", "Text me on {phone}.", "Ring {phone} if I don't answer here.",
                  "Call me on {phone} when you're outside.", "This is my new number btw, {phone}.", "Mum's landline is {phone} if I'm out."],
        "email": ["Or email me at {mail}.", "My email is {mail} if that's easier.", "Send it to {mail} and I'll print it.",
                  "Forward it to {mail}, I'll sort it tonight."],
        "ip": ["The printer in the common room is on {ip} if it doesn't show up.", "The bike store camera is at {ip}, {name} has the login.",
               "If the Wi-Fi drops again, the router page is {ip}."],
    },
    "scam": {
        "link": ["Details: {scamurl}", "Confirm here: {scamurl}", "More info {scamurl}", "Use this secure page: {scamurl}",
                 "Act now {scamurl}"],
        "phone": ["Call {phone} to confirm.", "Text me on {phone}, this app is slow.", "Or call our team on {phone}.",
                  "My new number is {phone}, message me there.", "WhatsApp me on {phone}."],
        "email": ["Send your details to {scammail}.", "Reply to {scammail} today.", "Email {scammail} to claim."],
        "ip": ["Secure portal: http://{ip}/{tok}", "Log in at http://{ip} to confirm."],
    },
    "advert": {
        "link": ["{site}", "More at {site}", "Reviews: {site}"],
        "phone": ["Call {phone}.", "Text {phone} for a quote.", "Ring us on {phone}."],
        "email": ["Email {biz_email}.", "Or email {biz_email}."],
        "ip": ["Test your current speed on our checker at {ip}."],
    },
}


# Plain connective sentences for the flagged classes, so that "the", "it",
# "is" and "if" are about as common on every side and the evidence for the
# normal class is carried by what members talk about.
RIDER_SHARE = {"scam": 0.5, "advert": 0.5}
# Riders either flagged class may use: everyday words members use too.
SHARED_RIDERS = [
    "{I'll|I will} be {on the phone|at work|out} {all day|till late|this afternoon|on {day}}, so {just message me back here|reply on here|leave me a message}.",
    "Could you let me know {by the end of the day|before {day}|when you get a minute|{when}}?",
    "{I've got to|I need to} sort it {before the weekend|by {day}|{when}}, so {the sooner the better|please don't leave it}.",
    "{It's all on my side|It's all set up on my end}, I just need {to hear back from you|your reply}.",
    "Sorry, I know it's {a big ask|a bit much|cheeky} {on a weekday|out of the blue|at short notice}.",
    "{My mum|My brother|{name}|The office} says it's {the same for everyone in the block|how it works now|the usual thing}.",
    "I'll explain {it all|the rest} when I see you {on {day}|{when}|in the lift}.",
    "If anyone else {on your floor|in {block}|you know} wants it, I'll do the same for them.",
    "Don't tell anyone else {in the block|on the app|yet}, it's only for {a few of us|members|people I know}.",
    "I'll be round {that way|{street}|the harbour} {on {day}|{when}} anyway.",
]
RIDERS = {
    "scam": [
        "If the link doesn't open, just reply here and I'll sort it for you.", "It is all done in a couple of minutes.",
        "The team is on it till late if you have any questions.", "If it's easier I can call you in the morning.",
        "It's the same as last time, nothing to worry about.", "Sorry if this is a bother, it is quite time sensitive.",
        "The office said it has to be done by the end of the day.", "Is that ok? I know it's a lot to ask.",
        "I'm in the block by the harbour if you want to check.", "The deadline is tonight so please don't leave it.",
        "It only takes a minute on your phone.", "If you have any problems with it, let me know.",
    ],
    "advert": [
        "If you're interested, the first visit is on the house.", "It's the same team that did the flats on {street}.",
        "The offer is on till the end of the month.", "Is it ok if I drop a leaflet in the post room?",
        "If you know anyone else in the co-op who might want it, please pass it on.", "It is a small local business so every booking helps.",
        "We're in the area on {day} if that's any good.", "The price includes everything, no hidden extras.",
        "It's all fully insured and we tidy up after.", "If now's not a good time, just save the number for later.",
    ],
}


def add_rider(f: Filler, label: str, text: str) -> str:
    if label in RIDERS and f.rng.random() < RIDER_SHARE[label]:
        text = tidy(text + " " + f.fill(f.rng.choice(RIDERS[label] + SHARED_RIDERS)))
        if f.rng.random() < 0.2:
            text = tidy(text + " " + f.fill(f.rng.choice(SHARED_RIDERS)))
    return text


def add_placeholders(f: Filler, label: str, text: str) -> str:
    """Append placeholder sentences at the class's rates (see EXTRA_RATES)."""
    for kind, rate in EXTRA_RATES[label].items():
        if f.rng.random() < rate and not PLACEHOLDER_PATTERNS[kind].search(text):
            text = text.rstrip() + " " + f.fill(f.rng.choice(EXTRAS[label][kind]))
    return text


# ---------------------------------------------------------------------------
# Pieces shared by several classes, so that words alone do not give it away
# ---------------------------------------------------------------------------

FRIENDLY_OPENERS = [
    "Hi {name}, hope you're well!", "Hiya, it's {name7} from {block}.", "Hello neighbour,",
    "Hey, sorry to message out of the blue.", "Hi, lovely to meet you at the {event}.",
    "Morning! Hope the week's going ok.", "Hi, it's {name7}, we met in the laundry room.",
    "Hi {name}!", "Sorry to bother you,", "Evening, hope I'm not disturbing you.",
    "Hi there, I'm in {block} too.", "Hi, {name2} gave me your name.",
]
GENERIC_OPENERS = [
    "Hello neighbour,", "Morning! Hope the week's going ok.", "Sorry to bother you,",
    "Evening, hope I'm not disturbing you.", "Hi there, I'm in {block} too.", "Hi all,",
]


def join_opener(opener: str, body: str) -> str:
    """Put a greeting in front of a message, fixing the capital after a comma."""
    if opener.endswith(",") and not re.match(r"I\b|I'", body):
        body = body[:1].lower() + body[1:]
    return tidy(opener + " " + body)


SOFT_CLOSERS = [
    "I'll pay you back {when}, promise.", "Sorry to ask!", "x", "Thanks so much, you're a star.",
    "Please don't mention it to anyone, bit embarrassing.", "It's quite urgent, sorry.", "", "",
    "Really appreciate it.", "Let me know asap x",
]


_GREETING = re.compile(r"(hi|hiya|hey|hello|morning|evening|dear|good|congratulations|sorry)\b", re.IGNORECASE)


# (ask, situations that make sense with it)
OK_FAVOURS = [
    ("could you lend me {small} for the bus?", ["I've left my purse at work", "I forgot my wallet", "the cash machine on {street} is broken"]),
    ("could you lend me {price} till {day}? I'll drop it round.", ["I'm a bit short till payday", "my wages are late this month"]),
    ("can I borrow a tenner for the {event} tickets?", ["I forgot my wallet", "they only take cash and I've only got my card"]),
    ("could you grab me a pint of milk on your way back?", ["I'm stuck at work later than planned", "the little one's asleep and I can't go out"]),
    ("could you pay for the pizza and I'll send it to you later?", ["my bank app is down", "my card keeps getting declined"]),
    ("can you send me the code for the bike store?", ["I've lost the letter", "I've just got back and can't find the letter"]),
    ("could you pay {name} for the {furn} for me? I'll transfer it to you tonight.", ["my bank app is down", "my card's playing up"]),
    ("can you cover my {small} workshop fee till I'm back?", ["I've left my purse at home", "I forgot my wallet"]),
    ("could you let me in the front door?", ["I've locked myself out", "my fob has stopped working"]),
    ("could you put {small} in the raffle tin for me?", ["I can't make the {event}", "I'm away {when}"]),
]
SOFT_FAVOURS = [
    ("could you lend me {price} till {day}?", ["my wages haven't come through yet", "my bank has frozen my account", "my purse got nicked on {street}"]),
    ("could you send {price} to my friend's account? I'll give you cash {when}.", ["my bank has frozen my account", "my phone broke so I'm on a new account"]),
    ("could you buy a {price} gift card from the shop on {street} and text me the code?", ["I'm stuck at the hospital with my mum", "my card's been blocked"]),
    ("can you tell me the code you just got by text? It came to you by mistake.", ["I'm setting up my new account", "my phone broke so I'm on a new account"]),
    ("could you pay the {small}0 workshop deposit for me?", ["my bank has frozen my account", "I've only just moved into {block}"]),
    ("can I pay for the {furn} by bank now and have my driver collect? Just need your email and account details.", ["I'm away with work this week", "I can't get there myself"]),
    ("could you cover my share of the {event} tickets? Just send it to the account I'll message you.", ["my card's been blocked", "I'm away with work this week"]),
    ("could you top up my electric key for {price}?", ["my card's been blocked", "the cash machine ate my card", "my wages haven't come through yet"]),
    ("could you transfer {price} for my mum's taxi? She's stranded.", ["I'm stuck at work", "my phone broke so I'm on a new account"]),
]
OK_CLOSERS = ["I'll pay you back {when}.", "Sorry to ask!", "x", "Thanks so much.", "", "", "You're a star.", "Owe you one!"]


def _cap(s: str) -> str:
    return s[:1].upper() + s[1:]


def _favour(f: Filler, pairs, openers, closers) -> str:
    r = f.rng
    ask, sits = r.choice(pairs)
    sit = r.choice(sits)
    body = r.choice([f"{sit}, so {ask}", f"{_cap(sit)}. {_cap(ask)}", f"Bit of a weird one, {sit}. {_cap(ask)}", f"{_cap(ask)} {_cap(sit)}."])
    opener, closer = r.choice(openers), r.choice(closers)
    text = join_opener(opener, body) if opener else body
    if closer:
        text += " " + closer
    return tidy(f.fill(text))


def ok_favour(f: Filler) -> str:
    return _favour(f, OK_FAVOURS, FRIENDLY_OPENERS + ["", "", ""], OK_CLOSERS)


def soft_scam(f: Filler) -> str:
    return _favour(f, SOFT_FAVOURS, FRIENDLY_OPENERS, SOFT_CLOSERS)


FOLLOWUPS = {
    "scam": [
        "Hi, did you get my last message?", "Please confirm asap, the link expires tonight.", "Have you sent it yet?",
        "Are you still there? My courier is waiting.", "Hello?? I need an answer today.", "Just checking you saw this, it's quite urgent x",
        "Can you reply please.", "Sorry to chase! Did the payment go through?", "Still waiting for your email address.",
        "ok thanks, let me know when it's done", "Send me the code please", "Did you click the link? It says you haven't paid.",
        "Hi again, is it still available? I can pay now.", "Please reply, I don't want you to lose your place.",
        "I've sent it, check your email", "Thanks dear, waiting for your reply.",
    ],
    "advert": [
        "Just following up on my message about {service}, still interested?", "Hi again! We've got a slot {when} if you fancy it.",
        "Last chance for {offer}!", "Hi, did you get a chance to look at our offer? {offer}.", "Still got a couple of spaces {when}, just reply here.",
        "Sorry to chase, just wondered if you'd thought any more about {service}?",
    ],
    "ok": [
        "Hi, did you get my message?", "Have you paid yet? No rush at all.", "Sent you the money, check it's there.",
        "Is it still available?", "Let me know when it's done.", "Still there? Just knock when you're back.",
        "Did the payment go through ok?", "Sorry to chase, are we still on for {when}?", "Can you reply when you get a sec?",
        "Did you get the code for the gate? It's on the letter.", "Just checking you saw this x", "Hello?? Are you coming?",
        "I've sent it, check your email", "Still waiting on the {tool}, no rush though",
    ],
}


def _weighted_key(rng: random.Random, weights: dict[str, float]) -> str:
    keys = list(weights)
    return rng.choices(keys, weights=[weights[k] for k in keys], k=1)[0]


def make_message(rng: random.Random, label: str) -> tuple[str, str]:
    """Return (text, sub-kind) for a message whose true label is ``label``."""
    f = Filler(rng, label)
    if label == "ok":
        kind = _weighted_key(rng, OK_WEIGHTS)
        if kind == "followup":
            text = tidy(f.fill(rng.choice(FOLLOWUPS["ok"])))
        elif kind == "favour":
            text = tidy(ok_favour(f))
        elif kind == "short":
            first, second = rng.sample(OK_TEMPLATES["short"], 2)
            text = f.fill(first)
            if rng.random() < 0.5:
                text += f.fill("{, |! |. | }") + f.fill(second)
            text = tidy(text + f.fill("{| x| :)| {name}| thanks}"))
        else:
            text = tidy(f.fill(rng.choice(OK_TEMPLATES[kind])))
            if rng.random() < OK_DETAIL_SHARE:
                text = tidy(text + " " + f.fill(rng.choice(OK_DETAILS)))
            if rng.random() < 0.06 and kind in ("general", "lookalike", "recommend") and not _GREETING.match(text):
                text = join_opener(f.fill(rng.choice(GENERIC_OPENERS)), text)
            if rng.random() < 0.12 and kind not in ("short", "coop"):
                if text.endswith("?"):
                    text += " " + f.fill("{Thanks in advance!|Let me know.|Thanks!}")
                elif text.endswith((".", "!")):
                    text += " " + f.fill("{x|:)}")
        text = casual(rng, text, 0.35)
    elif label == "scam":
        kind = _weighted_key(rng, SCAM_WEIGHTS)
        if kind == "followup":
            text = tidy(f.fill(rng.choice(FOLLOWUPS["scam"])))
        elif kind == "soft" and rng.random() < 0.7:
            text = tidy(soft_scam(f))
        else:
            text = tidy(f.fill(rng.choice(SCAM_TEMPLATES[kind])))
            if rng.random() < 0.15 and kind in ("courier", "invest", "polite", "soft") and not _GREETING.match(text):
                text = join_opener(f.fill(rng.choice(FRIENDLY_OPENERS)), text)
        text = casual(rng, text, 0.3)
    else:
        if rng.random() < ADVERT_FOLLOWUP_SHARE:
            kind = "followup"
            advert_text(f)  # choose a business for the slots
            text = tidy(f.fill(rng.choice(FOLLOWUPS["advert"])))
        else:
            kind = "advert"
            text = tidy(advert_text(f))
        text = casual(rng, text, 0.2)
    if kind != "short":
        text = add_placeholders(f, label, add_rider(f, label, text) if kind != "followup" else text)
    return respread(rng, text), kind


# ---------------------------------------------------------------------------
# Timestamps, assembly, CSV
# ---------------------------------------------------------------------------

_EVENT_MONTHS = {name: months for name, months in EVENTS}


def sent_at(rng: random.Random, text: str) -> dt.datetime:
    months = None
    low = text.lower()
    for name, ms in _EVENT_MONTHS.items():
        if ms and name.lower() in low:
            months = ms
            break
    start = dt.datetime(YEAR, 1, 1)
    if months:
        month = rng.choice(months)
        first = dt.datetime(YEAR, month, 1)
        nxt = dt.datetime(YEAR + (month == 12), month % 12 + 1, 1)
        day_offset = rng.randrange((nxt - first).days)
        base = first + dt.timedelta(days=day_offset)
    else:
        base = start + dt.timedelta(days=rng.randrange(365))
    # People write mostly in waking hours.
    hour = rng.choices(range(24), weights=[1, 1, 1, 1, 1, 2, 4, 7, 9, 10, 10, 10, 11, 10, 9, 9, 10, 11, 12, 12, 11, 9, 6, 3], k=1)[0]
    return base.replace(hour=hour, minute=rng.randrange(60), second=rng.randrange(60))


def build(seed: int = SEED) -> tuple[list[dict[str, str]], list[dict[str, str]]]:
    """Return (rows, noise_rows).  Rows are sorted by time and numbered."""
    rng = random.Random(seed)
    labels = ["scam"] * N_SCAM + ["advert"] * N_ADVERT + ["ok"] * (N_MESSAGES - N_SCAM - N_ADVERT)
    drafts = []
    seen: set[str] = set()
    for label in labels:
        for _attempt in range(50):
            text, kind = make_message(rng, label)
            if text not in seen:
                break
        seen.add(text)
        drafts.append({"true": label, "kind": kind, "text": text, "when": sent_at(rng, text)})
    drafts.sort(key=lambda d: (d["when"], d["text"]))
    rows = []
    for i, d in enumerate(drafts, start=1):
        rows.append({
            "id": f"tc-{i:05d}",
            "sent_at": d["when"].strftime("%Y-%m-%dT%H:%M:%SZ"),
            "text": d["text"],
            "label": d["true"],
        })
    # Flip a documented handful of labels (never short replies or follow-ups,
    # which carry too little to say that a label is wrong).
    noise = []
    taken: set[int] = set()
    for true_label, shown, count in NOISE_PLAN:
        pool = [i for i, d in enumerate(drafts) if d["true"] == true_label and d["kind"] not in ("short", "followup") and i not in taken]
        for i in sorted(rng.sample(pool, count)):
            taken.add(i)
            rows[i]["label"] = shown
    for i in sorted(taken):
        noise.append({"id": rows[i]["id"], "label": rows[i]["label"], "true_label": drafts[i]["true"]})
    return rows, noise


def to_csv(rows: list[dict[str, str]], fields: list[str]) -> bytes:
    buf = io.StringIO()
    w = csv.DictWriter(buf, fieldnames=fields, lineterminator="\n", quoting=csv.QUOTE_MINIMAL)
    w.writeheader()
    w.writerows(rows)
    return buf.getvalue().encode("utf-8")


def render() -> tuple[bytes, bytes]:
    rows, noise = build()
    return to_csv(rows, ["id", "sent_at", "text", "label"]), to_csv(noise, ["id", "label", "true_label"])


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description="Generate the invented Tideway Commons demo corpus.")
    ap.add_argument("--out", type=Path, default=DEFAULT_OUT, help="where to write messages.csv")
    ap.add_argument("--check", action="store_true", help="regenerate in memory and compare with the CSV at --out")
    args = ap.parse_args(argv)
    messages, noise = render()
    if args.check:
        want = hashlib.sha256(messages).hexdigest()
        try:
            have = hashlib.sha256(args.out.read_bytes()).hexdigest()
        except FileNotFoundError:
            print(f"check failed: {args.out} does not exist", file=sys.stderr)
            return 1
        if have != want:
            print(f"check failed: {args.out} sha256 {have} != regenerated {want}", file=sys.stderr)
            return 1
        noise_path = args.out.with_name("label_noise.csv")
        if noise_path.exists() and noise_path.read_bytes() != noise:
            print(f"check failed: {noise_path} differs from the regenerated label-noise list", file=sys.stderr)
            return 1
        print(f"ok: {args.out} matches (sha256 {want})")
        return 0
    args.out.parent.mkdir(parents=True, exist_ok=True)
    args.out.write_bytes(messages)
    noise_path = args.out.with_name("label_noise.csv")
    noise_path.write_bytes(noise)
    print(f"wrote {args.out} ({len(messages)} bytes, sha256 {hashlib.sha256(messages).hexdigest()})")
    print(f"wrote {noise_path}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
