"""Presenting a :class:`~explain.analysis.vocab.VocabReview`: terminal, CSV and JSON.

Nothing here computes a figure; everything written is read from the review.
Log-odds are natural logarithms; mutual information is in bits. Chi-square
and G2 are unsigned everywhere, beside ``direction`` (the terminal names the
class the token goes with); rankings sort ``direction * statistic``. Words
are those of ``docs/glossary.md``. With
redaction on, personal-looking tokens arrive here already replaced by
placeholders such as ``[e-mail 1]``.

Columns
-------
The CSV (``nbledger vocab --format csv``) has one row per comparison and
token: **every** token of the vocabulary, in the order of the chosen ranking.
JSON rows carry the same keys (without the first three, which the enclosing
comparison holds).

======================  ==========================================================
column                  meaning
======================  ==========================================================
``comparison``          the comparison, ``"<target> vs <other>"``
``target``              the class the evidence is measured for
``other``               the class it is measured against, or ``rest`` (all others pooled)
``rank``                position under the chosen ranking (1 = strongest for target)
``token``               the vocabulary entry (a placeholder when redacted)
``zscore``              Monroe, Colaresi & Quinn (2008) z-score; > 0 favours target
``weighted_log_odds``   the same paper's log-odds ratio with the informative prior
``ratio``               log-odds one occurrence adds for target against other
``mass``                ratio x mean count per message of the side it favours
``chi2``                Pearson chi-square of the 2x2 table (no continuity correction)
``g2``                  Dunning's log-likelihood ratio G2 of the same table
``mi``                  mutual information of token and class, bits
``direction``           +1 the token goes with target, -1 with other, 0 neither
``support_target``      the model's training total for target (``feature_count_``)
``support_other``       the same for the other side
``support_<class>``     the model's training total in each class of the model
                        (JSON: ``support_by_class``, an object keyed by class)
``documents_target``    messages of target containing the token (empty if unknown)
``documents_other``     the same for the other side
``n11`` ... ``n00``     the 2x2 table: present & target, present & other,
                        absent & target, absent & other (what they count: see
                        ``counts`` in the JSON header or the terminal)
``rank_<lens>``         position under each ranking: zscore, ratio, mass, chi2, g2
``thin`` ... ``watchlist_strong``  true where the token carries that risk flag
``personal_kind``       e-mail, url, ip, digits or phone; empty otherwise
======================  ==========================================================

JSON (``--format json``), schema ``nbledger.vocab/1``: ``model`` and ``data``
(``{path, sha256}`` or null); ``review`` (variant, feature kind, classes,
normal class, token count, ranking, list length, ``counts``: what the 2x2
tables count and why, with ``rows_counted`` and ``rows_note`` for a labelled
file; the z-score prior scale, risk thresholds, redaction and
``personal_data_check``: ``tokens_checked``, ``found`` as a list of
``{kind, tokens}``, ``tokenizer_splits``); ``comparisons``,
each with its classes, training messages, ``flag_counts``, ``top_for`` and
``top_against`` (rows as above) and ``flagged`` (per flag, the strongest
tokens carrying it, at most ``top``); and ``watchlist`` (source and, per term,
whether the vocabulary has it and its row in each comparison). Numbers that
are not finite become null.
"""

from __future__ import annotations

import io
import math

import numpy as np
from rich.console import Console
from rich.table import Table
from rich.text import Text

from explain.analysis.risk import FLAG_LABELS, FLAGS, PERSONAL_KINDS
from explain.present.numbers import MISSING
from explain.present.token_display import shown
from explain.analysis.vocab import LENS_TITLES, LENSES, VocabComparison, VocabReview

SCHEMA = "nbledger.vocab/1"
VALUE_COLUMNS = ("zscore", "weighted_log_odds", "ratio", "mass", "chi2", "g2", "mi", "direction")
TABLE_CELLS = ("n11", "n10", "n01", "n00")
# How many of the strongest flagged tokens the terminal names per flag.
TERMINAL_FLAG_EXAMPLES = 5
#: Beyond this many comparisons the terminal gives each one line, not two tables: tables take about
#: 0.1 s a comparison, so a model of 10,000 classes would print for some 18 minutes
#: (benchmarks/README.md); ``--class C`` shows one comparison in full.
FULL_COMPARISONS = 100
#: Tokens named each way on a comparison's one line.
LINE_TOKENS = 3


