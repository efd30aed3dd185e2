"""The e-mail lines of an explanation: what was read from a raw message.

Presenters of one message (the ``why`` screen, the report) call these two functions
with ``explanation.mail`` (:class:`~explain.analysis.mail_facts.MailFacts`); nothing is
computed here.
"""

from __future__ import annotations


def _size(n: int | None) -> str:
    if n is None:
        return "size not measured"
    return f"{n:,} bytes" if n < 10_000 else f"{n / 1024:,.0f} KiB"


def email_header_lines(facts) -> list[str]:
    """Plain-text lines: sender, subject, the view read, attachments, fallbacks, limits."""
    lines = [
        f"from:     {facts.sender or '(none)'}",
        f"subject:  {facts.subject or '(none)'}",
        f"read:     the {facts.view} view of the e-mail (the view the model is scored on)",
    ]
    for a in facts.attachments:
        lines.append(f"attached: {a.name or '(no name)'} ({a.content_type}, {_size(a.size)}; not read)")
    for u in facts.undecodable:
        charset = f" [{u.charset}]" if u.charset else ""
        lines.append(f"fallback: {u.where}{charset}: {u.fallback}")
    lines.extend(f"limit:    {problem}" for problem in facts.problems)
    return lines


def email_json(facts) -> dict | None:
    """The ``email`` object of a JSON explanation, or None for a plain-text message."""
    if facts is None:
        return None
    return {
        "text_view": facts.view,
        "subject": facts.subject,
        "sender": facts.sender,
        "attachments": [{"name": a.name, "content_type": a.content_type, "size_bytes": a.size} for a in facts.attachments],
        "undecodable_parts": [{"where": u.where, "charset": u.charset, "fallback": u.fallback} for u in facts.undecodable],
        "problems": list(facts.problems),
    }
