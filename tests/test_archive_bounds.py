"""Skops archives are bounded before and while they inflate: schema ceiling, ratio, real size, part count.

Peak memory of every process is ``resource.getrusage(RUSAGE_CHILDREN)`` after a fresh
run (POSIX getrusage); the zip structures follow PKWARE's APPNOTE.TXT. Common practice,
no source: each bomb is refused in seconds and under 1 GB.
"""

from __future__ import annotations

import os
import shutil
import time
import zipfile
from pathlib import Path

import pytest
import skops.io as sio
from sklearn.feature_extraction.text import CountVectorizer
from sklearn.naive_bayes import MultinomialNB
from sklearn.pipeline import make_pipeline

from explain.model.model_files import SCHEMA_LIMIT
from hostile import lying_zip, many_part_zip, run_measured, skops_bomb

ROOT = Path(__file__).resolve().parent.parent
TEXTS = ["pay the parcel fee", "fee link now", "tea at the workshop", "kids tea party"]
LABELS = ["scam", "scam", "ok", "ok"]
GIB = 1 << 30


@pytest.fixture
def good(tmp_path):
    path = tmp_path / "good.skops"
    sio.dump(make_pipeline(CountVectorizer(), MultinomialNB()).fit(TEXTS, LABELS), path)
    return path


def _refused(model, tmp_path, expected):
    env = dict(os.environ, PYTHONPATH=str(ROOT), XDG_CACHE_HOME=str(tmp_path / "cache"))
    started = time.monotonic()
    code, err, peak = run_measured(["why", model, "fee", "--no-cache"], env, timeout=120)
    seconds = time.monotonic() - started
    print(f"\n{model.name}: exit {code} in {seconds:.1f} s, peak {peak / 2**20:.0f} MiB: {err.strip()[:150]}")
    assert code == 2 and expected in err and "Traceback" not in err, err
    assert peak < GIB and seconds < 60


def test_a_one_gib_schema_is_refused_unopened(good, tmp_path):
    bomb = skops_bomb(good, tmp_path / "schema1g.skops", inflated_mib=1024)
    assert bomb.stat().st_size < 8 << 20
    with zipfile.ZipFile(bomb) as archive:
        assert archive.getinfo("schema.json").file_size > SCHEMA_LIMIT
    _refused(bomb, tmp_path, "schema.json declares")


def test_a_four_gib_schema_is_refused_unopened(good, tmp_path):
    bomb = skops_bomb(good, tmp_path / "schema4g.skops", inflated_mib=4096)
    _refused(bomb, tmp_path, "schema.json declares")


def test_a_part_that_inflates_past_its_declared_size_is_stopped_within_a_step(good, tmp_path):
    liar = lying_zip(good, tmp_path / "liar.skops", declared=2_000_000, inflated_mib=600)
    with zipfile.ZipFile(liar) as archive:
        assert archive.getinfo("schema.json").file_size == 2_000_000
    _refused(liar, tmp_path, "bytes it declares")


def test_two_million_parts_are_refused_before_the_directory_is_read(tmp_path):
    many = many_part_zip(tmp_path / "many.skops", 2_000_000)
    _refused(many, tmp_path, "2,000,000 parts")


def test_a_part_beyond_the_ratio_deflate_can_reach_is_refused_unopened(good, tmp_path, capsys):
    """bzip2 (a zip method, APPNOTE.TXT 4.4.5) packs zeros far beyond deflate's limit of about 1032:1
    (RFC 1951: at most 258 bytes per match of at least 2 bits); no array written by skops gets there."""
    from clirun import nbledger
    from explain.errors import NbledgerError
    from explain.model.model_files import MAX_RATIO, check_archive

    bomb = tmp_path / "ratio.skops"
    shutil.copyfile(good, bomb)
    with zipfile.ZipFile(bomb, "a", compression=zipfile.ZIP_BZIP2) as out:  # 8 MiB of zeros in a few dozen bytes
        with out.open("zeros.npy", "w") as stream:
            for _ in range(8):
                stream.write(bytes(1 << 20))
    with zipfile.ZipFile(bomb) as archive:
        info = archive.getinfo("zeros.npy")
        assert info.file_size > MAX_RATIO * info.compress_size  # the bomb is what it claims
    with pytest.raises(NbledgerError, match=f"more than {MAX_RATIO}:1"):
        check_archive(bomb, 8 << 30)
    line = nbledger(capsys, "why", bomb, "fee", "--no-cache").one_error_line()
    assert f"more than {MAX_RATIO}:1" in line and "it was not opened" in line, line
    # The same zeros deflated stay within the bound: a sound model's arrays are never refused.
    sound = tmp_path / "sound.skops"
    with zipfile.ZipFile(bomb) as source, zipfile.ZipFile(sound, "w", compression=zipfile.ZIP_DEFLATED,
                                                          compresslevel=9) as out:
        for info in source.infolist():
            out.writestr(info.filename, source.read(info))
    with zipfile.ZipFile(sound) as archive:
        info = archive.getinfo("zeros.npy")
        assert info.file_size < MAX_RATIO * info.compress_size, info.file_size / info.compress_size
    check_archive(sound, 8 << 30)
