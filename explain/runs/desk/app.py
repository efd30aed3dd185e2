"""The desk's Starlette application, built by :func:`build_app` from one :class:`DeskSettings`; its JSON API.

State lives on the app (``app.state.settings``), never in module globals, so tests and ``nbledger
serve`` run the same object. Handlers are thin: a ledger is :func:`explain.analysis.ledger.ledger_of`
presented by :func:`explain.present.ledger_json.to_json` (the ``nbledger.why/3`` record) or by
:func:`explain.present.ledger_html.ledger_context` (the report's ledger partial); reviews go to
:class:`explain.runs.desk.store.Store`, committed before the 201 is sent.
"""

from __future__ import annotations

import csv
import io

from starlette.applications import Starlette
from starlette.concurrency import run_in_threadpool
from starlette.middleware import Middleware
from starlette.middleware.sessions import SessionMiddleware
from starlette.responses import JSONResponse, PlainTextResponse, Response
from starlette.routing import Route

from explain.errors import NbledgerError
from explain.runs.desk import pages
from explain.runs.desk.guard import SESSION_COOKIE, SecurityHeaders, content_policy, tint_styles
from explain.runs.desk.service import (
    QueuedLedgers, Refused, checked_text, guarded, json_body, ledger_for, problem, queued, record_of,
    review_fields, review_filters, store_review,
)
from explain.runs.desk.settings import DeskSettings
from explain.runs.desk.store import COLUMNS

#: Hours a login lasts.
SESSION_HOURS = 12


# --- JSON API -----------------------------------------------------------------------------------------


async def healthz(request):
    settings = request.app.state.settings
    return JSONResponse({
        "status": "ok",
        "model": {"sha256": settings.model_sha256, "fingerprint": settings.fingerprint},
        "queued": 0 if settings.queue is None else len(settings.queue),
    })


@guarded()
async def api_queue(request):
    settings = request.app.state.settings
    picked, outcomes = await run_in_threadpool(pages.queue_selection, request)
    return JSONResponse({
        "source": None if settings.queue is None else settings.queue.source,
        "messages": [item.as_json(outcomes.get(item.id)) for item in picked],
    })


@guarded()
async def api_message_ledger(request):
    item = queued(request, request.path_params["message_id"])
    _, record = await run_in_threadpool(request.app.state.ledgers.get, request.app.state.settings, item)
    return JSONResponse(record)


@guarded()
async def api_ledger(request):
    data = await json_body(request)
    text = checked_text(request.app.state.settings, data.get("text"))
    message_id = data.get("message_id") if isinstance(data.get("message_id"), str) else None
    ledger = await run_in_threadpool(ledger_for, request.app.state.settings, text, message_id)
    return JSONResponse(record_of(ledger))


@guarded(write=True)
async def api_add_review(request):
    settings = request.app.state.settings
    item = queued(request, request.path_params["message_id"])
    fields = review_fields(await json_body(request), settings)
    if "review_key" not in fields and request.headers.get("idempotency-key"):
        fields = review_fields({**fields, "review_key": request.headers["idempotency-key"]}, settings)
    review, new = await run_in_threadpool(store_review, request, item, request.state.user, fields)
    return JSONResponse(review, status_code=201 if new else 200)


def reviews_csv(rows: list[dict]) -> str:
    buffer = io.StringIO()
    writer = csv.DictWriter(buffer, fieldnames=list(COLUMNS), extrasaction="ignore", lineterminator="\n")
    writer.writeheader()
    for row in rows:
        writer.writerow({k: "" if v is None else v for k, v in row.items()})
    return buffer.getvalue()


@guarded()
async def api_reviews(request):
    store = request.app.state.settings.store
    with_ledger = request.query_params.get("ledger") in ("1", "true", "yes")
    rows = await run_in_threadpool(lambda: store.select(**review_filters(request), ledger=with_ledger))
    if request.query_params.get("format") == "csv":
        return Response(reviews_csv(rows), media_type="text/csv; charset=utf-8",
                        headers={"Content-Disposition": 'attachment; filename="reviews.csv"'})
    return JSONResponse({"reviews": rows})


async def refused(request, exc: Refused):
    return problem(exc.status, str(exc))


async def user_error(request, exc: NbledgerError):
    return problem(400, str(exc))


async def not_found(request, exc):
    if request.url.path.startswith("/api/"):
        return problem(404, "no such resource")
    return PlainTextResponse("not found", status_code=404)


def build_app(settings: DeskSettings) -> Starlette:
    """The desk for ``settings``: routes, security headers, sessions; the settings on ``app.state``."""
    routes = [
        Route("/healthz", healthz),
        Route("/api/queue", api_queue),
        Route("/api/messages/{message_id:path}/ledger", api_message_ledger),
        Route("/api/messages/{message_id:path}/reviews", api_add_review, methods=["POST"]),
        Route("/api/ledger", api_ledger, methods=["POST"]),
        Route("/api/reviews", api_reviews),
        *pages.routes(),
    ]
    middleware = [
        Middleware(SecurityHeaders, policy=content_policy(tint_styles(settings.loaded.classes, settings.loaded.view.normal_class))),
        Middleware(SessionMiddleware, secret_key=settings.session_secret, session_cookie=SESSION_COOKIE,
                   max_age=SESSION_HOURS * 3600, same_site="strict", https_only=False),
    ]
    app = Starlette(
        routes=routes, middleware=middleware,
        exception_handlers={Refused: refused, NbledgerError: user_error, 404: not_found},
    )
    app.state.settings = settings
    app.state.ledgers = QueuedLedgers()
    app.state.templates = pages.environment()
    return app
