"""The desk's Starlette application, built by :func:`build_app` from one :class:`DeskSettings`.

State lives on the app (``app.state.settings``), never in module globals, so tests and ``nbledger
serve`` run the same object. Handlers are thin: a ledger is :func:`explain.analysis.ledger.ledger_of`
presented by :func:`explain.present.ledger_json.to_json` (the ``nbledger.why/2`` record) or by
:func:`explain.present.ledger_html.ledger_context` (the report's ledger partial); reviews go to
:class:`explain.runs.desk.store.Store`, committed before the 201 is sent.
"""

from __future__ import annotations

import csv
import functools
import io
import json
import threading
from collections import OrderedDict

import jinja2
from starlette.applications import Starlette
from starlette.concurrency import run_in_threadpool
from starlette.middleware import Middleware
from starlette.middleware.sessions import SessionMiddleware
from starlette.responses import HTMLResponse, JSONResponse, PlainTextResponse, RedirectResponse, Response
from starlette.routing import Route

from explain.errors import NbledgerError
from explain.runs.desk import pages
from explain.runs.desk.guard import (
    SESSION_COOKIE, SecurityHeaders, content_policy, csrf_ok, requester, tint_styles,
)
from explain.runs.desk.settings import DeskSettings, record_time
from explain.runs.desk.store import COLUMNS, OUTCOMES

#: Hours a login lasts.
SESSION_HOURS = 12


def problem(status: int, message: str, **headers) -> JSONResponse:
    return JSONResponse({"error": message}, status_code=status, headers=headers or None)


def guarded(*, write: bool = False, page: bool = False):
    """The handler needs a user (401, or the login page for pages) who may write when ``write`` (403);
    a write riding on the session cookie needs the CSRF token (403)."""

    def wrap(handler):
        @functools.wraps(handler)
        async def inner(request):
            user, by_cookie = requester(request)
            if user is None:
                if page:
                    return RedirectResponse("/login", status_code=303)
                return problem(401, "sign in: send Authorization: Bearer TOKEN", **{"WWW-Authenticate": "Bearer"})
            if write and not user.may_write:
                return problem(403, f"{user.name} is an {user.role}: auditors read, reviewers write")
            if write and by_cookie and not page:
                if not csrf_ok(request, request.headers.get("x-csrf-token")):
                    return problem(403, "missing or stale CSRF token: reload the page")
            request.state.user = user
            return await handler(request)

        return inner

    return wrap


async def json_body(request) -> dict:
    """The request's JSON object; NbledgerError for anything else (sent as 400/413/415)."""
    if request.headers.get("content-type", "").split(";")[0].strip() != "application/json":
        raise _Refused(415, "send the body as application/json")
    body = await request.body()
    if len(body) > request.app.state.settings.max_text_bytes + 65536:
        raise _Refused(413, "the request is larger than the desk accepts")
    try:
        data = json.loads(body)
    except (UnicodeDecodeError, json.JSONDecodeError):
        raise _Refused(400, "the body is not JSON") from None
    if not isinstance(data, dict):
        raise _Refused(400, "the body must be a JSON object")
    return data


class _Refused(Exception):
    def __init__(self, status: int, message: str):
        super().__init__(message)
        self.status = status


def checked_text(settings: DeskSettings, text) -> str:
    if not isinstance(text, str):
        raise _Refused(400, "text must be a string")
    if len(text.encode("utf-8", "surrogatepass")) > settings.max_text_bytes:
        raise _Refused(413, f"the text is larger than {settings.max_text_bytes:,} bytes")
    return text


def ledger_for(settings: DeskSettings, text: str, message_id: str | None = None):
    """The ledger of ``text`` under the desk's model and rule (redacted when the desk redacts)."""
    from explain.analysis.ledger import ledger_of, redacted

    ledger = ledger_of(
        settings.loaded, text, settings.threshold, threshold_log_odds=settings.threshold_log_odds,
        message_id=message_id,
    )
    return redacted(ledger) if settings.redact else ledger


def record_of(ledger) -> dict:
    from explain.present.ledger_json import to_json

    return to_json(ledger, date=record_time())


