"""``nbledger demo``: the Tideway Commons demo end to end, ending in the review report.

The demo corpus is not part of the installed package: it lives in the
project's checkout (``demo_corpus/``). The command looks for it in the
current folder, or takes ``--corpus DIR``; without it, it stops with one line
saying so.
"""

from __future__ import annotations

import shlex
import subprocess
import sys
from pathlib import Path
from typing import Optional

import typer

from explain.cli.common import app, console, fail

#: The two decisions printed as one-page sheets: a clear scam and a false alarm.
SHEETS = ("clear_scam", "false_alarm")


def pasteable(argv: list[str], width: int = 78) -> str:
    """The command as a shell would take it back, to paste as printed: each word quoted as needed
    (``shlex.quote``), an option kept with its value, lines continued with a backslash before ``width``
    columns, no prompt sign."""
    words = [shlex.quote(w) for w in ["nbledger", *argv]]
    parts: list[str] = []
    for word in words:
        if parts and parts[-1].startswith("--") and not word.startswith("--") and " " not in parts[-1]:
            parts[-1] += " " + word
        else:
            parts.append(word)
    lines = [parts[0]]
    for part in parts[1:]:
        if len(lines[-1]) + 1 + len(part) > width - 2:
            lines[-1] += " \\"
            lines.append("    " + part)
        else:
            lines[-1] += " " + part
    return "\n".join(lines)


def _step(argv: list[str]) -> None:
    """Run one nbledger command in this process; its error, if any, ends the demo with that command's one line."""
    console.print(pasteable(argv), markup=False, highlight=False, style="dim", soft_wrap=True)
    status = app(args=list(argv), prog_name="nbledger", standalone_mode=False)
    if isinstance(status, int) and status:
        raise typer.Exit(status)


def _script(script: Path, *args: str) -> None:
    """Run one of the corpus's own scripts (it checks or splits the committed CSV)."""
    done = subprocess.run([sys.executable, str(script), *args], capture_output=True, text=True)
    sys.stdout.write(done.stdout)
    if done.returncode:
        fail((done.stderr.strip() or done.stdout.strip() or f"{script.name} failed").splitlines()[-1])


@app.command()
def demo(
    out: Path = typer.Option(Path("demo_out"), "--out", help="Folder for everything the demo writes."),
    corpus: Optional[Path] = typer.Option(
        None, "--corpus", help="The demo corpus folder (default: demo_corpus/ in the current folder)."
    ),
):
    """Check the demo corpus, split it by date, train the demo filter, and write its review report."""
    corpus = corpus if corpus is not None else Path("demo_corpus")
    if not (corpus / "generate.py").is_file() or not (corpus / "messages.csv").is_file():
        fail(
            f"no demo corpus at {corpus}/: run nbledger demo in the project's checkout, "
            "or point --corpus at its demo_corpus folder"
        )
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        fail(f"cannot create the output folder {out}: {exc.strerror or exc}")
    examples = corpus / "examples"
    model = out / "tideway.skops"

    _script(corpus / "generate.py", "--check", "--out", str(corpus / "messages.csv"))
    _script(corpus / "split.py", "--out", str(out))
    _step(["train", str(out / "train.csv"), "--text-col", "text", "--label-col", "label", "--normal-class", "ok",
           "--tokens", "entities",
           "--holdout", "0.2", "--seed", "7", "--out", str(model)])
    explain = ["--explain", str(examples / "explain.csv")] if (examples / "explain.csv").is_file() else []
    _step(["report", str(model), "--data", str(out / "test.csv"), *explain,
           "--watchlist", str(examples / "watchlist.txt"),
           # The demo's own assumption: about 2 in 100 messages of real traffic are abusive (the test set has 23).
           "--base-rate", "2%", "--slice-by", "sent_at:month", "--label-errors",
           # and that letting a scam through costs as much as five false alarms
           "--costs", "1:5",
           "--title", "Review of the Tideway Commons message filter", "--organisation", "Tideway Commons (demo)",
           "--out", str(out / "report.pdf"), "--html", str(out / "report.html"), "--json", str(out / "report.json")])
    sheets = []
    for name in SHEETS:
        if (examples / f"{name}.txt").is_file():
            sheets.append(out / f"sheet_{name}.pdf")
            _step(["why", str(model), "--file", str(examples / f"{name}.txt"), "--redact", "--out", str(sheets[-1])])
    letter = None
    if (examples / "false_alarm.txt").is_file() and (examples / "letter.toml").is_file():
        # The member whose message was held gets a plain letter (no figures), not the team's sheet.
        letter = out / "letter_false_alarm.pdf"
        _step(["why", str(model), "--file", str(examples / "false_alarm.txt"), "--audience", "member",
               "--letter-settings", str(examples / "letter.toml"), "--out", str(letter)])
    console.print(f"\nThe review report is {out / 'report.pdf'} (HTML twin report.html, every figure in report.json).",
                  markup=False, highlight=False)
    for sheet in sheets:
        console.print(f"One-page sheet: {sheet}", markup=False, highlight=False)
    if letter is not None:
        console.print(f"Letter to the member: {letter}", markup=False, highlight=False)
