"""The desk's pages: the queue, one message as its ledger (with a text to try and the review form), the
review log, the login; and the desk's own static files. Templates in ``templates/desk/``; the ledger is
the report's partial ``templates/partials/ledger.html.j2``, so screen and paper look alike."""

from __future__ import annotations

from pathlib import Path

import jinja2
from starlette.concurrency import run_in_threadpool
from starlette.responses import HTMLResponse, RedirectResponse, Response
from starlette.routing import Route

from explain.present.drawing import class_colours
from explain.present.report_pages import template_dir
from explain.present.tint import MARKS
from explain.runs.desk.guard import csrf_ok, csrf_token, requester

STATIC = {
    "desk.js": "application/javascript",
    "desk.css": "text/css",
}


def environment() -> jinja2.Environment:
    """Autoescaping on; controls and bidi characters of input shown as visible forms, never obeyed
    (the report's ``finalize`` hook), except the editable text, which must stay exactly the message."""
    from explain.present.token_display import html_visible
    from explain.present.wording import probability_of_log_odds

    env = jinja2.Environment(
        loader=jinja2.FileSystemLoader(str(template_dir())),
        autoescape=True,
        finalize=html_visible,
        undefined=jinja2.StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
    )
    # P(flag) from the flag log-odds, never rounded to certainty (the report's filter)
    env.filters["probability"] = probability_of_log_odds
    return env


def render(request, name: str, status: int = 200, **context) -> HTMLResponse:
    settings = request.app.state.settings
    user, _ = requester(request)
    page = request.app.state.templates.get_template(f"desk/{name}").render(
        user=user, csrf=csrf_token(request), model_name=Path(str(settings.loaded.path)).name,
        model_sha256=settings.model_sha256, fingerprint=settings.fingerprint, users=settings.users is not None,
        marks=MARKS, **context,
    )
    return HTMLResponse(page, status_code=status)


def exact(text: str):
    """``text`` escaped now and marked safe, so that the ``finalize`` hook leaves its characters as they are
    (for the text area, whose content the analyst edits and the desk explains)."""
    from markupsafe import Markup, escape

    return Markup(escape(text))


def has_controls(text: str) -> bool:
    """Whether ``text`` holds characters the pages show as visible forms (controls, bidi, invisible ones)."""
    from explain.present.token_display import safe_text

    return safe_text(text) != text


def _flag_query(value: str | None):
    return None if value in (None, "", "any") else value


def queue_selection(request):
    """``(queued items picked by the query's filters, message id -> outcome of its newest review)``."""
    from explain.runs.desk.service import Refused
    from explain.runs.desk.queue import ORDERS, select

    settings = request.app.state.settings
    outcomes = settings.store.current_outcomes()
    if settings.queue is None:
        return [], outcomes
    q = request.query_params
    reviewed = {"yes": True, "true": True, "no": False, "false": False}.get(q.get("reviewed", ""), None)
    order = q.get("order") or "margin"
    if order not in ORDERS:
        raise Refused(400, f"order must be one of {', '.join(ORDERS)}")
    picked = select(settings.queue, outcomes, decision=_flag_query(q.get("decision")), flag=_flag_query(q.get("flag")),
                    reviewed=reviewed, order=order)
    return picked, outcomes


#: Characters of a message shown in the queue.
EXCERPT = 140


def excerpts(settings, items) -> dict[str, str]:
    """Message id -> the start of its text, personal values masked first when the desk redacts
    (:func:`explain.analysis.redaction.masked_text`, the papers' one call for any screen)."""
    out = {}
    for item in items:
        text = item.text
        if settings.redact:
            from explain.analysis.redaction import masked_text

            text = masked_text(text)
        out[item.id] = text[:EXCERPT] + ("…" if len(text) > EXCERPT else "")
    return out


def class_index(settings) -> dict[str, int]:
    """Class -> its place in the palette stylesheet (``cls-N``)."""
    return {str(c): i for i, c in enumerate(settings.loaded.classes)}


async def queue_page(request):
    from explain.analysis.risk import FLAGS
    from explain.runs.desk.service import guarded

    @guarded(page=True)
    async def show(request):
        settings = request.app.state.settings
        picked, outcomes = await run_in_threadpool(queue_selection, request)
        q = request.query_params
        shown = picked[:500]
        return render(
            request, "queue.html.j2", items=shown, shown_of=len(picked), outcomes=outcomes,
            excerpts=await run_in_threadpool(excerpts, settings, shown),
            total=0 if settings.queue is None else len(settings.queue),
            classes=[str(c) for c in settings.loaded.classes], flags=FLAGS, cls=class_index(settings),
            chosen={k: q.get(k, "") for k in ("decision", "flag", "reviewed", "order")},
        )

    return await show(request)


def ledger_view(settings, ledger) -> dict:
    from explain.present.ledger_html import ledger_context

    return ledger_context(ledger, "personal" if settings.redact else "none")