def _number(x):
    if isinstance(x, (np.integer, int)):
        return int(x)
    x = float(x)
    return x if math.isfinite(x) else None


def _row(review: VocabReview, c: VocabComparison, j: int) -> dict:
    """One token of one comparison, with the documented keys."""
    lens_at = LENSES.index(review.lens)
    row = {"rank": int(c.rank[lens_at, j]), "token": str(review.tokens[j])}
    row.update({name: _number(getattr(c, name)[j]) for name in VALUE_COLUMNS})
    row["support_target"] = _number(c.support_target[j])
    row["support_other"] = _number(c.support_other[j])
    row["support_by_class"] = {k: _number(v) for k, v in zip(review.classes, review.support_by_class[:, j])}
    row["documents_target"] = None if c.documents_target is None else _number(c.documents_target[j])
    row["documents_other"] = None if c.documents_other is None else _number(c.documents_other[j])
    row.update({cell: _number(c.table[k, j]) for k, cell in enumerate(TABLE_CELLS)})
    row.update({f"rank_{lens}": int(c.rank[k, j]) for k, lens in enumerate(LENSES)})
    row["flags"] = [name for k, name in enumerate(FLAGS) if c.flags[k, j]]
    kind = int(review.traits.personal_kind[j])
    row["personal_kind"] = PERSONAL_KINDS[kind] if kind >= 0 else None
    return row


def to_json(review: VocabReview, model=None, data=None) -> dict:
    """The documented JSON object of one review (``model``/``data`` need ``.path``/``.source`` and ``.sha256``)."""
    rows = lambda c, columns: [_row(review, c, int(j)) for j in columns]  # noqa: E731
    return {
        "schema": SCHEMA,
        "model": None if model is None else {
            "path": str(model.path), "sha256": model.sha256, "fingerprint": getattr(model, "fingerprint", None),
        },
        "data": None if data is None else {"path": str(data.source), "sha256": data.sha256},
        "review": {
            "variant": review.variant,
            "feature_kind": review.feature_kind,
            "classes": list(review.classes),
            "normal_class": review.normal_class,
            "n_features": review.n_features,
            "names_note": review.names_note,
            "ranked_by": review.lens,
            "top": review.top,
            "counts": {
                "kind": review.counts.kind,
                "reason": review.counts.reason,
                "rows_counted": review.counts.rows_counted,
                "rows_note": review.counts.rows_note or None,
            },
            "prior_scale": review.prior_scale,
            "thresholds": {
                "thin_below": review.thresholds.thin_below,
                "strong_log_odds": review.thresholds.strong_log_odds,
            },
            "redacted": review.redacted,
            "redacted_count": review.redacted_count,
            "personal_data_check": {
                "tokens_checked": review.redaction.checked,
                "found": [{"kind": kind, "tokens": n} for kind, n in review.redaction.found.items()],
                "tokenizer_splits": None
                if review.redaction.tokenizer_splits is None
                else list(review.redaction.tokenizer_splits),
            },
        },
        "comparisons": [
            {
                "comparison": c.label,
                "target": c.target,
                "other": c.other,
                "other_classes": list(c.other_classes),
                "messages_target": _number(c.messages_target),
                "messages_other": _number(c.messages_other),
                "flag_counts": dict(c.flag_counts),
                "top_for": rows(c, c.top(review.lens, review.top, "for")),
                "top_against": rows(c, c.top(review.lens, review.top, "against")),
                "flagged": {
                    name: rows(c, c.strongest_flagged(name, review.lens, review.top))
                    for name in FLAGS
                    if name != "watchlist"
                },
            }
            for c in review.comparisons
        ],
        "watchlist": None
        if review.watchlist_source is None
        else {
            "source": review.watchlist_source,
            "terms": [
                {
                    "term": w.term,
                    "in_vocabulary": w.column >= 0,
                    "rows": [
                        {"comparison": c.label, **_row(review, c, w.column)} if w.column >= 0 else None
                        for c in review.comparisons
                    ],
                }
                for w in review.watchlist
            ],
        },
    }


