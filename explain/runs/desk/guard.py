"""The desk's guards: security headers with a strict Content-Security-Policy, who is asking, CSRF tokens.

- Every response carries a Content-Security-Policy that allows scripts, styles, images and
  connections only from the desk itself, no plugins, no framing (``frame-ancestors 'none'``), forms
  only to the desk; inline styles only when their SHA-256 is one of the ledger tints this model can
  draw (``'unsafe-hashes'`` with hashes, CSP Level 3), never inline script. Also
  ``X-Content-Type-Options: nosniff``, ``Referrer-Policy: no-referrer`` and ``Cache-Control: no-store``.
- With users, the API takes ``Authorization: Bearer TOKEN``; the pages take a session cookie set at
  login (HttpOnly, SameSite=Strict, signed with a key made at start-up). Writes that ride on the
  cookie need the session's CSRF token (a form field or the ``X-CSRF-Token`` header).
"""

from __future__ import annotations

import base64
import hashlib
import hmac
import secrets

from explain.present.drawing import class_colours
from explain.present.tint import tint
from explain.runs.desk.users import User

SESSION_COOKIE = "nbledger_desk"
#: The strength levels' sizes against a largest of 1 (one inside each third of :func:`tint.level`).
_LEVEL_SIZES = (0.1, 0.5, 0.9)


def tint_styles(classes, normal_class) -> list[str]:
    """Every ``style`` attribute value the ledger fragment can hold for this model's classes."""
    styles = []
    for family in class_colours(classes, normal_class).values():
        for size in _LEVEL_SIZES:
            t = tint("credit", family, size, 1.0)
            styles.append(f"background-color: {t.background}; color: {t.foreground}")
        styles.append(f"background-color: {family.shade(0.55)}")
    return sorted(set(styles))


def content_policy(styles: list[str]) -> str:
    hashes = " ".join(
        "'sha256-" + base64.b64encode(hashlib.sha256(s.encode()).digest()).decode() + "'" for s in styles
    )
    return (
        "default-src 'none'; script-src 'self'; "
        f"style-src 'self' 'unsafe-hashes' {hashes}; "
        "img-src 'self'; connect-src 'self'; font-src 'self'; form-action 'self'; "
        "base-uri 'none'; frame-ancestors 'none'"
    )


class SecurityHeaders:
    """ASGI middleware adding the security headers to every HTTP response."""

    def __init__(self, app, policy: str):
        self.app = app
        self.headers = [
            (b"content-security-policy", policy.encode()),
            (b"x-content-type-options", b"nosniff"),
            (b"referrer-policy", b"no-referrer"),
            (b"x-frame-options", b"DENY"),
            (b"cache-control", b"no-store"),
            (b"cross-origin-resource-policy", b"same-origin"),
        ]

    async def __call__(self, scope, receive, send):
        if scope["type"] != "http":
            return await self.app(scope, receive, send)

        async def send_with_headers(message):
            if message["type"] == "http.response.start":
                names = {name for name, _ in message.get("headers", [])}
                message["headers"] = list(message.get("headers", [])) + [h for h in self.headers if h[0] not in names]
            await send(message)

        await self.app(scope, receive, send_with_headers)


def bearer_token(request) -> str | None:
    header = request.headers.get("authorization", "")
    scheme, _, token = header.partition(" ")
    return token.strip() if scheme.lower() == "bearer" and token.strip() else None


def requester(request) -> tuple[User | None, bool]:
    """``(the user asking or None, whether they came by the session cookie)``."""
    settings = request.app.state.settings
    if settings.users is None:
        return settings.local_user, SESSION_COOKIE in request.cookies
    token = bearer_token(request)
    if token is not None:
        return settings.users.check(token), False
    found = request.session.get("user") if "session" in request.scope else None
    if found is None:
        return None, True
    return User(found["id"], found["name"], found["role"]), True


def csrf_token(request) -> str:
    """The session's CSRF token (made on first use)."""
    token = request.session.get("csrf")
    if token is None:
        token = request.session["csrf"] = secrets.token_urlsafe(32)
    return token


def csrf_ok(request, given: str | None) -> bool:
    expected = request.session.get("csrf")
    return bool(expected and given and hmac.compare_digest(expected, given))
