"""``nbledger demo`` from a fresh, non-editable install outside the checkout.

The project is built into a wheel and installed, without dependencies, into
a new virtual environment made without pip; a ``.pth`` file lends it the
running environment's site-packages for the dependencies. So the test pays
for one wheel build and one install of the project itself, not for
installing scikit-learn, matplotlib and WeasyPrint again, and it still runs
the installed copy: the package, its templates and its console script come
from the wheel (checked below), never from the checkout.
"""

from __future__ import annotations

import os
import subprocess
import sys
import sysconfig
from pathlib import Path

import pytest
from pypdf import PdfReader

ROOT = Path(__file__).resolve().parents[1]


@pytest.mark.slow
def test_demo_runs_from_a_fresh_non_editable_install(tmp_path):
    env = {k: v for k, v in os.environ.items() if k not in ("PYTHONPATH", "VIRTUAL_ENV")}
    wheels, venv, out = tmp_path / "wheels", tmp_path / "venv", tmp_path / "out"
    subprocess.run([sys.executable, "-m", "pip", "wheel", "--quiet", "--no-deps", "-w", str(wheels), str(ROOT)],
                   check=True, env=env, cwd=tmp_path)
    subprocess.run([sys.executable, "-m", "venv", "--without-pip", str(venv)], check=True)
    python = venv / "bin" / "python"
    site = Path(subprocess.run([python, "-c", "import sysconfig; print(sysconfig.get_paths()['purelib'])"],
                               check=True, capture_output=True, text=True, env=env).stdout.strip())
    (site / "dependencies.pth").write_text(sysconfig.get_paths()["purelib"] + "\n")
    wheel = next(wheels.glob("nbledger-*.whl"))
    subprocess.run([sys.executable, "-m", "pip", "--python", str(python), "install", "--quiet", "--no-deps",
                    "--no-index", str(wheel)], check=True, env=env)

    where = subprocess.run([python, "-c", "import explain.present.report_pages as r; print(r.template_dir())"],
                           check=True, capture_output=True, text=True, env=env, cwd=tmp_path).stdout.strip()
    assert Path(where).is_relative_to(site), where  # templates from the installed package

    done = subprocess.run([venv / "bin" / "nbledger", "demo", "--out", str(out), "--corpus", str(ROOT / "demo_corpus")],
                          capture_output=True, text=True, env=env, cwd=tmp_path, timeout=600)
    assert done.returncode == 0, done.stderr[-3000:]
    for name in ("report.pdf", "report.html", "report.json", "sheet_clear_scam.pdf", "sheet_false_alarm.pdf"):
        assert (out / name).stat().st_size > 1000, name
    assert len(PdfReader(out / "report.pdf").pages) >= 8
    assert len(PdfReader(out / "sheet_clear_scam.pdf").pages) == 1


def test_demo_without_a_corpus_says_where_to_run_it(tmp_path, capsys):
    from clirun import nbledger

    result = nbledger(capsys, "demo", "--out", tmp_path / "out", "--corpus", tmp_path / "nowhere")
    assert "no demo corpus" in result.one_error_line()


@pytest.mark.parametrize("width", [60, 78, 120])
def test_the_demo_prints_commands_that_paste(width):
    # POSIX shell word splitting as Python's shlex implements it (the standard library, outside this project)
    import shlex

    from explain.cli.demo import pasteable

    argv = ["report", "m.skops", "--title", "Review of the Tideway Commons message filter", "--organisation",
            "Tideway Commons (demo)", "--base-rate", "2%", "--label-errors", "--costs", "1:5", "--note", "it's $HOME"]
    printed = pasteable(argv, width)
    assert all(len(line) <= width for line in printed.splitlines() if " " in line.strip())
    assert shlex.split(printed.replace("\\\n", " ")) == ["nbledger", *argv]
    assert "'Tideway Commons (demo)'" in printed