def to_csv(review: VocabReview) -> str:
    """Every token of every comparison as CSV, with the documented columns."""
    import pandas as pd

    lens_at = LENSES.index(review.lens)
    frames = []
    for c in review.comparisons:
        order = c.order[lens_at]
        columns = {
            "comparison": c.label,
            "target": c.target,
            "other": c.other,
            "rank": c.rank[lens_at, order],
            "token": review.tokens[order],
        }
        columns.update({name: getattr(c, name)[order] for name in VALUE_COLUMNS})
        columns["support_target"] = c.support_target[order]
        columns["support_other"] = c.support_other[order]
        columns.update({f"support_{k}": review.support_by_class[i, order] for i, k in enumerate(review.classes)})
        columns["documents_target"] = None if c.documents_target is None else c.documents_target[order]
        columns["documents_other"] = None if c.documents_other is None else c.documents_other[order]
        columns.update({cell: c.table[k, order] for k, cell in enumerate(TABLE_CELLS)})
        columns.update({f"rank_{lens}": c.rank[k, order] for k, lens in enumerate(LENSES)})
        columns.update({name: c.flags[k, order] for k, name in enumerate(FLAGS)})
        kinds = np.array([""] + list(PERSONAL_KINDS), dtype=object)
        columns["personal_kind"] = kinds[review.traits.personal_kind[order] + 1]
        frames.append(pd.DataFrame(columns))
    buffer = io.StringIO()
    pd.concat(frames, ignore_index=True).to_csv(buffer, index=False, lineterminator="\n")
    return buffer.getvalue()


# ---------------------------------------------------------------- terminal


def _fmt(x) -> str:
    x = float(x)
    if not math.isfinite(x):
        return MISSING
    if abs(x) >= 100:
        return f"{x:,.0f}"
    # three significant digits, trailing zeros kept, so a column does not mix 5.1 with 5.13
    return f"{x:#.3g}"


def _count(x) -> str:
    x = float(x)
    return f"{int(x):,}" if x == int(x) else f"{x:,.2f}"


# Below this terminal width only the ranking lens, ratio and mass are shown: every lens,
# direction, support and messages need about 150 columns without folding a number.
WIDE_TERMINAL = 150
#: Column headings of the lenses (glossary words; MI is mutual information).
LENS_HEADINGS = {"zscore": "z-score", "ratio": "ratio", "mass": "mass", "chi2": "chi-square", "g2": "G2", "mi": "MI"}
#: What each kind of personal data is called in sentences.
PERSONAL_NAMES = {
    "e-mail": "e-mail addresses",
    "url": "URLs",
    "ip": "IP addresses",
    "digits": "runs of 7+ digits",
    "phone": "phone numbers",
    "card": "card numbers",
    "iban": "IBANs",
    "sort-code": "sort codes",
    "account": "account numbers",
    "birth-date": "dates of birth",
    "address": "street addresses",
    "postcode": "postcodes",
    "name": "given names",
}
_COUNT_WORDS = {"documents": "messages containing each token", "occurrences": "token occurrences",
                "tfidf-weights": "summed TF-IDF weights",
                "normalised-weights": "summed normalised counts"}


def _listing(words) -> str:
    words = list(words)
    return words[0] if len(words) == 1 else ", ".join(words[:-1]) + " and " + words[-1]


def redaction_lines(review: VocabReview) -> list[str]:
    """The personal-data footer: what was checked, what was found, what could not be checked."""
    check = review.redaction
    found = ", ".join(f"{PERSONAL_NAMES[k]} {n:,}" for k, n in check.found.items() if n)
    lines = [
        f"Personal-data check: {check.checked:,} tokens checked for {_listing(PERSONAL_NAMES.values())}; "
        + (f"found {check.total:,} ({found})" if check.total else "found none")
        + (", each shown as a placeholder." if review.redacted and check.total else ".")
    ]
    if check.tokenizer_splits is None:
        lines.append("The model's tokenizer was not tried, so values it splits into pieces may be present.")
    elif check.tokenizer_splits:
        lines.append(
            f"This model's tokenizer splits {_listing(PERSONAL_NAMES[k] for k in check.tokenizer_splits)} "
            "into pieces (tried on reserved examples such as warden@example.org): those reach the vocabulary "
            "only as pieces like 'example' or 'org', which no check recognises, so they may be there unflagged."
        )
    return lines


def _shown_value(c: VocabComparison, lens: str, j: int) -> str:
    """A lens value as shown: signed for z-score, ratio and mass, unsigned for chi-square, G2 and MI."""
    return _fmt(getattr(c, lens)[j])


def _direction(c: VocabComparison, j: int) -> str:
    return {1: c.target, -1: c.other}.get(int(c.direction[j]), "neither")


