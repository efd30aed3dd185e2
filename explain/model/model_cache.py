"""A cache of loaded filters in plain form, which nobody without the user's key can forge.

The first load of a model file runs the separate loading process; its plain
form (:mod:`explain.model.plain_form`: ``.npz`` arrays read with
``allow_pickle=False``, the settings as a JSON member of the same archive) is
kept in the user's cache folder, so the next load of the same bytes skips the
process. The folder is ``$XDG_CACHE_HOME/nbledger/models`` (``~/.cache/nbledger/models``
when ``XDG_CACHE_HOME`` is unset or not absolute, as the XDG Base Directory
Specification says).

Authentication. Each entry (``KEY.entry``: a magic line, a 32-byte tag, then
the ``.npz`` bytes) carries an HMAC-SHA-256 tag (RFC 2104, :mod:`hmac`) under
a per-user secret: 32 random bytes (:func:`secrets.token_bytes`) in
``$XDG_CACHE_HOME/nbledger/secret.key``, created on first use with mode 0600.
The tag covers the model file's SHA-256, its size and every byte of the entry,
so an entry edited by hand, one of another model renamed, or one made for
other bytes of the same name is never used. The digest memo (below) is tagged
the same way. A secret file that is not a private regular file of this user
turns the cache off, with a warning.

Reading is bounded: files are opened without following links
(``O_NOFOLLOW``, and ``O_NONBLOCK`` so that a FIFO cannot hang the open), used
only if they are regular files no larger than the loading limit, the tag is
checked over the whole entry before any of it is parsed, and the archive's
member count and declared sizes are checked before a member is inflated. Any
failure is one warning and a fresh load (which rewrites the entry). A cache
that cannot be written (read-only home) is skipped silently: it only saves time.
A cached load runs nothing from the model file (the entry is plain data), so
the skops allow-list, checked when the entry was made, is not asked again;
pickle files still need ``--allow-pickle`` every time.

Hashing a large model file is most of a cached load (1.2 s for 640 MiB), so
:func:`file_sha256` also remembers each file's digest beside its identity
(device, inode, size, modification and change times in nanoseconds), the way
git's index skips re-hashing unchanged files. Any write to the file changes
its change time, which only the system clock decides, so a changed file is
always hashed again.
"""

from __future__ import annotations

import contextlib
import errno
import hashlib
import hmac
import io
import json
import os
import secrets
import stat
import tempfile
import zipfile
from pathlib import Path
from typing import Callable

import numpy as np

MAGIC = b"nbledger.cache/2\n"
_TAG = 32
_SECRET_BYTES = 32
#: Members an entry may hold (the plain form has about 16).
MAX_MEMBERS = 64
#: Bytes read from a digest memo or the secret file at most.
_SMALL_FILE = 4096
_CHUNK = 1 << 20
Warn = Callable[[str], None] | None


class CacheProblem(Exception):
    """Why an entry, a memo or the secret cannot be used (one short phrase)."""


def cache_root() -> Path:
    base = os.environ.get("XDG_CACHE_HOME", "")
    root = Path(base) if os.path.isabs(base) else Path.home() / ".cache"
    return root / "nbledger"


def cache_folder() -> Path:
    return cache_root() / "models"


def secret_path() -> Path:
    return cache_root() / "secret.key"


def entry_path(key: str) -> Path:
    return cache_folder() / f"{key}.entry"


def _open_regular(path: Path, limit: int) -> tuple[int, os.stat_result]:
    """A read-only descriptor of ``path``: no link followed, no FIFO waited on, regular and at most ``limit`` bytes."""
    try:
        fd = os.open(path, os.O_RDONLY | os.O_NOFOLLOW | os.O_NONBLOCK | getattr(os, "O_CLOEXEC", 0))
    except OSError as exc:
        raise CacheProblem("a link or an unreadable file" if exc.errno in (errno.ELOOP, errno.ENOTDIR) else exc.strerror or "unreadable") from None
    info = os.fstat(fd)
    if not stat.S_ISREG(info.st_mode):
        os.close(fd)
        raise CacheProblem("not a regular file")
    if info.st_size > limit:
        os.close(fd)
        raise CacheProblem(f"larger than {limit:,} bytes")
    return fd, info


def _read_small(path: Path) -> bytes:
    fd, _ = _open_regular(path, _SMALL_FILE)
    try:
        return os.read(fd, _SMALL_FILE + 1)
    finally:
        os.close(fd)


