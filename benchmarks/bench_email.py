"""How fast the e-mail reader parses the public mail corpus (6046 raw messages).

Times in one run, after the tarball has been read into memory (not timed):

- the standard library parser alone (``email.message_from_bytes`` with
  ``email.policy.default``), the floor any reader built on it pays;
- :func:`explain.model.email_reader.read_email` on every message, first with an empty
  header cache (as a command run on a fresh process sees it), then warm;
- the three text views of every read message (string joins only).

It prints messages per second, megabytes per second and the ratio of each to the parser
alone. The comparison of ``ledger`` on a folder of raw messages against the same
messages decoded into a table waits for the ``ledger`` command.

Run: ``python -m benchmarks.bench_email [--repeat R]`` (best of R warm runs).
"""

from __future__ import annotations

import argparse
import email
import email.policy
import time

from benchmarks import mailcorpus
from explain.model import email_reader


def _time(call) -> float:
    start = time.perf_counter()
    call()
    return time.perf_counter() - start


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=3)
    args = parser.parse_args()
    data = [raw.data for raw in mailcorpus._raw_corpus()]
    n, megabytes = len(data), sum(map(len, data)) / 1e6

    cold = _time(lambda: [email_reader.read_email(d) for d in data])
    warm = min(_time(lambda: [email_reader.read_email(d) for d in data]) for _ in range(args.repeat))
    plain = min(
        _time(lambda: [email.message_from_bytes(d, policy=email.policy.default) for d in data])
        for _ in range(args.repeat)
    )
    read = [email_reader.read_email(d) for d in data]
    views = min(
        _time(lambda: [m.text(v) for m in read for v in email_reader.VIEWS]) for _ in range(args.repeat)
    )
    print(f"public mail corpus: {n} messages, {megabytes:.1f} MB raw")
    print(f"{'step':<44} {'seconds':>8} {'msg/s':>8} {'MB/s':>6} {'x parser':>9}")
    for name, seconds in (
        ("stdlib parser alone (policy.default)", plain),
        ("read_email, empty header cache", cold),
        ("read_email, warm header cache", warm),
        ("three text views of every message", views),
    ):
        print(f"{name:<44} {seconds:>8.2f} {n / seconds:>8.0f} {megabytes / seconds:>6.1f} {seconds / plain:>9.2f}")


if __name__ == "__main__":
    main()
