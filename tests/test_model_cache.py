"""The cache of loaded models cannot be forged or made to hang or swell a run.

Each hostile entry below is ignored (one warning) and the explanation equals
scikit-learn's on the model file itself (``predict_joint_log_proba``). The tag is
HMAC-SHA-256 (RFC 2104); Python's :mod:`hmac` is the reference implementation
checked against RFC 4231's test case 2 in :func:`test_the_tag_is_rfc_2104_hmac_sha256`.
"""

from __future__ import annotations

import hashlib
import hmac
import io
import json
import os
import stat
import zipfile
from pathlib import Path

import numpy as np
import pytest
import skops.io as sio
from sklearn.feature_extraction.text import CountVectorizer
from sklearn.naive_bayes import MultinomialNB
from sklearn.pipeline import make_pipeline

from clirun import nbledger
from explain.model import model_cache
from explain.model.loading import LoadLimits, load_model
from hostile import run_measured

TEXTS = ["pay the parcel fee", "fee link now", "tea at the workshop", "kids tea party", "sofa for sale", "sofa deal"]
LABELS = ["scam", "scam", "ok", "ok", "advert", "advert"]
ROOT = Path(__file__).resolve().parent.parent
MESSAGE = "pay the fee at the tea party"


@pytest.fixture
def cache(tmp_path, monkeypatch):
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "cache"))
    return tmp_path / "cache"


def _pipeline(texts=TEXTS, labels=LABELS):
    return make_pipeline(CountVectorizer(), MultinomialNB()).fit(texts, labels)


@pytest.fixture
def model(tmp_path):
    pipeline = _pipeline()
    path = tmp_path / "m.skops"
    sio.dump(pipeline, path)
    return path, pipeline


def _log_odds_from_sklearn(pipeline, text):
    """log-odds of the two most probable classes, from scikit-learn itself."""
    jll = np.sort(pipeline[-1].predict_joint_log_proba(pipeline[:-1].transform([text]))[0])[::-1]
    return jll[0] - jll[1]


def _log_odds(loaded, text):
    """The same from the loaded view: jll = b + x W^T (the ModelView's definition)."""
    x = loaded.featurizer.transform([text])
    jll = np.sort(np.asarray(x @ loaded.view.weights.T).ravel() + loaded.view.baseline)[::-1]
    return jll[0] - jll[1]


def test_the_tag_is_rfc_2104_hmac_sha256():
    # RFC 4231, test case 2 (key "Jefe"): HMAC-SHA-256 of "what do ya want for nothing?".
    assert hmac.new(b"Jefe", b"what do ya want for nothing?", hashlib.sha256).hexdigest() == (
        "5bdcc146bf60754e6a042426089575c75a003f089d2739839dec58b964ec3843"
    )
    # Our tag is that function over a label and length-prefixed fields.
    key = b"k" * 32
    expected = hmac.new(key, b"L" + (3).to_bytes(8, "big") + b"abc", hashlib.sha256).digest()
    assert model_cache._tag(key, b"L", [b"abc"]) == expected


def test_the_secret_is_private_and_made_once(cache):
    first = model_cache.secret()
    info = os.lstat(model_cache.secret_path())
    assert stat.S_ISREG(info.st_mode) and stat.S_IMODE(info.st_mode) == 0o600 and len(first) == 32
    assert model_cache.secret() == first
    os.chmod(model_cache.secret_path(), 0o644)
    with pytest.raises(model_cache.CacheProblem, match="others"):
        model_cache.secret()


def test_a_cached_load_says_so_and_equals_the_first(cache, model):
    path, pipeline = model
    fresh = load_model(path)
    assert not fresh.from_cache
    again = load_model(path)
    assert again.from_cache
    assert np.array_equal(again.view.weights, fresh.view.weights)
    assert _log_odds(again, MESSAGE) == pytest.approx(_log_odds_from_sklearn(pipeline, MESSAGE), rel=1e-12)


def _entry_bytes(key):
    return model_cache.entry_path(key).read_bytes()


def _repack(raw: bytes, change, key_bytes: bytes | None = None, fields=None) -> bytes:
    """The entry ``raw`` with its archive changed by ``change(arrays, settings)``; re-tagged when a key is given."""
    body = raw[len(model_cache.MAGIC) + 32:]
    with np.load(io.BytesIO(body), allow_pickle=False) as data:
        arrays = {name: data[name] for name in data.files}
    change(arrays)
    buffer = io.BytesIO()
    np.savez(buffer, **arrays)
    new = buffer.getvalue()
    tag = raw[len(model_cache.MAGIC):len(model_cache.MAGIC) + 32]
    if key_bytes is not None:
        tag = model_cache._tag(key_bytes, b"nbledger.entry/2", fields, io.BytesIO(new).read)
    return model_cache.MAGIC + tag + new


def _check_ignored(path, pipeline, seen):
    loaded = load_model(path, on_warning=seen.append)
    assert not loaded.from_cache
    assert any("not used" in w for w in seen), seen
    assert _log_odds(loaded, MESSAGE) == pytest.approx(_log_odds_from_sklearn(pipeline, MESSAGE), rel=1e-12)