def _flags(c: VocabComparison, j: int, skip=()) -> str:
    return ", ".join(FLAG_LABELS[name] for k, name in enumerate(FLAGS) if c.flags[k, j] and name not in skip)


def _token_table(review: VocabReview, c: VocabComparison, picked, side: str, wide: bool) -> Table:
    """Rows of ``picked``; ``rank`` counts from the end of the ranking that ``side`` starts at.

    Numbers never wrap: their columns do not fold, and only the token and
    flags columns give way at narrow widths.
    """
    lenses = LENSES if wide else tuple(dict.fromkeys((review.lens, "ratio", "mass")))
    # Narrow tables need no direction: their ranking puts every row on the side the title names.
    statistics = wide
    docs = wide and c.documents_target is not None
    owner = c.target if side == "for" else c.other
    table = Table(title=Text(f"strongest {len(picked)} for {owner}"), title_justify="left", show_edge=False, pad_edge=False)
    number = dict(justify="right", no_wrap=True)
    table.add_column("rank", **number)
    table.add_column("token", overflow="fold", min_width=8, max_width=32)
    for lens in [*lenses, *(["mi"] if wide else [])]:
        table.add_column(LENS_HEADINGS[lens], style="bold" if lens == review.lens else None, **number)
    if statistics:
        table.add_column("direction", no_wrap=True)
    for side_name in (c.target, c.other):
        table.add_column(Text(f"support\n{side_name}"), **number)
    if docs:
        for side_name in (c.target, c.other):
            table.add_column(Text(f"messages\n{side_name}"), **number)
    table.add_column("flags", overflow="fold", min_width=6)
    lens_at = LENSES.index(review.lens)
    for j in picked:
        rank = int(c.rank[lens_at, j])
        cells = [f"{rank if side == 'for' else review.n_features + 1 - rank:,}", shown(review.tokens[j])]
        cells += [_shown_value(c, lens, j) for lens in [*lenses, *(["mi"] if wide else [])]]
        if statistics:
            cells.append(_direction(c, j))
        cells += [_count(c.support_target[j]), _count(c.support_other[j])]
        if docs:
            cells += [_count(c.documents_target[j]), _count(c.documents_other[j])]
        cells.append(_flags(c, j))
        # Tokens are data, never markup: "[e-mail 1]" must print as it is.
        table.add_row(*map(Text, cells))
    return table


def feature_words(review: VocabReview) -> str:
    """The feature kind as the classifier uses it (BernoulliNB: presence, whatever it was given)."""
    from explain.model.training import feature_kind_words

    return feature_kind_words(review.feature_kind, review.variant)


def _header(review: VocabReview, console: Console) -> None:
    t = review.thresholds
    say = lambda line: console.print(line, markup=False)  # noqa: E731
    say(
        f"Vocabulary of a {review.variant} naive Bayes model: {review.n_features:,} tokens, "
        f"features {feature_words(review)}; classes {', '.join(review.classes)}"
        + (f"; normal class {review.normal_class}" if review.normal_class else "")
    )
    if review.names_note is not None:
        say(review.names_note)
    say(f"Ranked by {LENS_TITLES[review.lens]}; positive values favour the first class of each comparison.")
    say(
        f"2x2 tables (chi-square, G2, MI) count {_COUNT_WORDS[review.counts.kind]}: {review.counts.reason}. "
        "Chi-square and G2 carry no sign: each table lists the tokens that go with the class it names."
    )
    prior = "the pooled counts of the two sides" if review.prior_scale is None else f"scale a0 = {review.prior_scale:g}"
    say(f"z-score prior: {prior}.")
    say(
        f"Strong: one occurrence changes the odds at least {math.exp(t.strong_log_odds):.3g}-fold "
        f"(|ratio| >= {t.strong_log_odds:.3g}); thin: strong with support below {t.thin_below:g} (both sides together); "
        "watchlist-strong: a watchlist token strong toward a flagged class."
    )


