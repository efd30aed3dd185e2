"""Outputs never destroy inputs, appear as a complete set or not at all, and survive interrupts."""

from __future__ import annotations

import hashlib
import json
import os
import random
import signal
import stat
import subprocess
import sys
import time
from pathlib import Path

import pytest

from clirun import nbledger
from explain.errors import NbledgerError
from explain.model.model_files import card_path_for
from explain.output_files import OutputSet

ROOT = Path(__file__).resolve().parent.parent
TEXTS = ["pay the parcel fee", "fee link now", "tea at the workshop", "kids tea party", "sofa for sale", "sofa deal"]
LABELS = ["scam", "scam", "ok", "ok", "advert", "advert"]


@pytest.fixture
def trained(tmp_path, capsys):
    data = tmp_path / "t.csv"
    data.write_text("text,label\n" + "".join(f"{t},{l}\n" for t, l in zip(TEXTS * 4, LABELS * 4)))
    model = tmp_path / "m.skops"
    result = nbledger(capsys, "train", data, "--text-col", "text", "--label-col", "label", "--out", model,
                      "--normal-class", "ok")
    assert result.code == 0, result.err
    return data, model


def _snapshot(*paths):
    return {p: p.read_bytes() for p in paths}


def test_outputs_that_are_inputs_are_refused(trained, tmp_path, capsys):
    data, model = trained
    card = card_path_for(model)
    link = tmp_path / "link.skops"
    link.symlink_to(model)
    before = _snapshot(data, model, card)
    data_args = ("--text-col", "text", "--label-col", "label")
    runs = [
        ("vocab", model, "--out", model),
        ("vocab", model, "--out", card),
        ("vocab", model, "--out", link),
        ("vocab", model, "--data", data, *data_args, "--out", data),
        ("assess", model, data, *data_args, "--out", data),
        ("assess", model, data, *data_args, "--out", tmp_path / "." / "m.skops"),
        ("train", data, *data_args, "--out", data),
        ("ledger", model, data, "--text-col", "text", "--out", data),
        ("ledger", model, data, "--text-col", "text", "--out", tmp_path / "l.parquet", "--summary", card),
        ("ledger", model, data, "--text-col", "text", "--engine", "dask", "--out", model),
    ]
    for args in runs:
        line = nbledger(capsys, *args).one_error_line()
        assert "input of this run" in line or "symbolic link" in line, line
    assert _snapshot(data, model, card) == before
    # A training run whose card would land on its data: data named x.card.json, model x.skops.
    sneaky = tmp_path / "x.card.json"
    sneaky.write_bytes(data.read_bytes())
    line = nbledger(capsys, "train", sneaky, "--text-col", "text", "--label-col", "label",
                    "--out", tmp_path / "x.skops").one_error_line()
    assert "input of this run" in line and sneaky.read_bytes() == data.read_bytes()


def test_links_devices_and_folders_are_never_replaced(trained, tmp_path, capsys):
    data, model = trained
    target = tmp_path / "real.txt"
    target.write_text("keep")
    link = tmp_path / "out.txt"
    link.symlink_to(target)
    for out, expected in ((link, "symbolic link"), (Path("/dev/null"), "special file"), (tmp_path, "folder")):
        line = nbledger(capsys, "vocab", model, "--out", out).one_error_line()
        assert expected in line, line
    assert link.is_symlink() and target.read_text() == "keep"
    line = nbledger(capsys, "train", data, "--text-col", "text", "--label-col", "label", "--out", tmp_path).one_error_line()
    assert "folder" in line


def test_an_existing_file_keeps_its_permissions(trained, tmp_path, capsys):
    _, model = trained
    out = tmp_path / "vocab.txt"
    out.write_text("old")
    out.chmod(0o600)
    assert nbledger(capsys, "vocab", model, "--out", out).code == 0
    assert out.read_text() != "old" and stat.S_IMODE(out.stat().st_mode) == 0o600


def test_a_bad_output_path_is_refused_before_computing_and_leaves_nothing(trained, tmp_path, capsys):
    data, model = trained
    images = tmp_path / "img"
    line = nbledger(capsys, "assess", model, data, "--text-col", "text", "--label-col", "label",
                    "--images", images, "--out", "/proc/self/nope/a.txt").one_error_line()
    assert "/proc" in line
    assert not images.exists() and not list(tmp_path.glob(".nbledger-*"))
    blocker = tmp_path / "file"
    blocker.write_text("x")
    line = nbledger(capsys, "vocab", model, "--images", blocker / "sub").one_error_line()
    assert "is a file, not a folder" in line


def test_a_failure_inside_the_set_leaves_old_files_and_no_temporary(tmp_path):
    a, b = tmp_path / "a.txt", tmp_path / "pics" / "b.png"
    a.write_text("old a")
    with pytest.raises(RuntimeError):
        with OutputSet() as outputs:
            outputs.file(a)
            outputs.folder(b.parent)
            outputs.write(a, "new a")
            outputs.write(b, b"new b")
            raise RuntimeError("stopped half-way")
    assert a.read_text() == "old a" and not b.parent.exists()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.txt"]
    with OutputSet() as outputs:
        outputs.write(outputs.file(a), "new a")
        outputs.folder(b.parent)
        outputs.write(b, b"new b")
    assert a.read_text() == "new a" and b.read_bytes() == b"new b"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.txt", "pics"]
    with pytest.raises(ValueError):
        with OutputSet() as outputs:
            outputs.write(tmp_path / "undeclared.txt", "x")


