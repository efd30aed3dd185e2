"""``nbledger compare`` on the terminal, as ``nbledger.compare/1`` JSON, and as an HTML/PDF report.

Presenters only read :class:`explain.analysis.compare.Comparison`; the HTML
is made of the review report's parts (its Jinja2 environment, stylesheet,
safe PDF renderer, and the ledger fragment for the two explanations of each
changed message).
"""

from __future__ import annotations

from explain.analysis.compare import Comparison
from explain.present.ledger_words import CAUTION, closing_figure

CAUTIONS = (
    CAUTION,
    "Error rates and the test are estimates from the messages given; a different sample will give different figures.",
    "Message content is personal data: keep this comparison as you would the messages.",
)


def _finite(x: float) -> float | None:
    return None if x != x else x  # NaN (a rate over no messages) is null in strict JSON


def _rate(r) -> dict | None:
    if r is None:
        return None
    return {"value": _finite(r.value), "low": _finite(r.low), "high": _finite(r.high),
            "numerator": r.numerator, "denominator": r.denominator}


def _score(s) -> dict | None:
    if s is None:
        return None
    f = s.flagging
    return {
        "accuracy": _rate(s.accuracy),
        "flagging": None if f is None else {
            "tp": f.tp, "fp": f.fp, "fn": f.fn, "tn": f.tn,
            **{k: _rate(getattr(f, k)) for k in ("precision", "recall", "false_alarm_rate", "f1")},
        },
    }


def to_json(c: Comparison, *, top: int = 10) -> dict:
    """The comparison as plain data (``nbledger.compare/1``); each changed message with both ledgers as ``nbledger.why/3``."""
    from explain.present.ledger_json import to_json as ledger_json

    v = c.vocabulary
    d = c.decisions
    return {
        "schema": "nbledger.compare/1",
        "old": {"file": c.old_path, "sha256": c.old_sha256, "fingerprint": c.old_fingerprint,
                "classes": list(c.old_classes), "vocabulary_size": v.old_size},
        "new": {"file": c.new_path, "sha256": c.new_sha256, "fingerprint": c.new_fingerprint,
                "classes": list(c.new_classes), "vocabulary_size": v.new_size},
        "same_file": c.same_file,
        "same_text_steps": c.same_text_steps,
        "normal_class": c.normal_class,
        "threshold": c.threshold,
        "threshold_log_odds": c.threshold_log_odds,
        "notes": list(c.notes),
        "appeals": None if c.appeals is None else {
            side: appeals_json(a) for side, a in zip(("old", "new"), c.appeals)
        },
        "settings": [{"name": s.name, "old": s.old, "new": s.new, "differs": s.differs} for s in c.settings],
        "weights_compared": c.weights_compared,
        "vocabulary": {
            "shared": v.shared,
            "added": list(v.added),
            "removed": list(v.removed),
            "priors": [
                {"class": p.cls, "old_share": p.old_share, "new_share": p.new_share,
                 "old_log_prior": p.old_log_prior, "new_log_prior": p.new_log_prior}
                for p in v.priors
            ],
            "comparisons": [
                {
                    "target": k.target, "other": k.other,
                    "gained": [{"token": s.token, "old": s.old, "new": s.new, "change": s.change} for s in k.shifts_up],
                    "lost": [{"token": s.token, "old": s.old, "new": s.new, "change": s.change} for s in k.shifts_down],
                    "zscore_ranks": [
                        {"token": r.token, "old_rank": r.old_rank, "new_rank": r.new_rank,
                         "old_zscore": r.old_zscore, "new_zscore": r.new_zscore}
                        for r in k.ranks
                    ],
                }
                for k in v.comparisons
            ],
        },
        "decisions": None if d is None else {
            "data": d.source,
            "messages": d.n,
            "changed": d.changed,
            "changes": [{"old": a, "new": b, "messages": n} for a, b, n in d.changes],
            "old_metrics": _score(d.old_score),
            "new_metrics": _score(d.new_score),
            "mcnemar": None if d.mcnemar is None else {
                "old_right_new_wrong": d.mcnemar.b, "old_wrong_new_right": d.mcnemar.c,
                "exact_p": d.mcnemar.exact_p, "chi2": d.mcnemar.chi2, "chi2_p": d.mcnemar.chi2_p,
                "method": "McNemar 1947: exact two-sided binomial test of b in b + c at 1/2; chi-square (b - c)^2 / (b + c), 1 degree of freedom, no continuity correction",
            },
            "shown": [
                {"row": m.row + 1, "id": m.message_id, "label": m.label, "old_decision": m.old_decision,
                 "new_decision": m.new_decision, "old": ledger_json(m.old, top=top)["ledger"],
                 "new": ledger_json(m.new, top=top)["ledger"]}
                for m in d.shown
            ],
        },
        "cautions": list(CAUTIONS),
    }