def _read_secret() -> bytes:
    path = secret_path()
    fd, info = _open_regular(path, _SECRET_BYTES)
    try:
        if info.st_uid != os.getuid() or stat.S_IMODE(info.st_mode) & 0o077:
            raise CacheProblem(f"its key {path} is readable or writable by others")
        data = os.read(fd, _SECRET_BYTES + 1)
    finally:
        os.close(fd)
    if len(data) != _SECRET_BYTES:
        raise CacheProblem(f"its key {path} is not {_SECRET_BYTES} bytes")
    return data


def secret(create: bool = True) -> bytes:
    """The per-user secret; made (mode 0600, never through a link) when ``create`` and absent.

    Raises :class:`CacheProblem` when it is absent and cannot be made, or is not private.
    """
    path = secret_path()
    if not os.path.lexists(path):
        if not create:
            raise CacheProblem("no key yet")
        try:
            path.parent.mkdir(mode=0o700, parents=True, exist_ok=True)
            fd = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL | os.O_NOFOLLOW, 0o600)
        except FileExistsError:
            return _read_secret()  # another run made it just now
        except OSError as exc:
            raise CacheProblem(f"its key cannot be made: {exc.strerror or exc}") from None
        try:
            os.write(fd, secrets.token_bytes(_SECRET_BYTES))
        finally:
            os.close(fd)
    return _read_secret()


def _tag(key: bytes, label: bytes, fields: list[bytes], stream=None) -> bytes:
    """HMAC-SHA-256 (RFC 2104) of length-prefixed ``fields`` and then ``stream``'s bytes."""
    mac = hmac.new(key, label, hashlib.sha256)
    for field in fields:
        mac.update(len(field).to_bytes(8, "big") + field)
    if stream is not None:
        while block := stream(_CHUNK):
            mac.update(block)
    return mac.digest()


# --- the digest memo ----------------------------------------------------------------


def _digest(path: Path) -> str:
    with open(path, "rb") as handle:
        return hashlib.file_digest(handle, "sha256").hexdigest()


def _identity(path: Path) -> list[int]:
    info = os.stat(path)
    return [info.st_dev, info.st_ino, info.st_size, info.st_mtime_ns, info.st_ctime_ns]


def _memo_fields(real: str, identity: list[int], digest: str) -> list[bytes]:
    return [os.fsencode(real), json.dumps(identity).encode(), digest.encode()]


def file_sha256(path: Path, remember: bool = True, on_warning: Warn = None) -> str:
    """SHA-256 of ``path``; re-used from an authenticated memo when the file's identity is unchanged."""
    if not remember:
        return _digest(path)
    real = os.path.realpath(path)
    note = cache_root() / "digests" / f"{hashlib.sha256(os.fsencode(real)).hexdigest()}.json"
    identity = _identity(path)
    try:
        key = secret()
    except CacheProblem as exc:
        _say(on_warning, f"the cache of loaded models is not used: {exc}")
        return _digest(path)
    if os.path.lexists(note):
        try:
            known = json.loads(_read_small(note))
            digest, tag = known["sha256"], bytes.fromhex(known["tag"])
            if not hmac.compare_digest(tag, _tag(key, b"nbledger.digest/1", _memo_fields(real, identity, digest))):
                if known.get("identity") != identity:
                    raise LookupError  # the file changed since: hash it again, nothing wrong
                raise CacheProblem("its tag does not match")
            return digest
        except LookupError:
            pass
        except (CacheProblem, ValueError, TypeError, KeyError, AttributeError, OSError) as exc:
            reason = exc if isinstance(exc, CacheProblem) else "damaged"
            _say(on_warning, f"the remembered SHA-256 of {Path(path).name} was not used ({reason}); hashing the file again")
    digest = _digest(path)
    if _identity(path) == identity:  # not changed while we read it
        tag = _tag(key, b"nbledger.digest/1", _memo_fields(real, identity, digest)).hex()
        _replace(note, json.dumps({"identity": identity, "sha256": digest, "tag": tag}).encode())
    return digest


def _say(on_warning: Warn, message: str) -> None:
    if on_warning is not None:
        on_warning(message)


