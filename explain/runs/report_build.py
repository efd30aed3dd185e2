"""The report build: from a loaded model and its inputs to the PDF, the HTML twin and the JSON twin.

:func:`build_report_files` computes the :class:`~explain.analysis.report_contents.Report`
once, turns it into its JSON twin once, draws the pictures once, and renders
the HTML and the PDF from those (:mod:`explain.present.report_pages`,
:mod:`explain.present.report_json`): the three files cannot disagree.
``nbledger report`` reads the inputs and writes the files.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

from explain.analysis.report_contents import Report, ReportSettings, build_report
from explain.present.report_pages import draw_pictures, render_html, render_pdf
from explain.present.report_json import to_json, twin_text


@dataclass(frozen=True)
class ReportFiles:
    """The three files of one report: ``pdf`` (bytes), ``html`` and ``json`` (text)."""

    report: Report
    pdf: bytes
    html: str
    json: str


def build_report_files(
    loaded, *, settings: ReportSettings, data=None, explain=None, watchlist=None,
    slices=(), label_errors=None, probe_evasion: bool = False, swap_terms=None, reviews=None,
    on_step: Callable[[str], None] = lambda name: None, features=None, text_view: str | None = None,
) -> ReportFiles:
    """Compute the report of ``loaded`` (a :class:`~explain.model.loading.LoadedModel`) and render its files.

    The keywords are those of :func:`explain.analysis.report_contents.build_report`;
    ``on_step`` hears the name of each step as it starts.
    """
    result = build_report(loaded, settings=settings, data=data, explain=explain, watchlist=watchlist,
                          on_step=on_step, slices=list(slices), label_errors=label_errors,
                          probe_evasion=probe_evasion, swap_terms=swap_terms, reviews=reviews, features=features,
                          text_view=text_view)
    on_step("drawing the pictures")
    twin = to_json(result)
    pictures = draw_pictures(result)
    on_step("rendering the PDF")
    page = render_html(result, twin, pictures)
    pdf = render_pdf(page, result.date.isoformat())
    return ReportFiles(result, pdf, page, twin_text(twin))