def _comparison(review: VocabReview, c: VocabComparison, console: Console) -> None:
    console.print()
    console.rule(
        Text(f"{c.label}: {_count(c.messages_target)} vs {_count(c.messages_other)} training messages"), style="none"
    )
    for side in ("for", "against"):
        picked = c.top(review.lens, review.top, side)
        console.print(_token_table(review, c, picked, side, console.width >= WIDE_TERMINAL))
    # name=count keeps each pair on one line when the terminal wraps
    counts = ", ".join(f"{FLAG_LABELS[name]}={c.flag_counts[name]:,}" for name in FLAGS)
    console.print(_hanging(f"flags: {counts}", console.width), markup=False)
    for name in FLAGS:
        if name == "watchlist" or not c.flag_counts[name]:
            continue
        examples = c.strongest_flagged(name, review.lens, TERMINAL_FLAG_EXAMPLES)
        values = c.values(review.lens)
        listed = ", ".join(
            f"{review.tokens[j]} ({_shown_value(c, review.lens, j)} for {c.target if values[j] >= 0 else c.other})"
            for j in examples
        )
        console.print(_hanging(f"  strongest {FLAG_LABELS[name]}: {listed}", console.width), markup=False)


def _comparison_lines(review: VocabReview, console: Console) -> None:
    """Each comparison in one line: its sizes, the strongest tokens each way, the flags it has."""
    console.print()
    console.print(
        f"{len(review.comparisons):,} comparisons, one line each with the {LINE_TOKENS} strongest tokens each way "
        f"({LENS_TITLES[review.lens]}); --class C shows one in full.", markup=False,
    )

    def line(c: VocabComparison) -> str:
        strongest = {side: ", ".join(shown(review.tokens[j]) for j in c.top(review.lens, LINE_TOKENS, side))
                     for side in ("for", "against")}
        counts = ", ".join(f"{FLAG_LABELS[name]}={c.flag_counts[name]:,}" for name in FLAGS if c.flag_counts[name])
        return (
            f"{c.label}: {_count(c.messages_target)} vs {_count(c.messages_other)} training messages; strongest for "
            f"{c.target}: {strongest['for']}; for {c.other}: {strongest['against']}" + (f"; flags: {counts}" if counts else "")
        )

    console.print("\n".join(line(c) for c in review.comparisons), markup=False, highlight=False, soft_wrap=True)


def _hanging(line: str, width: int) -> str:
    """``line`` folded at ``width`` between list items' words, the folded lines indented under the first."""
    import textwrap

    return textwrap.fill(line, width=width, subsequent_indent="      ", break_long_words=False, break_on_hyphens=False)


def _watchlist(review: VocabReview, c: VocabComparison) -> Table:
    """The watchlist terms the vocabulary has, in one comparison (the others are listed after the tables)."""
    table = Table(
        title=Text(f"watchlist, {c.label}"),
        title_justify="left",
        show_edge=False,
        pad_edge=False,
    )
    for name in ("term", LENS_HEADINGS[review.lens], "ratio", "rank", "support", "flags"):
        if name in ("term", "flags"):
            table.add_column(name, overflow="fold")
        else:
            table.add_column(name, justify="right", no_wrap=True)
    lens_at = LENSES.index(review.lens)
    for w in review.watchlist:
        if w.column < 0:
            continue
        j = w.column
        rank = int(c.rank[lens_at, j])
        value = c.values(review.lens)[j]
        where = f"{rank:,} for {c.target}" if value >= 0 else f"{review.n_features + 1 - rank:,} for {c.other}"
        cells = (
            w.term,
            _shown_value(c, review.lens, j),
            _fmt(c.ratio[j]),
            where,
            f"{_count(c.support_target[j])} / {_count(c.support_other[j])}",
            _flags(c, j, skip=("watchlist",)),
        )
        table.add_row(*map(Text, cells))
    return table


def render(review: VocabReview, console: Console) -> None:
    """The review as terminal tables (one line per comparison beyond :data:`FULL_COMPARISONS`), the
    personal-data check last."""
    _header(review, console)
    if len(review.comparisons) > FULL_COMPARISONS:
        _comparison_lines(review, console)
    else:
        for c in review.comparisons:
            _comparison(review, c, console)
    if review.watchlist_source is not None:
        console.print()
        console.print(f"Watchlist {review.watchlist_source}: every term in every comparison.", markup=False)
        if any(w.column >= 0 for w in review.watchlist):
            for c in review.comparisons:
                console.print(_watchlist(review, c))
        missing = [w.term for w in review.watchlist if w.column < 0]
        if missing:
            console.print(f"watchlist terms not in the vocabulary (no effect): {', '.join(missing)}", markup=False)
    console.print()
    for line in redaction_lines(review):
        console.print(line, markup=False)
