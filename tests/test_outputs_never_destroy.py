"""Outputs never destroy, on every engine: data set folders, pairs of outputs, staged names, temporary folders.

Common practice, no source: an output that would replace something the run did
not write is refused before any computing, and every input stays byte-identical.
"""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from clirun import nbledger
from explain.errors import NbledgerError
from explain.model.model_files import card_path_for
from explain.output_files import OutputSet, atomic_folder

ROOT = Path(__file__).resolve().parent.parent
TEXTS = ["pay the parcel fee", "fee link now", "tea at the workshop", "kids tea party", "sofa for sale", "sofa deal"]
LABELS = ["scam", "scam", "ok", "ok", "advert", "advert"]


@pytest.fixture
def trained(tmp_path, capsys):
    folder = tmp_path / "D"
    folder.mkdir()
    data = folder / "test.csv"
    data.write_text("text,label\n" + "".join(f"{t},{l}\n" for t, l in zip(TEXTS * 4, LABELS * 4)))
    model = folder / "m.skops"
    result = nbledger(capsys, "train", data, "--text-col", "text", "--label-col", "label", "--out", model,
                      "--normal-class", "ok")
    assert result.code == 0, result.err
    (folder / "notes.txt").write_text("the minutes of the garden committee")
    return folder, data, model


def _snapshot(folder: Path) -> dict:
    return {p.name: p.read_bytes() for p in folder.iterdir() if p.is_file()}


def _stages(*folders: Path) -> list:
    return [p for f in folders for p in f.iterdir() if p.name.startswith((".nbledger-", "nbledger-run-"))]


def test_a_dask_folder_holding_anything_else_is_refused_and_kept(trained, tmp_path, capsys):
    folder, data, model = trained
    before = _snapshot(folder)
    line = nbledger(capsys, "ledger", model, data, "--text-col", "text", "--engine", "dask", "--out", folder).one_error_line()
    assert "input of this run" in line or "holds" in line, line
    other = tmp_path / "other"
    other.mkdir()
    (other / "notes.txt").write_text("keep me")
    (other / "part.00000.parquet").write_bytes(b"an earlier part")
    line = nbledger(capsys, "ledger", model, data, "--text-col", "text", "--engine", "dask", "--out", other).one_error_line()
    assert "notes.txt" in line and "would not write" in line, line
    assert (other / "notes.txt").read_text() == "keep me"
    assert _snapshot(folder) == before and _stages(tmp_path, folder) == []


@pytest.mark.parametrize("kind", ["file", "fifo", "char-device", "link"])
@pytest.mark.parametrize("engine", ["dask", "local"])
def test_a_file_fifo_device_or_link_as_out_is_refused(trained, tmp_path, capsys, kind, engine):
    folder, data, model = trained
    before = _snapshot(folder)
    out = tmp_path / "out"
    if kind == "file":
        out.write_text("keep me")
    elif kind == "fifo":
        os.mkfifo(out)
    elif kind == "link":
        out.symlink_to(tmp_path / "elsewhere")
    else:
        out = Path("/dev/null")
    if engine == "local" and kind == "file":
        out = out.rename(tmp_path / "out.bin")  # a plain file is replaced by the local engine only with a known format
    line = nbledger(capsys, "ledger", model, data, "--text-col", "text", "--engine", engine, "--out", out).one_error_line()
    assert any(w in line for w in ("special file", "is a file", "symbolic link", "unknown ledger format")), line
    assert _snapshot(folder) == before and _stages(tmp_path, folder) == []
    if kind == "file":
        assert out.read_text() == "keep me"
    if kind == "char-device":
        assert Path("/dev/null").is_char_device()


def test_every_pair_of_outputs_must_differ(trained, tmp_path, capsys):
    folder, data, model = trained
    out = tmp_path / "l.csv"
    for summary in (out, tmp_path / "." / "l.csv"):
        line = nbledger(capsys, "ledger", model, data, "--text-col", "text", "--out", out, "--summary", summary).one_error_line()
        assert "both outputs" in line, line
    assert not out.exists() and _stages(tmp_path) == []
    with OutputSet() as outputs:
        outputs.dataset(tmp_path / "set")
        with pytest.raises(NbledgerError, match="both outputs"):
            outputs.file(tmp_path / "set" / "drivers.csv")


