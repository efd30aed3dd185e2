"""The member's letter (:class:`~explain.analysis.member_letter.MemberLetter`) as plain text, HTML and PDF.

Wording only: every fact comes from the letter object. The letter carries no
"Internal" mark (it is written for the member), no figure about the model and
no advice on changing the message.
"""

from __future__ import annotations

import datetime as _dt

from explain.analysis.member_letter import MemberLetter


def long_date(iso: str) -> str:
    """``2026-12-03T16:15:03Z`` as ``3 December 2026``."""
    day = _dt.date.fromisoformat(iso[:10])
    return f"{day.day} {day.strftime('%B')} {day.year}"


def _quoted(words) -> str:
    quoted = [f"\u201c{w}\u201d" for w in words]
    return quoted[0] if len(quoted) == 1 else ", ".join(quoted[:-1]) + " and " + quoted[-1]


def paragraphs(letter: MemberLetter) -> list[tuple[str | None, str]]:
    """``(heading or None, paragraph)`` in reading order: the one wording behind the text, HTML and PDF."""
    org = letter.settings.organisation
    when = long_date(letter.date)
    about = f"On {when}, the message filter of {org} held your message instead of delivering it. " \
            f"It sorted the message as \u201c{letter.decision}\u201d rather than \u201c{letter.normal_class}\u201d."
    if letter.reasons:
        why = (f"The words in your message that counted most toward this decision were {_quoted(letter.reasons)}. "
               "These words are common in the messages the filter learned to hold; finding them does not mean "
               "that anyone has judged you or what you wrote.")
    else:
        why = "No single word stood out: the decision rests on many words of the message taken together."
    quote = f" Please quote the reference {letter.reference} when you write." if letter.reference else ""
    return [
        (None, "Dear member,"),
        ("What happened", about),
        ("Why", "The filter is a statistical model: it learned from earlier messages which words are common in "
                "each kind of message, and it weighs the words of each new message against them. " + why),
        ("Who decided", f"The statistical model made this decision by itself; no person at {org} has judged your "
                        f"message. People at {org} review any decision when asked, and can reverse it."),
        ("If you think this is wrong", f"You can ask for a person to review the decision: {letter.settings.appeal}. "
                                       f"For questions: {letter.settings.contact}.{quote}"),
        (None, f"With best wishes,\n{org}"),
    ]


def text_letter(letter: MemberLetter) -> str:
    """The letter as plain text, wrapped at 72 columns."""
    import textwrap

    lines = [letter.settings.organisation, long_date(letter.date), ""]
    if letter.reference:
        lines += [f"About your message (reference {letter.reference})", ""]
    for heading, text in paragraphs(letter):
        if heading:
            lines.append(heading)
        for part in text.split("\n"):
            lines += textwrap.wrap(part, 72) or [""]
        lines.append("")
    return "\n".join(lines)


def html_letter(letter: MemberLetter, paper: str = "a4") -> str:
    """The letter as one self-contained HTML page (``templates/letter.html.j2``)."""
    from explain import __version__
    from explain.present.report_pages import environment

    return environment().get_template("letter.html.j2").render(
        letter=letter, date=long_date(letter.date), paragraphs=paragraphs(letter), paper=paper, version=__version__,
        created=letter.date,
    )


def pdf_letter(letter: MemberLetter, paper: str = "a4") -> bytes:
    """:func:`html_letter` printed to PDF."""
    from explain.present.report_pages import render_pdf

    return render_pdf(html_letter(letter, paper), letter.date)


#: The letter's writers by output suffix.
LETTER_WRITERS = {
    ".txt": lambda letter: text_letter(letter),
    ".html": html_letter,
    ".htm": html_letter,
    ".pdf": pdf_letter,
}