def test_changed_weights_are_ignored_even_with_a_fresh_plain_hash(cache, model):
    path, pipeline = model
    key = load_model(path).sha256

    def change(arrays):
        arrays["baseline"] = arrays["baseline"] + 30.0  # the priors an attacker wants

    model_cache.entry_path(key).write_bytes(_repack(_entry_bytes(key), change))
    seen = []
    _check_ignored(path, pipeline, seen)
    # A tag made with any key but the user's own is refused too.
    fields = model_cache._entry_fields(key, path.stat().st_size)
    model_cache.entry_path(key).write_bytes(_repack(_entry_bytes(key), change, b"x" * 32, fields))
    seen.clear()
    _check_ignored(path, pipeline, seen)


def test_another_models_entry_renamed_is_ignored(cache, model, tmp_path):
    path, pipeline = model
    other = tmp_path / "other.skops"
    sio.dump(_pipeline(TEXTS, ["ok", "scam", "scam", "advert", "ok", "scam"]), other)
    key, other_key = load_model(path).sha256, load_model(other).sha256
    os.replace(model_cache.entry_path(other_key), model_cache.entry_path(key))
    seen = []
    _check_ignored(path, pipeline, seen)


def test_an_edited_digest_memo_is_ignored(cache, model, tmp_path):
    path, pipeline = model
    other = tmp_path / "other.skops"
    sio.dump(_pipeline(TEXTS, ["ok", "scam", "scam", "advert", "ok", "scam"]), other)
    load_model(path), load_model(other)
    other_sha = hashlib.sha256(other.read_bytes()).hexdigest()
    memo = cache / "nbledger" / "digests" / f"{hashlib.sha256(os.fsencode(os.path.realpath(path))).hexdigest()}.json"
    record = json.loads(memo.read_text())
    record["sha256"] = other_sha  # point the model file at the other model's explanation
    memo.write_text(json.dumps(record))
    seen = []
    loaded = load_model(path, on_warning=seen.append)
    assert loaded.sha256 == hashlib.sha256(path.read_bytes()).hexdigest()
    assert any("remembered SHA-256" in w for w in seen), seen
    assert _log_odds(loaded, MESSAGE) == pytest.approx(_log_odds_from_sklearn(pipeline, MESSAGE), rel=1e-12)
    memo.write_text("{not json")
    seen.clear()
    assert load_model(path, on_warning=seen.append).sha256 == loaded.sha256 and seen


def test_an_archive_with_an_extra_large_member_is_refused_before_inflating(cache, model, monkeypatch):
    # Tagged with the user's own key (as if the key had leaked): the member check still stops it.
    path, pipeline = model
    key = load_model(path).sha256
    raw = _entry_bytes(key)
    body = raw[len(model_cache.MAGIC) + 32:]
    buffer = io.BytesIO(body)
    with zipfile.ZipFile(buffer, "a", compression=zipfile.ZIP_DEFLATED) as archive:
        with archive.open("padding.npy", "w", force_zip64=True) as stream:
            block = bytes(1 << 20)
            for _ in range(3 * 1024):  # 3 GiB of zeros, a few MB on disk
                stream.write(block)
    new = buffer.getvalue()
    assert len(new) < 16 << 20
    fields = model_cache._entry_fields(key, path.stat().st_size)
    tag = model_cache._tag(model_cache.secret(), b"nbledger.entry/2", fields, io.BytesIO(new).read)
    model_cache.entry_path(key).write_bytes(model_cache.MAGIC + tag + new)
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    code, err, peak = run_measured(["why", path, MESSAGE, "--max-model-memory", "1G"], env)
    assert code == 0 and "not used" in err and "Traceback" not in err, err
    assert peak < 1 << 30, peak


@pytest.mark.parametrize("kind", ["dev-zero", "fifo", "garbage", "folder"])
def test_special_and_malformed_entries_neither_hang_nor_swell(cache, model, kind):
    path, pipeline = model
    key = load_model(path).sha256
    entry = model_cache.entry_path(key)
    entry.unlink()
    if kind == "dev-zero":
        entry.symlink_to("/dev/zero")
    elif kind == "fifo":
        os.mkfifo(entry)
    elif kind == "garbage":
        entry.write_bytes(model_cache.MAGIC + b"{ not json" * 10)
    else:
        entry.mkdir()
    memo = cache / "nbledger" / "digests"
    for note in memo.iterdir():
        note.unlink()
        if kind == "dev-zero":
            note.symlink_to("/dev/zero")
        elif kind == "fifo":
            os.mkfifo(note)
        else:
            note.write_text('{"identity": [1, 2')
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    code, err, peak = run_measured(["why", path, MESSAGE, "--format", "json"], env, timeout=60)
    assert code == 0 and "Traceback" not in err and "internal problem" not in err, err
    assert "not used" in err
    assert peak < 1 << 30


def test_the_record_says_whether_the_view_came_from_the_cache(cache, model, capsys):
    path, _ = model
    first = json.loads(nbledger(capsys, "why", path, MESSAGE, "--format", "json").out)
    second = json.loads(nbledger(capsys, "why", path, MESSAGE, "--format", "json").out)
    assert first["model"]["from_cache"] is False and second["model"]["from_cache"] is True
