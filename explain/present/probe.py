"""Presenting a :class:`~explain.analysis.probe.ProbeResult`: terminal and JSON.

Nothing here computes a figure. Evasion costs count added token
occurrences; shifts are substituted minus original; log-odds are
``log P(flag) - log P(normal)`` (natural logarithms).

JSON (``--format json``), schema ``nbledger.probe/2``: ``classes``,
``normal_class``, ``threshold``, ``threshold_log_odds``, ``messages``,
``cautions``; ``evasion`` (null unless asked): ``max_added``, ``note``,
``flagged_messages`` and per budget (``repeats``, ``distinct``): ``method``
(exact or greedy), ``per_class`` (``flagged_class``, ``messages``, ``evaded``,
``median``, ``q1``, ``q3``: a number, ``{"more_than": max_added}`` past the
greedy search's cap, or ``{"no_attack": true}`` when no addition lets the
messages through (exact costs are never capped), ``share_within``
keyed by 1, 3, 5, 10), ``weak_points`` (``token``, ``attacks``,
``per_occurrence_evidence`` keyed by flagged class, ``support`` keyed by class)
and ``attacks`` (``row`` counted from 0, ``id``: the message's id, as given or its keyed pseudonym when it
holds an e-mail address, else the data row counted from 1; ``decided``, ``cost``: a number or an object as above,
``additions`` as ``{token, occurrences}``); ``term_evidence`` (``group``,
``term``, ``token``, ``known``, ``evidence`` keyed by class, ``support``);
``swap_notes``; ``term_swaps`` (null without data): ``groups`` (``group``,
``messages``, ``swaps``, ``decisions_changed``, ``fairness_gap``, ``tested``) and
``pairs`` (``group``, ``source``, ``target``, ``messages``, ``decisions_changed``,
``mean_log_odds_shift``, ``mean_flag_probability_shift``, ``fairness_gap``,
``tested``): a group or pair that no message holds is untested, ``tested``
false with ``messages`` 0 and null shifts and gap (never 0, which would read
as fair).
"""

from __future__ import annotations

from rich.table import Table

from explain.analysis.evasion import WITHIN, MoreThan
from explain.analysis.probe import ProbeResult
from explain.present.token_display import shown
from explain.present.wording import amount, plural

SCHEMA = "nbledger.probe/2"
CAUTIONS = (
    "Evasion results are sensitive: they show a sender what to add to get a message through. "
    "Keep them for internal circulation.",
    "These figures describe the model, not the truth about any message or person.",
    "Message content is personal data; handle these outputs under your local data-protection rules.",
    "Decisions about people stay with trained staff under local law and qualified advice.",
)
PAIRS_SHOWN = 12


def _cost(value) -> str:
    """A cost on the screen: a count, ``more than N`` past the greedy search's cap, or ``no attack``."""
    return str(value) if isinstance(value, MoreThan) else f"{value:g}"


