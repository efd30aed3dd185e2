"""What the desk's handlers share: who may do what, reading requests, ledgers of queued and posted texts,
the checks on a review and its storing. Used by the JSON API (``app.py``) and the pages (``pages.py``)."""

from __future__ import annotations

import functools
import json
import threading
from collections import OrderedDict

from starlette.responses import JSONResponse, RedirectResponse

from explain.runs.desk.guard import csrf_ok, requester
from explain.runs.desk.settings import DeskSettings, record_time
from explain.runs.desk.store import OUTCOMES

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
        raise Refused(415, "send the body as application/json")
    body = await request.body()
    if len(body) > request.app.state.settings.max_text_bytes + 65536:
        raise Refused(413, "the request is larger than the desk accepts")
    try:
        data = json.loads(body)
    except (UnicodeDecodeError, json.JSONDecodeError):
        raise Refused(400, "the body is not JSON") from None
    if not isinstance(data, dict):
        raise Refused(400, "the body must be a JSON object")
    return data


class Refused(Exception):
    def __init__(self, status: int, message: str):
        super().__init__(message)
        self.status = status


def checked_text(settings: DeskSettings, text) -> str:
    if not isinstance(text, str):
        raise Refused(400, "text must be a string")
    if len(text.encode("utf-8", "surrogatepass")) > settings.max_text_bytes:
        raise Refused(413, f"the text is larger than {settings.max_text_bytes:,} bytes")
    return text


def ledger_for(settings: DeskSettings, text: str, message_id: str | None = None):
    """The ledger of ``text`` under the desk's model and rule (redacted when the desk redacts)."""
    from explain.analysis.ledger import ledger_of, redacted
    from explain.model.email_reader import resolve_text_view

    ledger = ledger_of(
        settings.loaded, text, settings.threshold, threshold_log_odds=settings.threshold_log_odds,
        message_id=message_id, text_view=resolve_text_view(settings.loaded.card),  # the card's view, else raw
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
        raise Refused(404, f"no queued message with id {message_id!r}")
    return item


def review_fields(data: dict, settings: DeskSettings) -> dict:
    """The reviewer's part of a review, checked (400 for anything else)."""
    outcome = data.get("outcome")
    if outcome not in OUTCOMES:
        raise Refused(400, f"outcome must be one of {', '.join(OUTCOMES)}")
    fields = {"outcome": outcome}
    for name in ("reason", "note"):
        value = data.get(name) or ""
        if not isinstance(value, str) or len(value) > 10_000:
            raise Refused(400, f"{name} must be text of at most 10,000 characters")
        fields[name] = value
    label = data.get("label") or None
    if label is not None and label not in [str(c) for c in settings.loaded.classes]:
        raise Refused(400, f"label must be one of the model's classes, got {label!r}")
    fields["label"] = label
    supersedes = data.get("supersedes")
    if supersedes not in (None, "") and not (isinstance(supersedes, int) or str(supersedes).isdigit()):
        raise Refused(400, "supersedes must be the id of an earlier review")
    fields["supersedes"] = None if supersedes in (None, "") else int(supersedes)
    key = data.get("review_key")
    if key is not None and (not isinstance(key, str) or not 8 <= len(key) <= 64):
        raise Refused(400, "review_key must be 8 to 64 characters")
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


def review_filters(request) -> dict:
    q = request.query_params
    outcome = q.get("outcome") or None
    if outcome is not None and outcome not in OUTCOMES:
        raise Refused(400, f"outcome must be one of {', '.join(OUTCOMES)}")
    return {
        "message_id": q.get("message_id") or None,
        "reviewer": q.get("reviewer") or None,
        "outcome": outcome,
        "current_only": q.get("current") in ("1", "true", "yes"),
    }