def dumps(c: Comparison, *, top: int = 10) -> str:
    """The JSON as text: strict (no NaN), two-space indents, UTF-8 kept, a final newline."""
    import json

    return json.dumps(to_json(c, top=top), indent=2, ensure_ascii=False, allow_nan=False) + "\n"


def _pct(r) -> str:
    if r is None or r.denominator == 0:
        return "n/a"
    return f"{100 * r.value:.1f} % ({100 * r.low:.1f} to {100 * r.high:.1f}); {r.numerator:,} of {r.denominator:,}"


def _p(x: float) -> str:
    return f"{x:.3g}" if x >= 1e-4 else f"{x:.1e}"


#: A setting's name on screens and pages (glossary words), by its key.
SETTING_NAMES = {
    "variant": "variant", "feature_kind": "features", "analyzer": "analyzer", "ngrams": "n-grams", "alpha": "alpha",
    "vocabulary_size": "vocabulary size", "text_view": "text view", "fingerprint": "model fingerprint",
}


def setting_value(name: str, value, analyzer: str = "word") -> str:
    """One setting's value in the glossary's words (``token counts``, ``unigrams and bigrams`` ...)."""
    from explain.model.training import feature_kind_words, ngram_words

    if value is None:
        return "not recorded"
    if name == "feature_kind":
        return feature_kind_words(value, "")
    if name == "ngrams":
        return ngram_words(tuple(value), analyzer)
    if name == "vocabulary_size":
        return f"{value:,} tokens"
    if name == "fingerprint":
        return str(value)[:12] + "…"
    if name == "alpha":
        return f"{value:g}" if isinstance(value, (int, float)) else ", ".join(f"{a:g}" for a in value)
    return str(value)


def settings_rows(c: Comparison) -> list[tuple[str, str, str, bool]]:
    """``(setting, old, new, differs)`` in words, for the terminal and the page."""
    analyzers = {s.name: (s.old, s.new) for s in c.settings}.get("analyzer", ("word", "word"))
    return [
        (SETTING_NAMES.get(s.name, s.name), setting_value(s.name, s.old, analyzers[0]),
         setting_value(s.name, s.new, analyzers[1]), s.differs)
        for s in c.settings
    ]


def _drivers(ledger, n: int = 3) -> str:
    largest = sorted(ledger.entries, key=lambda e: -abs(e.amount))[:n]
    return ", ".join(f"{e.token} {e.amount:+.2f}" for e in largest) or "no known token"


def appeals_json(a) -> dict:
    from explain.analysis.appeals import appeals_json as as_json

    return as_json(a)


def appeal_sentence(a) -> str:
    """Appeals overturned per 10,000 flagged messages, as one sentence (the review desk's decisions)."""
    if a.value is None:
        return "no decided appeal of a flagged message under this model file"
    from explain.present.numbers import per_10000_text

    return (f"{per_10000_text(a.value, a.low, a.high)} overturned per 10,000 flagged messages whose appeal was "
            f"decided (95 % Wilson interval in brackets; {a.overturned:,} of {a.decided:,})"
            + (f"; {a.escalated:,} escalated" if a.escalated else ""))


def text_lines(c: Comparison, *, top: int = 10, width: int = 80) -> list[str]:
    """The comparison as plain lines of at most ``width`` columns (tokens shown as they are, after redaction).

    A long line continues on the next, indented four more than its start; tokens are never cut.
    """
    import textwrap

    out = []
    for line in _lines(c, top):
        indent = " " * (len(line) - len(line.lstrip(" ")) + 4)
        out += textwrap.wrap(line, width, subsequent_indent=indent, break_long_words=False,
                             break_on_hyphens=False) or [""]
    return out


def _whole(item: str) -> str:
    """An item that a wrapped line keeps on one line (no-break spaces inside it)."""
    return item.replace(" ", "\u00a0")


