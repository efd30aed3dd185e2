"""What one running desk holds: the model (loaded once), the rule, the queue, the review database, the users."""

from __future__ import annotations

import datetime as _dt
import secrets
from dataclasses import dataclass, field

from explain.runs.desk.queue import Queue
from explain.runs.desk.store import Store
from explain.runs.desk.users import User, Users

#: The largest message text the desk explains (bytes of UTF-8), as ``nbledger why`` by default.
MAX_TEXT_BYTES = 1024 * 1024


@dataclass
class DeskSettings:
    """Everything :func:`explain.runs.desk.app.build_app` needs; made once at start-up.

    ``loaded`` is an :class:`explain.model.loading.LoadedModel`; ``users`` None means one local
    reviewer (``local_user``) and a desk bound to the loopback interface.
    """

    loaded: object
    store: Store
    queue: Queue | None = None
    threshold: float | None = None
    threshold_log_odds: float | None = None
    users: Users | None = None
    local_user: User = field(default_factory=lambda: User("local", "local", "reviewer"))
    fingerprint: str | None = None
    redact: bool = False
    max_text_bytes: int = MAX_TEXT_BYTES
    session_secret: str = field(default_factory=lambda: secrets.token_urlsafe(32))

    def __post_init__(self):
        if self.fingerprint is None:  # the model's fingerprint (explain.model.fingerprint), computed once
            value = getattr(self.loaded, "fingerprint", None)
            self.fingerprint = value if isinstance(value, str) else None

    @property
    def model_sha256(self) -> str:
        return self.loaded.sha256


def record_time() -> str:
    """Now, in UTC to the second (the ``date`` of a served ledger record)."""
    return _dt.datetime.now(_dt.timezone.utc).replace(microsecond=0).isoformat().replace("+00:00", "Z")
