"""``ledger`` over a folder of 10,000 ``.eml`` files against the standard library's parser alone.

The folder is made from the public mail corpus (its 6046 raw messages, repeated under new
file names until there are ``--messages``), in a temporary folder. Timed side by side, wall
clock, best of ``--repeat``:

- **parser alone**: every file read and parsed with ``email.message_from_bytes`` and
  ``email.policy.default`` (the floor of any reader built on the standard library);
- **parser and body text**: the same, plus the standard library's own text of the body
  (``get_body(("plain", "html")).get_content()``), for scale;
- **ledger**: :func:`explain.runs.ledger_local.write_ledger` (what ``nbledger ledger
  MODEL FOLDER --out l.parquet`` runs, without the model loading): every file read by the
  library's e-mail reader in the model's view and text rules, scored, its top tokens and
  flip set found, written to Parquet.

The filter: multinomial naive Bayes on word counts in the body view, trained on the whole
corpus (text rules 2). Target (issue 20): ledger <= 1.5 x the parser alone.

Run: ``python -m benchmarks.bench_mail_ledger [--messages N] [--repeat R]``.
"""

from __future__ import annotations

import argparse
import email
import email.policy
import shutil
import tempfile
import time
from pathlib import Path

from benchmarks import mailcorpus


def _folder(root: Path, n: int) -> list[Path]:
    raw = mailcorpus._raw_corpus()
    files = []
    for i in range(n):
        message = raw[i % len(raw)]
        path = root / "mail" / message.group / f"{i:05d}.eml"
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_bytes(message.data)
        files.append(path)
    return sorted(files)


def _parse(files) -> None:
    for path in files:
        email.message_from_bytes(path.read_bytes(), policy=email.policy.default)


def _parse_and_body(files) -> None:
    for path in files:
        message = email.message_from_bytes(path.read_bytes(), policy=email.policy.default)
        body = message.get_body(("plain", "html"))
        if body is not None:
            try:
                body.get_content()
            except (LookupError, UnicodeError, KeyError, AssertionError):
                pass


def _model(root: Path):
    import json

    import skops.io as sio

    from explain.model.loading import card_path_for, load_model, sha256_of
    from explain.model.training import TrainSettings, model_card, train_filter

    corpus = mailcorpus.load(view="body")
    settings = TrainSettings(normal_class="ham", text_view="body", text_rules="2")
    trained = train_filter(list(corpus.texts), corpus.labels, settings)
    path = root / "corpus.skops"
    sio.dump(trained.pipeline, path)
    card = model_card(trained, model_file=path.name, model_sha256=sha256_of(path), data={"file": "corpus"})
    card_path_for(path).write_text(json.dumps(card))
    return load_model(path)


def _best(call, repeat: int) -> float:
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        call()
        times.append(time.perf_counter() - start)
    return min(times)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--messages", type=int, default=10_000)
    parser.add_argument("--repeat", type=int, default=3)
    args = parser.parse_args()

    from explain.model.mail_data import MailInput
    from explain.runs.ledger_local import write_ledger

    root = Path(tempfile.mkdtemp(prefix="nbledger-bench-mail-"))
    try:
        files = _folder(root, args.messages)
        megabytes = sum(p.stat().st_size for p in files) / 1e6
        model = _model(root)
        mail = MailInput(view="body", rules="2")
        out = root / "ledger.parquet"

        def ledger():
            out.unlink(missing_ok=True)
            write_ledger(model, [root / "mail"], None, out, mail=mail)

        plain = _best(lambda: _parse(files), args.repeat)
        body = _best(lambda: _parse_and_body(files), args.repeat)
        ran = _best(ledger, args.repeat)
        def ledger_one_process():
            out.unlink(missing_ok=True)
            write_ledger(model, [root / "mail"], None, out, mail=mail, helper=False)

        ran_one = _best(ledger_one_process, args.repeat)
        n = len(files)
        print(f"{n:,} .eml files, {megabytes:.1f} MB; best of {args.repeat}")
        print(f"{'step':<52} {'seconds':>8} {'msg/s':>8} {'x parser':>9}")
        for name, seconds in (
            ("stdlib parser alone (policy.default)", plain),
            ("stdlib parser and its body text", body),
            ("ledger (write_ledger, reading helper)", ran),
            ("ledger in one process (helper=False)", ran_one),
        ):
            print(f"{name:<52} {seconds:>8.2f} {n / seconds:>8,.0f} {seconds / plain:>9.2f}")
        print(f"target: ledger <= 1.5 x parser alone: {'met' if ran <= 1.5 * plain else 'NOT met'}")
    finally:
        shutil.rmtree(root, ignore_errors=True)


if __name__ == "__main__":
    main()
