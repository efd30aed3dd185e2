"""A real PostgreSQL server for the desk's tests, started from Debian's packages in a temporary folder.

PostgreSQL refuses to run as root (CI runs as root): then the server runs as a dedicated system user
``nbledger-pg`` (made with ``useradd`` when missing) through ``runuser``. It listens on a free
loopback port with trust authentication, and is stopped and removed at the end.
"""

from __future__ import annotations

import glob
import os
import shutil
import subprocess
import tempfile
import time
from contextlib import contextmanager
from pathlib import Path

from desk_support import free_port

SYSTEM_USER = "nbledger-pg"


def pg_bin(name: str) -> str:
    found = sorted(glob.glob(f"/usr/lib/postgresql/*/bin/{name}"))
    if found:
        return found[-1]
    path = shutil.which(name)
    if path is None:
        raise RuntimeError(f"PostgreSQL's {name} is not installed (Debian package postgresql; make test installs it)")
    return path


def _ensure_user() -> None:
    if subprocess.run(["id", "-u", SYSTEM_USER], capture_output=True).returncode != 0:
        subprocess.run(["useradd", "--system", "--no-create-home", "--shell", "/usr/sbin/nologin", SYSTEM_USER], check=True)


def _as_server_user(command: list[str]) -> list[str]:
    return command if os.geteuid() != 0 else ["runuser", "-u", SYSTEM_USER, "--", *command]


@contextmanager
def postgres_server():
    """Yields a ``postgresql://`` URL of a fresh, empty database on a server of its own."""
    folder = Path(tempfile.mkdtemp(prefix="nbledger-pg-"))
    data = folder / "data"
    port = free_port()
    if os.geteuid() == 0:
        _ensure_user()
        shutil.chown(folder, SYSTEM_USER)
    try:
        subprocess.run(_as_server_user([pg_bin("initdb"), "-D", str(data), "-U", "postgres", "--auth=trust",
                                        "-E", "UTF8", "--no-sync"]), check=True, capture_output=True)
        subprocess.run(_as_server_user([pg_bin("pg_ctl"), "-D", str(data), "-l", str(folder / "log"), "-w", "-t", "60",
                                        "-o", f"-h 127.0.0.1 -p {port} -k {folder}", "start"]),
                       check=True, capture_output=True)
        import sqlalchemy as sa

        admin = sa.create_engine(f"postgresql+psycopg://postgres@127.0.0.1:{port}/postgres", isolation_level="AUTOCOMMIT")
        with admin.connect() as conn:
            conn.execute(sa.text("CREATE DATABASE desk"))
        admin.dispose()
        yield f"postgresql://postgres@127.0.0.1:{port}/desk"
    finally:
        subprocess.run(_as_server_user([pg_bin("pg_ctl"), "-D", str(data), "-m", "immediate", "-w", "stop"]),
                       capture_output=True)
        shutil.rmtree(folder, ignore_errors=True)