class QueuedLedgers:
    """The ledgers of queued messages, each explained once and kept (least recently used out first).

    A queued text and the model do not change while the desk runs, so its ledger and record are
    the same each time; only the record's ``date`` is set when it is served.
    """

    def __init__(self, size: int = 256):
        self.size = size
        self._kept: OrderedDict = OrderedDict()
        self._lock = threading.Lock()

    def get(self, settings: DeskSettings, item) -> tuple[object, dict]:
        """``(ledger, record)`` of a queued item, the record dated now."""
        with self._lock:
            found = self._kept.get(item.id)
            if found is not None:
                self._kept.move_to_end(item.id)
        if found is None:
            ledger = ledger_for(settings, item.text, item.id)
            found = (ledger, record_of(ledger))
            with self._lock:
                self._kept[item.id] = found
                while len(self._kept) > self.size:
                    self._kept.popitem(last=False)
        return found[0], {**found[1], "date": record_time()}


def queued(request, message_id: str):
    queue = request.app.state.settings.queue
    item = None if queue is None else queue.get(message_id)
    if item is None:
        raise _Refused(404, f"no queued message with id {message_id!r}")
    return item


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


def review_fields(data: dict, settings: DeskSettings) -> dict:
    """The reviewer's part of a review, checked (400 for anything else)."""
    outcome = data.get("outcome")
    if outcome not in OUTCOMES:
        raise _Refused(400, f"outcome must be one of {', '.join(OUTCOMES)}")
    fields = {"outcome": outcome}
    for name in ("reason", "note"):
        value = data.get(name) or ""
        if not isinstance(value, str) or len(value) > 10_000:
            raise _Refused(400, f"{name} must be text of at most 10,000 characters")
        fields[name] = value
    label = data.get("label") or None
    if label is not None and label not in [str(c) for c in settings.loaded.classes]:
        raise _Refused(400, f"label must be one of the model's classes, got {label!r}")
    fields["label"] = label
    supersedes = data.get("supersedes")
    if supersedes not in (None, "") and not (isinstance(supersedes, int) or str(supersedes).isdigit()):
        raise _Refused(400, "supersedes must be the id of an earlier review")
    fields["supersedes"] = None if supersedes in (None, "") else int(supersedes)
    key = data.get("review_key")
    if key is not None and (not isinstance(key, str) or not 8 <= len(key) <= 64):
        raise _Refused(400, "review_key must be 8 to 64 characters")
    if key:
        fields["review_key"] = key
    return fields


def store_review(request, item, user, fields: dict) -> tuple[dict, bool]:
    """Store the review with the queued message's ledger and everything else it was based on (committed)."""
    from explain.present.ledger_words import rule_line

    settings = request.app.state.settings
    ledger, record = request.app.state.ledgers.get(settings, item)
    row = {
        **fields,
        "message_id": item.id,
        "reviewer": user.name,
        "role": user.role,
        "decision": item.decision,
        "flagged": item.flagged,
        "model_sha256": settings.model_sha256,
        "model_fingerprint": settings.fingerprint,
        "rule": rule_line(ledger),
        "text": ledger.text,
        "ledger": json.dumps(record, ensure_ascii=False, allow_nan=False),
    }
    return settings.store.add(row)


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


def review_filters(request) -> dict:
    q = request.query_params
    outcome = q.get("outcome") or None
    if outcome is not None and outcome not in OUTCOMES:
        raise _Refused(400, f"outcome must be one of {', '.join(OUTCOMES)}")
    return {
        "message_id": q.get("message_id") or None,
        "reviewer": q.get("reviewer") or None,
        "outcome": outcome,
        "current_only": q.get("current") in ("1", "true", "yes"),
    }


@guarded()
async def api_reviews(request):
    store = request.app.state.settings.store
    with_ledger = request.query_params.get("ledger") in ("1", "true", "yes")
    rows = await run_in_threadpool(lambda: store.select(**review_filters(request), ledger=with_ledger))
    if request.query_params.get("format") == "csv":
        return Response(reviews_csv(rows), media_type="text/csv; charset=utf-8",
                        headers={"Content-Disposition": 'attachment; filename="reviews.csv"'})
    return JSONResponse({"reviews": rows})


async def refused(request, exc: _Refused):
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
        exception_handlers={_Refused: refused, NbledgerError: user_error, 404: not_found},
    )
    app.state.settings = settings
    app.state.ledgers = QueuedLedgers()
    app.state.templates = pages.environment()
    return app
