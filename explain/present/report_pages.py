"""The printable report: HTML from the Jinja2 templates, PDF through WeasyPrint.

Nothing here computes a figure. The template reads the JSON twin
(:mod:`explain.present.report_json`) and the pictures drawn from the same
:class:`~explain.analysis.report_contents.Report`, so the PDF, the HTML and the JSON
show the same numbers. The look is the stylesheet ``templates/report.css``
(CSS Paged Media as WeasyPrint implements it: ``@page`` margin boxes,
``target-counter()`` for the contents, ``bookmark-level``); the templates
hold structure only.

The templates live in the top-level ``templates/`` folder of the project;
the wheel maps that folder into the package as ``explain/templates``
(``pyproject.toml``), so an installed copy reads its own.

Safe rendering: autoescaping is on for every template, so message texts,
labels and file names holding HTML, CSS or script appear literally; the
HTML carries a Content-Security-Policy that allows only inline styles and
``data:`` images; and WeasyPrint fetches through :class:`SafeFetcher`, which
allows ``data:`` URIs and files of the package's own templates folder only.
"""

from __future__ import annotations

import base64
import logging
from pathlib import Path
from urllib.parse import unquote, urlsplit

from explain.analysis.report_contents import Report
from explain.analysis.risk import FLAG_LABELS
from explain.present import assessment as assessment_screen
from explain.present import numbers, wording
from explain.present.drawing import class_colours
from explain.present.report_json import LEDGER_ROWS, to_json
from explain.present.token_display import html_visible



def template_dir() -> Path:
    """The templates folder: inside the installed package, or the checkout's top-level ``templates/``."""
    here = Path(__file__).resolve().parent.parent
    installed = here / "templates"
    return installed if (installed / "report.html.j2").is_file() else here.parent / "templates"


def environment():
    """The Jinja2 environment of the report: autoescaping everywhere, undefined names are errors."""
    import jinja2

    env = jinja2.Environment(
        loader=jinja2.FileSystemLoader(str(template_dir())),
        autoescape=True,
        finalize=html_visible,  # controls and bidi characters from input shown, never obeyed (then escaped)
        undefined=jinja2.StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
        keep_trailing_newline=True,
    )
    env.filters.update(pct=_pct, num=_num, count=_count, rate=_rate, share=_share, probability=wording.probability_of_log_odds,
                       exact=_exact, prob=_prob, pvalue=_pvalue, threshold=numbers.threshold,
                       per10k=lambda v, lo, hi: numbers.per_10000_text(v, lo, hi, NBSP), per10k_value=_per10k_value,
                       per10k_range=_per10k_range, rate_per10k=_rate_per10k, miss_per10k=_miss_per10k, flag_label=lambda name: FLAG_LABELS.get(name, name))
    return env


# --- number formats (formatting only: every value comes from the JSON twin) -------


def _prob(p) -> str:
    """A probability as ``assess`` prints it: never rounded to certainty (``1 - 2.7e-15``)."""
    return "–" if p is None else assessment_screen.prob(p)


def _exact(x) -> str:
    """A threshold log-odds with every digit, as typed back to ``--threshold-log-odds`` (as ``assess`` prints it)."""
    return numbers.exact(x)


#: a no-break space: a figure, its unit and its interval never part across lines (the glossary's rule)
NBSP = numbers.NBSP


def _pct(x, digits: int | None = None) -> str:
    return numbers.percent(x, digits, space=NBSP)


def _num(x, digits: int = 3) -> str:
    return numbers.decimal(x, digits)


def _per10k_value(v, low, high) -> str:
    """A count per 10,000 alone, rounded to the step its interval supports (:mod:`explain.present.numbers`)."""
    return "–" if v is None else numbers.per_10000(v, low, high)[0]


def _per10k_range(v, low, high) -> str:
    """The interval of a count per 10,000, ``170 to 340``, rounded as its value is."""
    _, lo, hi = numbers.per_10000(v, low, high)
    return f"{lo}{NBSP}to{NBSP}{hi}"


def _rate_per10k(r: dict) -> str:
    """A rate (normal-class messages flagged ...) as a count per 10,000 of its own population."""
    if r is None or not r["denominator"]:
        return "–"
    return _per10k_value(10_000 * r["value"], 10_000 * r["low"], 10_000 * r["high"])


def _miss_per10k(recall: dict) -> str:
    """Missed per 10,000 flagged-class messages, from the recall (its interval mirrored)."""
    if recall is None or not recall["denominator"]:
        return "–"
    return _per10k_value(10_000 * (1 - recall["value"]), 10_000 * (1 - recall["high"]), 10_000 * (1 - recall["low"]))


def _pvalue(x) -> str:
    """A p-value as every screen shows it (:func:`explain.present.numbers.p_value`)."""
    return numbers.p_value(x)


def _count(x) -> str:
    return numbers.MISSING if x is None else f"{x:,.0f}"


def _share(value, low, high, digits: int | None = None) -> str:
    """A share with its interval, in the glossary's one style (as :func:`_rate` prints a rate)."""
    if value is None:
        return numbers.MISSING
    return numbers.interval(value, low, high, 1, digits, space=NBSP)


def _rate(r: dict, digits: int | None = None) -> str:
    """A rate (the JSON twin's ``{value, low, high, denominator}``): the estimate, then its interval."""
    return numbers.rate(r, digits, space=NBSP)


# --- pictures ------------------------------------------------------------------------


