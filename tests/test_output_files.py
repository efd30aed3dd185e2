"""Output files appear whole, with the usual permissions, or not at all."""

import os
import stat

import pytest

from explain.output_files import atomic_path, write_atomic


def test_written_whole_with_usual_permissions(tmp_path):
    old = os.umask(0o022)
    try:
        write_atomic(tmp_path / "sub" / "a.json", "{}\n")
    finally:
        os.umask(old)
    path = tmp_path / "sub" / "a.json"
    assert path.read_text() == "{}\n"
    assert stat.S_IMODE(path.stat().st_mode) == 0o644
    assert [p.name for p in path.parent.iterdir()] == ["a.json"]


def test_a_failure_leaves_neither_target_nor_temporary(tmp_path):
    target = tmp_path / "model.skops"
    with pytest.raises(RuntimeError):
        with atomic_path(target) as tmp:
            tmp.write_bytes(b"half")
            raise RuntimeError("interrupted")
    assert list(tmp_path.iterdir()) == []


def test_an_existing_file_is_kept_until_the_new_one_is_complete(tmp_path):
    target = tmp_path / "report.csv"
    target.write_text("old")
    with pytest.raises(RuntimeError):
        with atomic_path(target) as tmp:
            tmp.write_text("new, but unfinished")
            raise RuntimeError("interrupted")
    assert target.read_text() == "old"