def test_a_long_output_name_and_an_unknown_suffix(trained, tmp_path, capsys):
    folder, data, model = trained
    long = tmp_path / ("l" * 246 + ".parquet")  # 254 characters: within NAME_MAX, so must work
    assert len(long.name) == 254
    result = nbledger(capsys, "ledger", model, data, "--text-col", "text", "--out", long)
    assert result.code == 0 and long.exists(), result.err
    line = nbledger(capsys, "ledger", model, data, "--text-col", "text", "--out", tmp_path / "l.txt").one_error_line()
    assert "l.txt: unknown ledger format" in line and ".nbledger" not in line
    assert _stages(tmp_path) == []


def test_no_staging_folder_is_left_when_loading_or_a_summary_is_refused(trained, tmp_path, capsys):
    folder, data, model = trained
    broken = tmp_path / "broken.skops"
    broken.write_bytes(b"PK\x03\x04 not a zip")
    nbledger(capsys, "ledger", broken, data, "--text-col", "text", "--out", tmp_path / "l.csv").one_error_line()
    nbledger(capsys, "ledger", model, data, "--text-col", "text", "--out", tmp_path / "l.csv",
             "--summary", card_path_for(model)).one_error_line()
    nbledger(capsys, "ledger", model, data, "--text-col", "text", "--out", tmp_path / "l.csv",
             "--summary", tmp_path / "d.xlsx").one_error_line()
    assert _stages(tmp_path, folder) == [] and not (tmp_path / "l.csv").exists()


def test_an_images_folder_holding_an_input_picture_is_refused_at_once(tmp_path):
    picture = tmp_path / "roc.png"
    picture.write_bytes(b"\x89PNG")
    with OutputSet(inputs=[picture]) as outputs:
        with pytest.raises(NbledgerError, match="roc.png, an input"):
            outputs.folder(tmp_path)
    assert _stages(tmp_path) == []


def test_a_data_set_folder_replaces_only_an_earlier_runs_parts(tmp_path):
    target = tmp_path / "set"
    target.mkdir()
    (target / "part.00000.parquet").write_bytes(b"old")
    (target / "part.00001.parquet").write_bytes(b"old")
    with atomic_folder(target) as staged:
        assert staged.parent.name.startswith(".nbledger-") and staged.parent.parent == tmp_path
        (staged / "part.00000.parquet").write_bytes(b"new")
    assert sorted(p.name for p in target.iterdir()) == ["part.00000.parquet"]
    assert (target / "part.00000.parquet").read_bytes() == b"new" and _stages(tmp_path) == []
    # An error inside the block: the old data set stays as it was.
    with pytest.raises(RuntimeError):
        with atomic_folder(target) as staged:
            (staged / "part.00000.parquet").write_bytes(b"newer")
            raise RuntimeError("stop")
    assert (target / "part.00000.parquet").read_bytes() == b"new" and _stages(tmp_path) == []


def test_dask_scratch_space_and_matplotlib_stay_in_the_runs_own_folder(trained, tmp_path):
    folder, data, model = trained
    scratch = tmp_path / "tmp"
    scratch.mkdir()
    unusable = tmp_path / "not-a-folder"
    unusable.write_text("")
    env = dict(os.environ, PYTHONPATH=str(ROOT), TMPDIR=str(scratch), XDG_CACHE_HOME=str(unusable),
               XDG_CONFIG_HOME=str(unusable))
    env.pop("MPLCONFIGDIR", None)
    out = tmp_path / "set"
    done = subprocess.run(
        [sys.executable, "-m", "explain", "ledger", str(model), str(data), "--text-col", "text",
         "--engine", "dask", "--workers", "1", "--out", str(out)],
        capture_output=True, text=True, env=env, timeout=300,
    )
    assert done.returncode == 0, done.stderr
    assert [p.name for p in out.iterdir()] == ["part.00000.parquet"]
    pictures = tmp_path / "pictures"
    done = subprocess.run(
        [sys.executable, "-m", "explain", "vocab", str(model), "--images", str(pictures)],
        capture_output=True, text=True, env=env, timeout=300,
    )
    assert done.returncode == 0, done.stderr
    assert "matplotlib" not in done.stderr.lower(), done.stderr
    assert list(pictures.glob("*.png"))
    assert list(scratch.iterdir()) == [] and _stages(tmp_path) == []
