"""Reviews survive a killed desk: six threads post 300 reviews, the server dies by SIGKILL mid-way and is
started again on the same database; 300 reviews are kept, none twice. On SQLite and on PostgreSQL."""

from __future__ import annotations

import signal
import threading
import time

import httpx
import pytest

from desk_support import free_port, start_server, stop, train_filter, write_queue
from pg_server import postgres_server

THREADS, EACH = 6, 50


@pytest.fixture(scope="module")
def made(tmp_path_factory):
    folder = tmp_path_factory.mktemp("durable")
    _, model = train_filter(folder)
    return folder, model, write_queue(folder, 40)


def post_all(base_holder: dict, ids: list[str], thread: int, acked: list, stop_at: float):
    """Post EACH reviews; a review whose answer was lost is sent again with its key until it is answered."""
    with httpx.Client(timeout=10) as client:
        for k in range(EACH):
            key = f"t{thread}-review-{k:03d}"
            body = {"outcome": ("upheld", "overturned", "escalated")[k % 3], "reason": f"thread {thread}", "review_key": key}
            mid = ids[(thread * EACH + k) % len(ids)]
            while time.monotonic() < stop_at:
                try:
                    answer = client.post(f"{base_holder['base']}/api/messages/{mid}/reviews", json=body)
                except httpx.HTTPError:
                    time.sleep(0.05)  # the desk is down: try the same review again
                    continue
                if answer.status_code in (200, 201):
                    acked.append((key, answer.json()["id"], answer.status_code))
                    break
                time.sleep(0.05)


def kill_and_restart(model, queue, db, tmp_path):
    port = free_port()
    process, base = start_server(model, "--queue", queue, "--db", db, port=port)
    ids = [m["id"] for m in httpx.get(f"{base}/api/queue").json()["messages"]]
    holder, acked = {"base": base}, []
    stop_at = time.monotonic() + 240
    threads = [threading.Thread(target=post_all, args=(holder, ids, t, acked, stop_at)) for t in range(THREADS)]
    for t in threads:
        t.start()
    try:
        while len(acked) < 100 and time.monotonic() < stop_at:
            time.sleep(0.01)
        process.send_signal(signal.SIGKILL)  # no shutdown of any kind
        process.wait()
        at_kill = len(acked)
        process, _ = start_server(model, "--queue", queue, "--db", db, port=port)
        for t in threads:
            t.join()
        reviews = httpx.get(f"{base}/api/reviews").json()["reviews"]
    finally:
        stop(process)
    return at_kill, acked, reviews


def check(at_kill, acked, reviews):
    assert 100 <= at_kill < THREADS * EACH  # the kill came mid-way
    assert len(acked) == THREADS * EACH
    assert len(reviews) == THREADS * EACH  # every answered review kept, and none doubled
    assert len({r["id"] for r in reviews}) == THREADS * EACH
    assert {a[1] for a in acked} == {r["id"] for r in reviews}


def test_sqlite_keeps_every_review_once_through_a_sigkill(made, tmp_path):
    folder, model, queue = made
    check(*kill_and_restart(model, queue, tmp_path / "reviews.sqlite", tmp_path))


def test_postgresql_keeps_every_review_once_through_a_sigkill(made, tmp_path):
    folder, model, queue = made
    with postgres_server() as url:
        check(*kill_and_restart(model, queue, url, tmp_path))