def draw_pictures(report: Report) -> dict[str, bytes]:
    """Name -> PNG of every picture the report embeds (assessment, then vocabulary)."""
    from explain.present import assess_pictures, vocab_pictures

    pictures = {}
    if report.assessment is not None:
        pictures.update(assess_pictures.draw_all(report.assessment))
    for i, _ in enumerate(report.vocab.comparisons):
        pictures[f"bars_{i}.png"] = vocab_pictures.bar_chart(report.vocab, i)
        pictures[f"cloud_{i}.png"] = vocab_pictures.word_cloud(report.vocab, i, "for")
    if report.probe is not None:  # robustness and fairness section
        from explain.present import probe_pictures

        pictures.update({f"probe_{name}": png for name, png in probe_pictures.draw_all(report.probe).items()})
    return pictures


def data_uri(png: bytes) -> str:
    return "data:image/png;base64," + base64.b64encode(png).decode("ascii")


# --- assembling ----------------------------------------------------------------------


def context(report: Report, twin: dict, pictures: dict[str, bytes]) -> dict:
    """What the template reads: the JSON twin, each explained message's ledger view, pictures as data: URIs, colours."""
    from explain.present.ledger_html import ledger_context

    families = class_colours(report.vocab.classes, report.vocab.normal_class)
    redaction = report.settings.redact
    views = [
        # the cover carries the model's fingerprint once for the whole report
        {**ledger_context(ledger, redaction, top=LEDGER_ROWS), "model_file": None}
        for ledger in report.explained
    ]
    return {
        "r": twin,
        "ledgers": views,
        "pictures": {name: data_uri(png) for name, png in pictures.items()},
        "colours": {name: family.base for name, family in families.items()},
        "missing": dict(twin["sections"]),
    }


def render_html(report: Report, twin: dict | None = None, pictures: dict[str, bytes] | None = None) -> str:
    """The report as one self-contained HTML file (figures embedded as data: URIs)."""
    twin = to_json(report) if twin is None else twin
    pictures = draw_pictures(report) if pictures is None else pictures
    return environment().get_template("report.html.j2").render(**context(report, twin, pictures))


def sheet_html(ledgers, *, date: str, top: int = 10, paper: str = "a4", pages: list[int] | None = None) -> str:
    """The one-page sheet of each decision (:class:`~explain.analysis.ledger.Ledger`), a page each, as HTML.

    Everything on it comes from the ledger, through the ledger fragment
    (``templates/partials/ledger.html.j2``): the model's fingerprint, the
    message id, the rule, the tinted text, the entries (the ``top`` largest
    when there are more), the flip set, and the caution. ``pages[i]``, when
    given, is how many pages decision ``i`` takes: a sheet that cannot fit
    one page says so under its title.
    """
    from explain import __version__
    from explain.present.ledger_html import ledger_context

    views = [ledger_context(ledger, "personal" if ledger.redacted else "none", top=top, date=date) for ledger in ledgers]
    return environment().get_template("sheet.html.j2").render(ledgers=views, date=date, paper=paper,
                                                              version=__version__, pages=pages or [1] * len(views))


def sheet_pdf(ledgers, *, date: str, top: int = 10, paper: str = "a4") -> bytes:
    """:func:`sheet_html` printed to PDF; a decision that runs past one page says how many pages it takes."""
    document = render_document(sheet_html(ledgers, date=date, top=top, paper=paper), date)
    if len(document.pages) > len(ledgers):  # some sheet ran over: count each one's pages, and say so on it
        pages = [_sheet_pages(ledger, date=date, top=top, paper=paper) for ledger in ledgers]
        document = render_document(sheet_html(ledgers, date=date, top=top, paper=paper, pages=pages), date)
    return document.write_pdf()


def _sheet_pages(ledger, *, date: str, top: int, paper: str) -> int:
    """How many pages one decision's sheet takes with the line that says so, which can itself add a page."""
    pages = 1
    for _ in range(4):  # 1 -> n without the line -> n or n + 1 with it -> settled
        counted = len(render_document(sheet_html([ledger], date=date, top=top, paper=paper, pages=[pages]), date).pages)
        if counted == pages:
            break
        pages = counted
    return pages


# --- PDF -----------------------------------------------------------------------------


def _safe_fetcher_class():
    from weasyprint.urls import URLFetcher

    class SafeFetcher(URLFetcher):
        """Fetch ``data:`` URIs and the package's own template files; refuse everything else.

        Remote URLs and ``file:`` references to anything outside the templates
        folder are never opened, whatever a message, label or file name holds.
        """

        def __init__(self):
            super().__init__(allowed_protocols=("data", "file"), allow_redirects=False, timeout=1)
            self.refused: list[str] = []
            self.root = template_dir().resolve()

        def fetch(self, url, headers=None):
            scheme = url.split(":", 1)[0].lower()
            if scheme == "file":
                path = Path(unquote(urlsplit(url).path)).resolve()
                if not path.is_relative_to(self.root):
                    self.refused.append(url)
                    raise ValueError(f"refused: {url}")
            elif scheme != "data":
                self.refused.append(url)
                raise ValueError(f"refused: {url}")
            return super().fetch(url, headers)

    return SafeFetcher


def render_pdf(html_text: str, date: str) -> bytes:
    """The PDF of an HTML page; its creation and modification dates are ``date`` (ISO 8601, see ``report_date``)."""
    return render_document(html_text, date).write_pdf()


def render_document(html_text: str, date: str):
    """The laid-out WeasyPrint document of an HTML page (its ``pages``), dated ``date``."""
    import weasyprint

    fetcher = _safe_fetcher_class()()
    # WeasyPrint warns about every refused reference; they are refused on purpose.
    logging.getLogger("weasyprint").setLevel(logging.ERROR)
    document = weasyprint.HTML(
        string=html_text, base_url=template_dir().as_uri() + "/", url_fetcher=fetcher
    ).render()
    document.metadata.created = date
    document.metadata.modified = date
    return document