def render(result: ProbeResult, console) -> None:
    """Print the probe for a person at a terminal (80 columns are enough)."""
    scope = plural(result.messages, "message") if result.messages else "the model alone (no messages given)"
    console.print(f"[bold]Robustness and fairness probe[/bold] of {scope}")
    rule = "the most probable class" if result.threshold is None else f"flag when P(flag) >= {result.threshold:.4g}"
    console.print(f"normal class: {result.normal_class}; decision: {rule}")
    ev = result.evasion
    if ev is not None:
        console.print()
        console.print(
            f"[bold]Evasion cost[/bold]: added tokens that let a flagged message through "
            f"({plural(len(ev.rows), 'flagged message')}, "
            + ("exact, no limit)" if ev.repeats.exact else f"greedy, searched up to {ev.max_added})")
        )
        if ev.note:
            console.print(f"note: {ev.note}")
        for budget in ("repeats", "distinct"):
            res = ev.budget(budget)
            if ev.presence and budget == "distinct":
                break
            title = "repeats allowed" if budget == "repeats" else "distinct new tokens only"
            if ev.presence:
                title = "each token once (only presence counts)"
            table = Table(title=f"{title} ({res.method})", title_justify="left")
            for name in ("flagged class", "messages", "median", "quartiles", *(f"<= {k}" for k in WITHIN)):
                table.add_column(name, justify="left" if name == "flagged class" else "right")
            for s in res.summaries:
                shares = dict(s.within)
                table.add_row(
                    shown(s.flagged_class), f"{s.messages:,}", _cost(s.median),
                    f"{_cost(s.q1)} to {_cost(s.q3)}",
                    *(f"{100 * shares[k]:.0f}%" for k in WITHIN),
                )
            console.print(table)
            if res.weak_points:
                weak = Table(
                    title=f"weak points: tokens most used in these attacks, with their evidence toward "
                    f"{result.normal_class} per occurrence",
                    title_justify="left",
                )
                for name in ("token", "attacks", *(f"vs {c}" for c in ev.flagged_classes), "support"):
                    weak.add_column(name, justify="left" if name == "token" else "right")
                for w in res.weak_points:
                    weak.add_row(shown(w.token), f"{w.attacks:,}", *(amount(v) for v in w.per_unit), f"{sum(w.support):,.0f}")
                console.print(weak)
    if result.term_evidence:
        console.print()
        table = Table(title="Term evidence per occurrence, against the normal class", title_justify="left")
        flagged = [c for c in result.classes if c != result.normal_class]
        for name in ("group", "term", *(f"toward {c}" for c in flagged), "support"):
            table.add_column(shown(name), justify="left" if name in ("group", "term") else "right")
        index = {c: i for i, c in enumerate(result.classes)}
        for t in result.term_evidence:
            values = [amount(t.evidence[index[c]]) for c in flagged] if t.known else ["no effect"] * len(flagged)
            table.add_row(shown(t.group), shown(t.term), *values, f"{t.support:,.0f}" if t.known else "unknown")
        console.print(table)
    for note in result.swap_notes:
        console.print(f"swap-terms: {shown(note)}")
    if result.swaps is not None:
        _print_swaps(result.swaps, console)
    console.print()
    for caution in CAUTIONS:
        console.print(f"[dim]{caution}[/dim]")


def untested_pairs(pairs) -> list[tuple[str, str, int]]:
    """``(group, source term, pairs)`` for every source term no message holds, in file order."""
    out: dict[tuple[str, str], int] = {}
    for p in pairs:
        if not p.tested:
            out[(p.group, p.source)] = out.get((p.group, p.source), 0) + 1
    return [(g, t, n) for (g, t), n in out.items()]


def _print_swaps(sw, console) -> None:
    """Tested groups and pairs in tables; what no message holds listed apart as untested, never as a gap of 0."""
    console.print()
    table = Table(title="Term swaps: counterfactual token fairness gap (Garg et al. 2019)", title_justify="left")
    for name in ("group", "messages", "swaps", "decisions changed", "gap"):
        table.add_column(name, justify="left" if name == "group" else "right")
    for g in sw.groups:
        if g.tested:
            table.add_row(shown(g.group), f"{g.messages:,}", f"{g.swaps:,}", f"{g.decisions_changed:,}", f"{g.gap:.4f}")
    if any(g.tested for g in sw.groups):
        console.print(table)
    tested = [p for p in sw.pairs if p.tested]
    if tested:
        ranked = sorted(tested, key=lambda p: -p.gap)[:PAIRS_SHOWN]
        pairs = Table(title=f"largest term pairs (of {len(tested)} tested)", title_justify="left")
        for name in ("swap", "messages", "changed", "flag log-odds shift", "P(flag) shift", "gap"):
            pairs.add_column(name, justify="left" if name == "swap" else "right")
        for p in ranked:
            pairs.add_row(
                f"{shown(p.source)} -> {shown(p.target)}", f"{p.messages:,}", f"{p.decisions_changed:,}",
                amount(p.mean_log_odds_shift), f"{p.mean_probability_shift:+.4f}", f"{p.gap:.4f}",
            )
        console.print(pairs)
    untested_groups = [g.group for g in sw.groups if not g.tested]
    if untested_groups:
        console.print(f"untested (0 messages), no gap: {', '.join(shown(g) for g in untested_groups)}")
    terms = [(g, t, n) for g, t, n in untested_pairs(sw.pairs) if g not in untested_groups]
    if terms:
        listed = ", ".join(f"{shown(t)} ({shown(g)}, {plural(n, 'pair')})" for g, t, n in terms)
        console.print(f"term pairs untested (0 messages hold the term), no gap: {listed}")