async def message_page(request):
    from explain.runs.desk.service import guarded, queued

    @guarded(page=True)
    async def show(request):
        settings = request.app.state.settings
        item = queued(request, request.path_params["message_id"])
        ledger, _ = await run_in_threadpool(request.app.state.ledgers.get, settings, item)
        history = await run_in_threadpool(lambda: settings.store.select(message_id=item.id))
        return render(
            request, "message.html.j2", item=item, lv=ledger_view(settings, ledger), closing_exact=repr(ledger.closing),
            history=history, text=exact(ledger.text), cls=class_index(settings), controls=has_controls(ledger.text),
            classes=[str(c) for c in settings.loaded.classes], saved=request.query_params.get("saved"),
        )

    return await show(request)


async def try_text(request):
    """The ledger fragment of an edited text (the page's script sends it; CSRF header required)."""
    from explain.runs.desk.service import Refused, checked_text, guarded, json_body, ledger_for

    @guarded(page=True)
    async def show(request):
        settings = request.app.state.settings
        if not csrf_ok(request, request.headers.get("x-csrf-token")):
            raise Refused(403, "missing or stale CSRF token: reload the page")
        data = await json_body(request)
        text = checked_text(settings, data.get("text"))
        mid = data.get("message_id") if isinstance(data.get("message_id"), str) else None
        ledger = await run_in_threadpool(ledger_for, settings, text, mid)
        page = request.app.state.templates.get_template("desk/ledger_fragment.html.j2").render(
            lv=ledger_view(settings, ledger), closing_exact=repr(ledger.closing),
        )
        return HTMLResponse(page)

    return await show(request)


async def review_form(request):
    """A review from the message page's form (CSRF field required), then back to the message."""
    from explain.runs.desk.service import Refused, guarded, queued, review_fields, store_review

    @guarded(write=True, page=True)
    async def save(request):
        settings = request.app.state.settings
        form = await request.form()
        if not csrf_ok(request, form.get("csrf")):
            raise Refused(403, "missing or stale CSRF token: reload the page")
        item = queued(request, request.path_params["message_id"])
        fields = review_fields({k: form.get(k) for k in ("outcome", "reason", "note", "label", "supersedes", "review_key")}, settings)
        review, _ = await run_in_threadpool(store_review, request, item, request.state.user, fields)
        return RedirectResponse(f"{request.url.path.rsplit('/reviews', 1)[0]}?saved={review['id']}#history", status_code=303)

    return await save(request)


async def reviews_page(request):
    from explain.runs.desk.service import guarded, review_filters

    @guarded(page=True)
    async def show(request):
        settings = request.app.state.settings
        filters = review_filters(request)
        rows = await run_in_threadpool(lambda: settings.store.select(**filters))
        rows.reverse()  # newest first
        return render(request, "reviews.html.j2", rows=rows, filters=filters, cls=class_index(settings),
                      query=str(request.query_params))

    return await show(request)


async def login_page(request):
    settings = request.app.state.settings
    if request.method == "GET":
        return render(request, "login.html.j2", failed=False)
    form = await request.form()
    if not csrf_ok(request, form.get("csrf")) or settings.users is None:
        return render(request, "login.html.j2", status=403, failed=True)
    user = await run_in_threadpool(settings.users.check, str(form.get("token") or "").strip())
    if user is None:
        return render(request, "login.html.j2", status=401, failed=True)
    request.session.clear()
    request.session["user"] = {"id": user.id, "name": user.name, "role": user.role}
    return RedirectResponse("/", status_code=303)


async def logout(request):
    form = await request.form()
    if csrf_ok(request, form.get("csrf")):
        request.session.clear()
    return RedirectResponse("/login", status_code=303)


async def static_file(request):
    name = request.path_params["name"]
    if name == "ledger.css":
        return Response((template_dir() / "ledger.css").read_bytes(), media_type="text/css")
    if name == "palette.css":
        return Response(palette_css(request.app.state.settings), media_type="text/css")
    if name not in STATIC:
        return Response("not found", status_code=404, media_type="text/plain")
    return Response((template_dir() / "desk" / "static" / name).read_bytes(), media_type=STATIC[name])


def palette_css(settings) -> str:
    """Each class's chip in its colour family (the normal class in the neutral grey), from the one palette."""
    families = class_colours(settings.loaded.classes, settings.loaded.view.normal_class)
    lines = []
    for i, c in enumerate(settings.loaded.classes):
        family = families[c]
        lines.append(f".cls-{i} {{ background-color: {family.shade(0.95)}; color: #ffffff; }}")
        lines.append(f".cls-{i}-light {{ background-color: {family.shade(0.15)}; }}")
    return "\n".join(lines) + "\n"


def routes() -> list[Route]:
    return [
        Route("/", queue_page),
        Route("/messages/{message_id:path}/reviews", review_form, methods=["POST"]),
        Route("/messages/{message_id:path}", message_page),
        Route("/try", try_text, methods=["POST"]),
        Route("/reviews", reviews_page),
        Route("/login", login_page, methods=["GET", "POST"]),
        Route("/logout", logout, methods=["POST"]),
        Route("/static/{name}", static_file),
        Route("/favicon.ico", lambda request: Response(status_code=204)),  # the browser asks; the desk has none
    ]
