"""The README's Python example runs as written (on a model trained like the demo's)."""

from __future__ import annotations

import re
from pathlib import Path

from explain.cli import run

ROOT = Path(__file__).resolve().parent.parent


def test_python_example_runs(tmp_path, monkeypatch, capsys):
    block = re.search(r"```python\n(.*?)```", (ROOT / "README.md").read_text(), re.S).group(1)
    out = tmp_path / "demo_out"
    out.mkdir()
    # A small stand-in for `make demo`: the demo corpus split in two, a model trained on one part.
    lines = (ROOT / "demo_corpus" / "messages.csv").read_text(encoding="utf-8").splitlines(keepends=True)
    (out / "train.csv").write_text("".join(lines[:1500]), encoding="utf-8")
    (out / "test.csv").write_text(lines[0] + "".join(lines[1500:2000]), encoding="utf-8")
    assert run(["train", str(out / "train.csv"), "--text-col", "text", "--label-col", "label",
                "--normal-class", "ok", "--out", str(out / "tideway.skops")]) == 0
    monkeypatch.chdir(tmp_path)
    exec(compile(block, "README.md", "exec"), {})
    printed = capsys.readouterr().out
    assert "scam" in printed and "AucEstimate" in printed