def _cost_json(value):
    """A cost in JSON: a number, ``{"more_than": N}`` past the greedy cap, or ``{"no_attack": true}``."""
    if isinstance(value, MoreThan):
        return {"no_attack": True} if value.limit is None else {"more_than": value.limit}
    return float(value)


def to_json(result: ProbeResult, include_attacks: bool = True) -> dict:
    """The probe as plain JSON-ready data (schema ``nbledger.probe/2``)."""
    ev = result.evasion
    evasion = None
    if ev is not None:
        evasion = {"max_added": ev.max_added, "note": ev.note, "flagged_messages": int(len(ev.rows))}
        for budget in ("repeats", "distinct"):
            res = ev.budget(budget)
            block = {
                "method": res.method,
                "per_class": [
                    {
                        "flagged_class": s.flagged_class, "messages": s.messages, "evaded": s.evaded,
                        "median": _cost_json(s.median), "q1": _cost_json(s.q1), "q3": _cost_json(s.q3),
                        "share_within": {str(k): v for k, v in s.within},
                    }
                    for s in res.summaries
                ],
                "weak_points": [
                    {
                        "token": w.token, "attacks": w.attacks,
                        "per_occurrence_evidence": dict(zip(ev.flagged_classes, w.per_unit)),
                        "support": dict(zip(result.classes, w.support)),
                    }
                    for w in res.weak_points
                ],
            }
            if include_attacks:
                block["attacks"] = [
                    {
                        "row": int(r), "id": i, "decided": str(d),
                        "cost": int(c) if c > 0 else _cost_json(MoreThan(None if res.exact else ev.max_added)),
                        "additions": [{"token": t, "occurrences": n} for t, n in adds],
                    }
                    for r, i, d, c, adds in zip(ev.rows, result.evasion_ids, ev.decided, res.costs, res.additions)
                ]
            evasion[budget] = block
    sw = result.swaps
    return {
        "schema": SCHEMA,
        "classes": list(result.classes),
        "normal_class": result.normal_class,
        "threshold": result.threshold,
        "threshold_log_odds": result.threshold_log_odds,
        "messages": result.messages,
        "cautions": list(CAUTIONS),
        "evasion": evasion,
        "term_evidence": [
            {
                "group": t.group, "term": t.term, "token": t.token, "known": t.known,
                "evidence": dict(zip(result.classes, t.evidence)), "support": t.support,
            }
            for t in result.term_evidence
        ],
        "swap_notes": list(result.swap_notes),
        "term_swaps": None if sw is None else {
            "groups": [
                {"group": g.group, "messages": g.messages, "swaps": g.swaps,
                 "decisions_changed": g.decisions_changed, "fairness_gap": g.gap, "tested": g.tested}
                for g in sw.groups
            ],
            "pairs": [
                {"group": p.group, "source": p.source, "target": p.target, "messages": p.messages,
                 "decisions_changed": p.decisions_changed, "mean_log_odds_shift": p.mean_log_odds_shift,
                 "mean_flag_probability_shift": p.mean_probability_shift, "fairness_gap": p.gap,
                 "tested": p.tested}
                for p in sw.pairs
            ],
        },
    }
