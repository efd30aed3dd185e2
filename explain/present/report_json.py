"""The JSON twin of the printable report (schema ``nbledger.report/1``, documented in ``docs/report.md``).

Every figure the PDF prints is here, read from the same
:class:`~explain.analysis.report_contents.Report`; the HTML and PDF are rendered from
this very object, so the three cannot disagree. The same inputs and options
give byte-identical JSON when ``SOURCE_DATE_EPOCH`` fixes the date: keys keep
a fixed order, files are named without their folders, and non-finite numbers
become ``null``.
"""

from __future__ import annotations

import dataclasses

from explain.analysis.report_contents import Report
from explain.present import assessment as assessment_json
from explain.present import probe as probe_present
from explain.present import vocab as vocab_json
from explain.present.json_values import strict, text
from explain.present.ledger_json import to_json as why_json

SCHEMA = "nbledger.report/1"


def _without(d: dict, *keys: str) -> dict:
    return {k: v for k, v in d.items() if k not in keys}


def _file(messages) -> dict | None:
    if messages is None:
        return None
    return {"file": messages.source.name, "sha256": messages.sha256, "rows": len(messages)}


def appeals_json(appeals):
    from explain.analysis.appeals import appeals_json as as_json

    return as_json(appeals)


def to_json(report: Report) -> dict:
    """The documented JSON object of one report."""
    s = report.settings
    a = report.assessment
    data = _file(report.data)
    if data is not None and a is not None:
        data["rows_per_class"] = dict(zip(a.base_rates.classes, a.base_rates.counts.tolist()))
    return strict(
        {
            "schema": SCHEMA,
            "circulation": "internal",
            "title": s.title,
            "organisation": s.organisation,
            "date": report.date.isoformat(),
            "redaction": s.redact,
            "paper": s.paper,
            "threshold": s.threshold,
            "threshold_log_odds": s.threshold_log_odds,
            "base_rate": s.base_rate,
            "costs": None if s.costs is None else list(s.costs),
            "text_view": report.text_view,
            "versions": report.versions,
            "model": dataclasses.asdict(report.facts),
            "data": data,
            "explain_file": _file(report.explain_source),
            "sections": {name: reason for name, reason in missing_sections(report)},
            "summary": None if report.headline is None else dataclasses.asdict(report.headline),
            "assessment": None if a is None else assessment_json.to_json(a)["assessment"],
            "vocabulary": _without(vocab_json.to_json(report.vocab), "schema", "model", "data"),
            "explained_messages": {
                "source": report.explained_source,
                "total": report.explained_total,
                "shown": len(report.explained),
                "messages": [ledger_json(ledger) for ledger in report.explained],
            },
            # robustness and fairness (report --probe / --swap-terms): summaries only, no per-message attacks
            "robustness_and_fairness": None if report.probe is None else probe_present.to_json(report.probe, include_attacks=False),
            "appeals": appeals_json(report.appeals),
        }
    )


#: Entries listed per explained message; longer ledgers list their largest entries and fold the rest.
LEDGER_ROWS = 14


def ledger_json(ledger, top: int = LEDGER_ROWS) -> dict:
    """One explained message: ``nbledger why``'s own JSON of its ledger, with the (redacted) text beside it."""
    return {
        "id": ledger.message_id,
        "text": ledger.text or None,
        **_without(why_json(ledger, top=top), "schema", "model", "date", "message_id"),
    }


def missing_sections(report: Report) -> list[tuple[str, str]]:
    """``(section, the input that would add it)`` for each section left out."""
    missing = []
    if report.assessment is None:
        for name in ("performance", "errors"):
            missing.append((name, "labelled data (--data with --text-col and --label-col)"))
    if not report.explained:
        missing.append(("explained_messages", "messages to explain (--explain FILE) or labelled data to sample from (--data)"))
    return missing


def dumps(report: Report) -> str:
    """The JSON twin as text: two-space indents, UTF-8 characters kept, a final newline."""
    return twin_text(to_json(report))


def twin_text(twin: dict) -> str:
    """A JSON twin already built (:func:`to_json`) as text, as :func:`dumps` writes it."""
    return text(twin)