def _replace(path: Path, data: bytes) -> None:
    """Write ``path`` whole through a temporary file beside it; silently nothing when that fails."""
    tmp = None
    try:
        path.parent.mkdir(mode=0o700, parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(dir=path.parent, suffix=".tmp")
        with os.fdopen(fd, "wb") as handle:
            handle.write(data)
        os.replace(tmp, path)
        tmp = None
    except OSError:
        pass
    finally:
        if tmp is not None:
            with contextlib.suppress(OSError):
                os.unlink(tmp)


# --- entries ---------------------------------------------------------------------------


class _Window(io.RawIOBase):
    """The bytes of descriptor ``fd`` from ``start`` on, as a seekable read-only file (``os.pread``)."""

    def __init__(self, fd: int, start: int, size: int):
        self._fd, self._start, self._size, self._pos = fd, start, size, 0

    def readable(self):
        return True

    def seekable(self):
        return True

    def tell(self):
        return self._pos

    def seek(self, offset, whence=0):
        base = {0: 0, 1: self._pos, 2: self._size}[whence]
        self._pos = max(0, base + offset)
        return self._pos

    def readinto(self, buffer):
        n = min(len(buffer), max(0, self._size - self._pos))
        data = os.pread(self._fd, n, self._start + self._pos) if n else b""
        buffer[: len(data)] = data
        self._pos += len(data)
        return len(data)


def _entry_fields(model_sha256: str, model_size: int) -> list[bytes]:
    return [model_sha256.encode(), str(int(model_size)).encode()]


def read(key: str, model_sha256: str, model_size: int, limit: int, on_warning: Warn = None) -> tuple[dict, dict] | None:
    """(arrays, settings) cached under ``key``, or None when absent or not to be trusted (with a warning).

    ``model_sha256`` and ``model_size`` describe the model file(s) the entry
    must have been made from; ``limit`` bounds the entry's size on disk and
    its members' sizes once inflated.
    """
    path = entry_path(key)
    if not os.path.lexists(path):
        return None
    try:
        return _read_entry(path, secret(create=False), _entry_fields(model_sha256, model_size), limit)
    except (CacheProblem, OSError, ValueError, KeyError, TypeError, AttributeError, zipfile.BadZipFile, EOFError) as exc:
        reason = exc if isinstance(exc, CacheProblem) else f"damaged: {type(exc).__name__}"
        _say(on_warning, f"the cached copy of this model was not used ({reason}); loading the model file afresh")
        return None


def _read_entry(path: Path, key: bytes, fields: list[bytes], limit: int) -> tuple[dict, dict]:
    fd, info = _open_regular(path, limit)
    try:
        head = os.read(fd, len(MAGIC) + _TAG)
        if len(head) != len(MAGIC) + _TAG or not head.startswith(MAGIC):
            raise CacheProblem("not an entry of this version")
        expected = _tag(key, b"nbledger.entry/2", fields, lambda n: os.read(fd, n))
        if not hmac.compare_digest(expected, head[len(MAGIC):]):
            raise CacheProblem("its tag does not match this model file")
        window = io.BufferedReader(_Window(fd, len(MAGIC) + _TAG, info.st_size - len(MAGIC) - _TAG))
        with zipfile.ZipFile(window) as archive:
            members = archive.infolist()
            if len(members) > MAX_MEMBERS or sum(m.file_size for m in members) > limit:
                raise CacheProblem(f"its archive declares more than {MAX_MEMBERS} parts or {limit:,} bytes")
        window.seek(0)
        with np.load(window, allow_pickle=False) as data:
            arrays = {name: data[name] for name in data.files}
    finally:
        os.close(fd)
    settings = json.loads(arrays.pop("settings_json").tobytes().decode("utf-8"), parse_constant=_no_constant)
    if not isinstance(settings, dict):
        raise CacheProblem("its settings are not an object")
    return arrays, settings


def _no_constant(name: str):
    raise ValueError(f"{name} is not JSON")


def write(key: str, arrays: dict, settings: dict, model_sha256: str, model_size: int) -> None:
    """Keep the plain form under ``key``, tagged; the entry appears whole or not at all."""
    folder = cache_folder()
    try:
        key_bytes = secret()
        folder.mkdir(mode=0o700, parents=True, exist_ok=True)
        members = dict(arrays, settings_json=np.frombuffer(json.dumps(settings, allow_nan=False).encode(), dtype=np.uint8))
        with tempfile.TemporaryDirectory(dir=folder, prefix=".incoming-") as tmp:
            npz, entry = Path(tmp) / "entry.npz", Path(tmp) / "entry"
            with open(npz, "wb") as handle:
                np.savez(handle, **members, allow_pickle=False)
            with open(npz, "rb") as source:
                tag = _tag(key_bytes, b"nbledger.entry/2", _entry_fields(model_sha256, model_size), source.read)
            with open(npz, "rb") as source, open(entry, "wb") as target:
                target.write(MAGIC + tag)
                while block := source.read(_CHUNK):
                    target.write(block)
            os.replace(entry, entry_path(key))
    except (OSError, ValueError, CacheProblem):
        pass
