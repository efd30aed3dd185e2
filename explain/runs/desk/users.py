"""The desk's users: a JSON file of names, roles and Argon2 hashes of their tokens (never a token in clear).

A token reads ``nbl_<user id>_<secret>``: the id finds the one hash to check, the secret (32 random
bytes, URL-safe base64) is what the hash is of. Hashing is Argon2id through ``argon2-cffi``
(RFC 9106), with the library's default cost; a token once checked is remembered in memory by its
SHA-256 for the life of the process, so that a busy desk does not pay Argon2 per request.
"""

from __future__ import annotations

import hashlib
import json
import secrets
import threading
from dataclasses import dataclass
from pathlib import Path

from explain.errors import NbledgerError

ROLES = ("reviewer", "auditor")
SCHEMA = "nbledger.users/1"
#: What each role may do: auditors read, reviewers also write reviews.
MAY_WRITE = {"reviewer": True, "auditor": False}


@dataclass(frozen=True)
class User:
    id: str
    name: str
    role: str

    @property
    def may_write(self) -> bool:
        return MAY_WRITE[self.role]


def _hasher():
    from argon2 import PasswordHasher

    return PasswordHasher()


def read_users(path: Path) -> list[dict]:
    """The records of a users file; a missing file is an empty list."""
    if not path.exists():
        return []
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise NbledgerError(f"cannot read the users file {path}: {exc}") from None
    if not isinstance(data, dict) or data.get("schema") != SCHEMA or not isinstance(data.get("users"), list):
        raise NbledgerError(f"{path} is not an nbledger users file ({SCHEMA})")
    for record in data["users"]:
        if not (isinstance(record, dict) and {"id", "name", "role", "hash"} <= set(record) and record["role"] in ROLES):
            raise NbledgerError(f"{path} holds a user record that is not name, role and hash")
    return data["users"]


def add_user(path: Path, name: str, role: str) -> tuple[bytes, str]:
    """``(the new users file's bytes, the new token)``; the caller writes the file atomically."""
    if role not in ROLES:
        raise NbledgerError(f"--role must be reviewer or auditor, got {role!r}")
    name = name.strip()
    if not name or len(name) > 100 or any(not ch.isprintable() for ch in name):
        raise NbledgerError("a user's name must be 1 to 100 printable characters")
    users = read_users(path)
    if any(u["name"] == name for u in users):
        raise NbledgerError(f"{path} already has a user named {name!r}")
    user_id = secrets.token_hex(6)
    token = f"nbl_{user_id}_{secrets.token_urlsafe(32)}"
    users.append({"id": user_id, "name": name, "role": role, "hash": _hasher().hash(token)})
    text = json.dumps({"schema": SCHEMA, "users": users}, indent=2, ensure_ascii=False) + "\n"
    return text.encode("utf-8"), token


class Users:
    """The users of a running desk: token -> :class:`User`."""

    def __init__(self, records: list[dict]):
        if not records:
            raise NbledgerError("the users file has no users: add one with nbledger user add")
        self._records = {r["id"]: r for r in records}
        self._known: dict[str, User] = {}
        self._lock = threading.Lock()
        self._hasher = _hasher()

    @classmethod
    def from_file(cls, path: Path) -> "Users":
        if not path.is_file():
            raise NbledgerError(f"the users file {path} does not exist: make it with nbledger user add")
        return cls(read_users(path))

    def check(self, token: str) -> User | None:
        """The user holding ``token``, or None."""
        from argon2.exceptions import InvalidHashError, VerificationError

        digest = hashlib.sha256(token.encode("utf-8", "surrogatepass")).hexdigest()
        with self._lock:
            if digest in self._known:
                return self._known[digest]
        parts = token.split("_", 2)
        if len(parts) != 3 or parts[0] != "nbl" or parts[1] not in self._records:
            return None
        record = self._records[parts[1]]
        try:
            self._hasher.verify(record["hash"], token)
        except (VerificationError, InvalidHashError):
            return None
        user = User(record["id"], record["name"], record["role"])
        with self._lock:
            self._known[digest] = user
        return user
