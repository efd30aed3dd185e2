"""Run the command line in-process and capture what a user would see."""

from __future__ import annotations

from dataclasses import dataclass

from explain.cli import run


@dataclass
class Outcome:
    code: int
    out: str
    err: str

    def one_error_line(self) -> str:
        """The single ``error:`` line; fails the test if there is a traceback or more."""
        assert self.code != 0, self.out
        assert "Traceback" not in self.err and "Traceback" not in self.out
        lines = [l for l in self.err.splitlines() if l.strip() and not l.startswith("warning:")]
        assert len(lines) == 1 and lines[0].startswith("error: "), self.err
        return lines[0]


def nbledger(capsys, *args) -> Outcome:
    capsys.readouterr()
    code = run([str(a) for a in args])
    captured = capsys.readouterr()
    return Outcome(code, captured.out, captured.err)