def test_the_card_describes_the_model_beside_it(trained):
    _, model = trained
    card = json.loads(card_path_for(model).read_text())
    assert card["model"]["sha256"] == hashlib.sha256(model.read_bytes()).hexdigest()


# --- interrupts -------------------------------------------------------------------

def _start(args, env):
    return subprocess.Popen([sys.executable, "-m", "explain", *map(str, args)], env=env,
                            stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)


def _state(paths):
    """(inode, bytes) of each target that exists; inodes change when os.replace puts a new file in place."""
    return {p: (p.stat().st_ino, p.read_bytes()) for p in paths if p.exists()}


#: Signals sent per command, one in each equal part of its run.
MOMENTS = 5


def test_sigint_and_sigterm_at_random_moments_leave_old_or_new_complete_sets(trained, tmp_path):
    """A loop of runs, each sent SIGINT or SIGTERM at a moment spread over the whole run (common practice, no source).

    Each command's run is cut into :data:`MOMENTS` equal parts and one signal lands at a random point
    of each part (stratified), so that few runs still reach the start, the middle and the end of
    the writing; the signal itself is drawn at random.
    """
    data, model = trained
    env = dict(os.environ, PYTHONPATH=str(ROOT), XDG_CACHE_HOME=str(tmp_path / "cache"))
    data_args = ["--text-col", "text", "--label-col", "label"]
    out_model = tmp_path / "run" / "f.skops"
    images = tmp_path / "run" / "img"
    report = tmp_path / "run" / "report.txt"
    commands = {
        "train": (["train", data, *data_args, "--out", out_model], [out_model, card_path_for(out_model)]),
        "assess": (["assess", model, data, *data_args, "--images", images, "--out", report], None),
        "vocab": (["vocab", model, "--images", images, "--out", report], None),
    }
    rng = random.Random(13)
    stopped = 0
    for name, (args, targets) in commands.items():
        started = time.monotonic()
        first = _start(args, env)
        assert first.wait(timeout=120) == 0, first.stderr.read()
        full = time.monotonic() - started
        if targets is None:
            targets = [report, *sorted(images.iterdir())]
        for part in range(MOMENTS):
            old = _state(targets)
            assert len(old) == len(targets)
            which = rng.choice([signal.SIGINT, signal.SIGTERM])
            child = _start(args, env)
            time.sleep(full * (part + rng.random()) / MOMENTS)
            child.send_signal(which)
            code = child.wait(timeout=120)
            err = child.stderr.read()
            new = _state(targets)
            assert "Traceback" not in err
            # -signal: it came before the interpreter set up its handlers, so before any output.
            assert code in (0, 128 + which, -which), (code, err)
            stopped += code != 0
            if code > 0:
                assert err.strip().count("\n") == 0 and err.startswith("error: "), err
            assert len(new) == len(targets)
            kept = [new[p][0] == old[p][0] for p in targets]
            assert all(kept) or not any(kept), (name, code, kept)
            if name == "train":
                card = json.loads(new[card_path_for(out_model)][1])
                assert card["model"]["sha256"] == hashlib.sha256(new[out_model][1]).hexdigest()
            leftovers = [p for p in tmp_path.rglob(".nbledger-*")] + [p for p in tmp_path.rglob(".*.skops.*")]
            assert leftovers == [], leftovers
    assert stopped >= 2 * MOMENTS  # most runs were really stopped part-way


def test_a_signal_wrapped_by_python_during_a_class_definition_is_still_a_stop(monkeypatch, capsys):
    """Python 3.11 wraps an exception raised in ``__set_name__`` in a RuntimeError.

    A signal landing while a plotting module defines its classes once ended as
    "internal problem" (exit 3); it must read as the stop it is.
    """
    import explain.cli as cli

    class Tripwire:
        def __set_name__(self, owner, name):
            raise cli.Interrupted(signal.SIGTERM)

    def app(**_):
        type("Defined", (), {"field": Tripwire()})

    monkeypatch.setattr(cli, "app", app)
    assert cli.run(["anything"]) == cli.EXIT_SIGTERM
    err = capsys.readouterr().err
    assert err.startswith("error: interrupted by SIGTERM") and err.count("\n") == 1


def test_a_swallowed_signal_is_sent_again_once_the_hook_has_returned():
    """A signal raised where Python swallows exceptions (a weakref callback) is re-sent, never inside the hook.

    It was once re-sent at once from a thread, and could land while the hook
    was still starting that thread: a traceback on standard error.
    """
    from types import SimpleNamespace

    import explain.cli as cli

    landed = []
    old = signal.signal(signal.SIGUSR1, lambda signum, frame: landed.append(time.monotonic()))
    try:
        swallowed = SimpleNamespace(exc_value=cli.Interrupted(signal.SIGUSR1), exc_type=cli.Interrupted, object=None)
        cli._unraisable(swallowed)
        returned = time.monotonic()
        deadline = returned + 5
        while not landed and time.monotonic() < deadline:
            time.sleep(0.005)
        assert landed and landed[0] >= returned
    finally:
        signal.signal(signal.SIGUSR1, old)