def _lines(c: Comparison, top: int) -> list[str]:
    from pathlib import Path

    from explain.model.fingerprint import short
    from explain.present.token_display import shown

    v, d = c.vocabulary, c.decisions
    out = [
        f"old: {Path(c.old_path).name} (SHA-256 {c.old_sha256[:12]}, fingerprint {short(c.old_fingerprint)}); "
        f"{v.old_size:,} tokens; classes {', '.join(c.old_classes)}",
        f"new: {Path(c.new_path).name} (SHA-256 {c.new_sha256[:12]}, fingerprint {short(c.new_fingerprint)}); "
        f"{v.new_size:,} tokens; classes {', '.join(c.new_classes)}",
    ]
    rows = settings_rows(c)
    if rows:
        differing = [name for name, _, _, differs in rows if differs]
        out += ["", "Settings (old -> new; * differs)"]
        out += [f"  {'*' if differs else ' '} {name}: {old}" + (f" -> {new}" if differs else "")
                for name, old, new, differs in rows]
        out.append("  differing: " + (", ".join(differing) if differing else "none"))
    out += [f"note: {n}" for n in c.notes]
    if c.appeals is not None:
        out += [f"appeals ({side}): {appeal_sentence(a)}" for side, a in zip(("old", "new"), c.appeals)]
    out += ["", "Vocabulary",
            f"  shared {v.shared:,}; added {len(v.added):,}; removed {len(v.removed):,}"]
    if v.added:
        out.append("  added: " + ", ".join(map(shown, v.added[:top])) + (" ..." if len(v.added) > top else ""))
    if v.removed:
        out.append("  removed: " + ", ".join(map(shown, v.removed[:top])) + (" ..." if len(v.removed) > top else ""))
    out.append("  priors (share of training messages, old -> new):")
    for p in v.priors:
        old = "absent" if p.old_share is None else f"{p.old_share:.3f}"
        new = "absent" if p.new_share is None else f"{p.new_share:.3f}"
        out.append(f"    {p.cls}: {old} -> {new}")
    for k in v.comparisons:
        basis = ("per occurrence, in a message of the token alone (the weight scales differ)"
                 if c.weights_compared == "per occurrence" else "per unit of feature value")
        out += ["", f"Evidence {basis}, {k.label} (log-odds against the normal class, old -> new)"]
        for title, items in (("gained", k.shifts_up), ("lost", k.shifts_down)):
            if items:
                out.append(f"  {title}: " + "; ".join(
                    _whole(f"{shown(s.token)} {s.old:+.2f} -> {s.new:+.2f}") for s in items[:top]))
        moved = [r for r in k.ranks if r.old_rank != r.new_rank][:top]
        if moved:
            out.append("  z-score rank, old -> new: " + "; ".join(
                _whole(f"{shown(r.token)} {r.old_rank} -> {r.new_rank}") for r in moved))
    if d is not None:
        out += ["", f"Decisions on {d.n:,} messages of {Path(d.source).name}: {d.changed:,} change"]
        for a, b, n in d.changes:
            out.append(f"  {a} -> {b}: {n:,}")
        if d.old_score is not None:
            rows = [("accuracy", d.old_score.accuracy, d.new_score.accuracy)]
            if d.old_score.flagging is not None:
                rows += [(name, getattr(d.old_score.flagging, key), getattr(d.new_score.flagging, key))
                         for name, key in (("recall", "recall"), ("false-alarm rate", "false_alarm_rate"))]
            out += ["", "  (95 % Wilson intervals)"]
            for name, before, after in rows:
                out += [f"  {name:<17} old {_pct(before)}", f"  {'':<17} new {_pct(after)}"]
            t = d.mcnemar
            out += [
                f"  McNemar's test (1947): old right, new wrong b = {t.b:,}; old wrong, new right c = {t.c:,}",
                f"    exact p = {_p(t.exact_p)}; chi-square {t.chi2:.3f}, p = {_p(t.chi2_p)}",
            ]
        for m in d.shown:
            label = f", labelled {m.label}" if m.label is not None else ""
            out += ["", f"  message {shown(m.message_id)}{label}: {m.old_decision} -> {m.new_decision}",
                    f"    old: {m.old.decision} at balance {closing_figure(m.old)}; largest: {_drivers(m.old)}",
                    f"    new: {m.new.decision} at balance {closing_figure(m.new)}; largest: {_drivers(m.new)}"]
        if d.changed > len(d.shown):
            out.append(f"  ({d.changed - len(d.shown):,} more changed messages not shown; see --show)")
    out += [""] + [f"caution: {x}" for x in CAUTIONS]
    return out


def render_html(c: Comparison, twin: dict, redaction: str, *, top: int = 10) -> str:
    """The comparison report as one self-contained HTML file."""
    from explain.present.ledger_html import ledger_context
    from explain.present.report_pages import environment

    pairs = []
    if c.decisions is not None:
        def view(ledger):
            # redaction happened in analysis.compare.redacted_comparison; the fragment says so
            return {**ledger_context(ledger, "personal" if ledger.redacted else "none", top=top), "model_file": None}

        pairs = [(m, view(m.old), view(m.new)) for m in c.decisions.shown]
    return environment().get_template("compare.html.j2").render(r=twin, pairs=pairs, redaction=redaction,
                                                                settings=settings_rows(c))
