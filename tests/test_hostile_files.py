"""Hostile model and data files: bombs, limits, the separate loading process, the plain form and its cache."""

from __future__ import annotations

import gzip

import json
import os
import sys
from pathlib import Path

import numpy as np
import pytest
import skops.io as sio
from hypothesis import assume, given, settings, strategies as st
from sklearn.feature_extraction.text import CountVectorizer, TfidfTransformer, TfidfVectorizer
from sklearn.naive_bayes import BernoulliNB, ComplementNB, MultinomialNB
from sklearn.pipeline import Pipeline, make_pipeline

from clirun import nbledger
from corpora import WORDS, loaded
from explain.errors import NbledgerError
from explain.model import model_cache, plain_form
from explain.model.loading import LoadLimits, load_model
from explain.model.model_files import card_path_for
from hostile import gzip_bomb, run_measured, skops_bomb, split_words

TEXTS = ["pay the parcel fee", "fee link now", "tea at the workshop", "kids tea party", "sofa for sale", "sofa deal"]
LABELS = ["scam", "scam", "ok", "ok", "advert", "advert"]
ROOT = Path(__file__).resolve().parent.parent


def _env(tmp_path):
    return dict(os.environ, PYTHONPATH=str(ROOT), XDG_CACHE_HOME=str(tmp_path / "cache"))


@pytest.fixture
def good_model(tmp_path):
    path = tmp_path / "good.skops"
    sio.dump(make_pipeline(CountVectorizer(), MultinomialNB()).fit(TEXTS, LABELS), path)
    return path


# --- bombs -----------------------------------------------------------------

def test_a_zip_bomb_declaring_too_much_is_refused_unopened(good_model, tmp_path):
    bomb = skops_bomb(good_model, tmp_path / "bomb.skops", inflated_mib=300)
    assert bomb.stat().st_size < 1 << 20  # small on disk
    code, err, peak = run_measured(["why", bomb, "fee", "--max-model-memory", "256M"], _env(tmp_path))
    assert code == 2 and "--max-model-memory" in err and "not opened" in err and "Traceback" not in err
    # Against the same command on the good model (its imports are most of any run's memory): the 300 MiB the
    # bomb declares would show far above it had anything been inflated.
    _, _, usual = run_measured(["why", good_model, "fee", "--no-cache"], _env(tmp_path))
    print(f"\npeak memory: refused bomb {peak / 2**20:.0f} MiB, good model {usual / 2**20:.0f} MiB")
    assert peak < usual + (64 << 20)


def test_a_zip_bomb_within_the_declared_limit_hits_the_memory_limit(good_model, tmp_path):
    # Declares 60 MiB (under the 64 MiB schema ceiling and the limit) but its JSON list of zeros needs
    # far more once parsed: the loading process meets its address-space limit.
    bomb = skops_bomb(good_model, tmp_path / "bomb.skops", inflated_mib=60)
    code, err, peak = run_measured(["why", bomb, "fee", "--max-model-memory", "700M"], _env(tmp_path))
    assert code == 2 and err.count("\n") == 1 and "--max-model-memory" in err, err
    print(f"\npeak memory of the command and its loading process: {peak / 2**20:.0f} MiB (limit 700 MiB)")
    assert peak < 1 << 30


def test_a_gzip_bomb_is_stopped_at_the_data_limit(good_model, tmp_path):
    bomb = gzip_bomb(tmp_path / "bomb.csv.gz", inflated_mib=256)
    assert bomb.stat().st_size < 1 << 20
    args = ["assess", good_model, bomb, "--text-col", "text", "--label-col", "label", "--max-data-bytes", "32M"]
    # Its one endless message meets the row bound first (--max-bytes, 1 MiB by default) ...
    code, err, _ = run_measured(args, _env(tmp_path))
    assert code == 2 and "bomb.csv.gz: a row is longer than 1,114,112 bytes (--max-bytes" in err and err.count("\n") == 1, err
    # ... and with messages up to 40 MiB allowed, the 32 MiB data limit stops it.
    code, err, peak = run_measured([*args, "--max-bytes", str(40 << 20)], _env(tmp_path))
    assert code == 2 and "bomb.csv.gz holds more than 33,554,432 bytes once decompressed (--max-data-bytes)" in err, err
    assert err.count("\n") == 1, err
    small = tmp_path / "small.csv.gz"
    small.write_bytes(gzip.compress(b"text,label\nfee now,scam\ntea at four,ok\n"))
    _, _, usual = run_measured(
        ["assess", good_model, small, "--text-col", "text", "--label-col", "label", "--max-data-bytes", "32M"],
        _env(tmp_path),
    )
    print(f"\npeak memory reading a 256 MiB gzip bomb with a 32 MiB limit: {peak / 2**20:.0f} MiB "
          f"(a two-row file: {usual / 2**20:.0f} MiB)")
    # At most the 32 MiB the limit lets through (held twice while joined) above an ordinary run.
    assert peak < usual + (96 << 20)


def test_a_data_message_over_max_bytes_is_refused_naming_its_row(good_model, tmp_path, capsys):
    data = tmp_path / "d.csv"
    data.write_text("text,label\n" + "fee now,scam\n" + ("x" * 5000) + ",ok\n" + ("y" * 6000) + ",ok\n")
    line = nbledger(capsys, "assess", good_model, data, "--text-col", "text", "--label-col", "label",
                    "--max-bytes", "4096").one_error_line()
    assert "d.csv: data row 2 holds a message longer than 4,096 bytes (--max-bytes)" in line


def test_loading_that_takes_too_long_is_stopped(good_model):
    with pytest.raises(NbledgerError, match="--load-timeout"):
        load_model(good_model, limits=LoadLimits(timeout=0.01, cache=False))


# --- plain form: the rebuilt text step is the original -----------------------

vectorizer_settings = st.fixed_dictionaries({
    "analyzer": st.sampled_from(["word", "char", "char_wb"]),
    "ngram_range": st.sampled_from([(1, 1), (1, 2), (2, 3)]),
    "lowercase": st.booleans(),
    "strip_accents": st.sampled_from([None, "ascii", "unicode"]),
    "binary": st.booleans(),
    "stop_words": st.sampled_from([None, "english", ["the", "a", "at"]]),
    "token_pattern": st.sampled_from([r"(?u)\b\w\w+\b", r"(?u)\b\w+\b", r"[^\s]+"]),
    "min_df": st.sampled_from([1, 2]),
    "max_df": st.sampled_from([1.0, 0.9]),
    "max_features": st.sampled_from([None, 15]),
    "dtype": st.sampled_from([np.int64, np.float32, np.float64]),
    "vocabulary": st.sampled_from([None, sorted(set(WORDS))]),
})
tfidf_settings = st.fixed_dictionaries({
    "norm": st.sampled_from(["l1", "l2", None]),
    "use_idf": st.booleans(),
    "smooth_idf": st.booleans(),
    "sublinear_tf": st.booleans(),
})
texts = st.lists(
    st.lists(st.sampled_from(WORDS + ["Café", "DÉJÀ", "£2.49", "x_y", "ÆON", "ß", "\u202e", "tab\t"]), max_size=12).map(" ".join),
    min_size=1, max_size=6,
)


@settings(max_examples=60, deadline=None)
@given(vectorizer_settings, tfidf_settings, st.sampled_from(["count", "tfidf", "count+tfidf"]),
       st.sampled_from([MultinomialNB, ComplementNB, BernoulliNB]), texts)
def test_rebuilt_text_step_gives_identical_features(vec_options, tfidf_options, kind, classifier, probes):
    corpus = [t + " " + w for t in TEXTS * 2 for w in ("harbour", "Café déjà", "FEE")]
    labels = LABELS * 6
    if kind == "tfidf":
        steps = [TfidfVectorizer(**vec_options, **tfidf_options)]
    elif kind == "count+tfidf":
        steps = [CountVectorizer(**vec_options), TfidfTransformer(**tfidf_options)]
    else:
        steps = [CountVectorizer(**vec_options)]
    pipeline = Pipeline([(f"s{i}", s) for i, s in enumerate([*steps, classifier()])])
    try:
        pipeline.fit(corpus, labels)
    except ValueError:  # e.g. a fixed vocabulary with unsmoothed idf: infinite weights, no model
        assume(False)
    original = loaded(pipeline)
    idf = getattr(original.featurizer.tfidf, "idf_", np.zeros(1))
    if not np.isfinite(idf).all():  # unsmoothed idf of a token no document has: refused
        with pytest.raises(NbledgerError, match="idf"):
            plain_form.to_plain(original.featurizer, original.view)
        return
    arrays, options = plain_form.to_plain(original.featurizer, original.view)
    options = json.loads(json.dumps(options, allow_nan=False))  # it travels as strict JSON
    featurizer, view = plain_form.rebuild(arrays, options)
    expected = pipeline[:-1].transform(probes)
    got = featurizer.transform(probes)
    assert np.array_equal(got.indices, expected.indices) and np.array_equal(got.indptr, expected.indptr)
    assert np.array_equal(got.data, expected.data)
    assert list(view.tokens) == list(original.view.tokens) and list(view.classes) == list(original.view.classes)
    for name in ("weights", "baseline", "absence", "feature_count", "class_count"):
        assert np.array_equal(getattr(view, name), getattr(original.view, name))
    assert view.feature_kind == original.view.feature_kind and view.binarize == original.view.binarize


def test_a_rebuild_that_does_not_reproduce_the_probe_is_refused():
    pipeline = make_pipeline(CountVectorizer(), MultinomialNB()).fit(TEXTS, LABELS)
    original = loaded(pipeline)
    arrays, options = plain_form.to_plain(original.featurizer, original.view)
    options["params"]["lowercase"] = not options["params"]["lowercase"]
    with pytest.raises(NbledgerError, match="does not reproduce"):
        plain_form.rebuild(arrays, options)
    options["params"]["analyzer"] = "nonsense"
    with pytest.raises(NbledgerError, match="not usable"):
        plain_form.rebuild(arrays, options)


@given(st.lists(st.text(max_size=6), max_size=8))
def test_strings_travel_exactly(values):
    arrays = plain_form._pack_strings(values, "t")
    assert list(plain_form._unpack_strings(arrays, "t")) == values


def test_code_bearing_text_steps_need_trust(tmp_path):
    pipeline = make_pipeline(CountVectorizer(analyzer=split_words), MultinomialNB()).fit(TEXTS, LABELS)
    path = tmp_path / "custom.skops"
    sio.dump(pipeline, path)
    with pytest.raises(NbledgerError, match="--trust"):
        load_model(path, limits=LoadLimits(cache=False))
    untrusted = sio.get_untrusted_types(file=path)
    model = load_model(path, trust=tuple(untrusted), limits=LoadLimits(cache=False))
    assert model.view.n_features == len(pipeline[0].vocabulary_)


# --- the cache -------------------------------------------------------------------

def test_a_cached_load_gives_the_same_view_and_a_foreign_entry_is_ignored(good_model, monkeypatch, tmp_path):
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "cache"))
    fresh = load_model(good_model)
    entries = {p.name for p in model_cache.cache_folder().iterdir()}
    assert entries == {f"{fresh.sha256}.entry"}
    cached = load_model(good_model)
    assert cached.from_cache and not fresh.from_cache
    for name in ("weights", "baseline", "prior", "absence", "feature_count", "class_count", "tokens", "classes"):
        assert np.array_equal(getattr(cached.view, name), getattr(fresh.view, name))
    assert np.array_equal(cached.featurizer.transform(TEXTS).toarray(), fresh.featurizer.transform(TEXTS).toarray())
    # An entry whose tag does not match is ignored (and rebuilt); tests/test_model_cache.py has the forgeries.
    entry = model_cache.entry_path(fresh.sha256)
    raw = bytearray(entry.read_bytes())
    raw[len(model_cache.MAGIC)] ^= 1
    entry.write_bytes(bytes(raw))
    size, limit = good_model.stat().st_size, 1 << 30
    assert model_cache.read(fresh.sha256, fresh.sha256, size, limit) is None
    again = load_model(good_model)
    assert np.array_equal(again.view.weights, fresh.view.weights) and not again.from_cache
    assert model_cache.read(fresh.sha256, fresh.sha256, size, limit) is not None  # rewritten


def test_a_remembered_digest_is_used_only_for_the_same_unchanged_file(good_model, tmp_path, monkeypatch):
    import hashlib

    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "cache"))
    truth = hashlib.sha256(good_model.read_bytes()).hexdigest()
    assert model_cache.file_sha256(good_model) == truth == model_cache.file_sha256(good_model)
    with open(good_model, "ab") as handle:  # same name, new bytes
        handle.write(b"\0")
    changed = hashlib.sha256(good_model.read_bytes()).hexdigest()
    assert model_cache.file_sha256(good_model) == changed != truth


def test_the_cache_never_unpickles(tmp_path, monkeypatch):
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "cache"))
    folder = model_cache.cache_folder()
    folder.mkdir(parents=True)
    key = "a" * 64
    # Even correctly tagged, an archive holding a pickled object array is refused (allow_pickle=False).
    import io

    buffer = io.BytesIO()
    np.savez(buffer, weights=np.array([object()], dtype=object), allow_pickle=True)
    body = buffer.getvalue()
    tag = model_cache._tag(model_cache.secret(), b"nbledger.entry/2", model_cache._entry_fields(key, 1), io.BytesIO(body).read)
    model_cache.entry_path(key).write_bytes(model_cache.MAGIC + tag + body)
    seen = []
    assert model_cache.read(key, key, 1, 1 << 30, seen.append) is None and seen


# --- numbers that cannot be trusted ----------------------------------------------

def test_nan_weights_are_refused(tmp_path, capsys):
    pipeline = make_pipeline(CountVectorizer(), MultinomialNB()).fit(TEXTS, LABELS)
    pipeline[-1].feature_log_prob_[0, 0] = np.nan
    path = tmp_path / "nan.skops"
    sio.dump(pipeline, path)
    line = nbledger(capsys, "why", path, "fee").one_error_line()
    assert "not all finite" in line and "1 not a number" in line


def test_train_refuses_alpha_zero(tmp_path, capsys):
    data = tmp_path / "t.csv"
    data.write_text("text,label\n" + "".join(f"{t},{l}\n" for t, l in zip(TEXTS, LABELS)))
    line = nbledger(capsys, "train", data, "--text-col", "text", "--label-col", "label",
                    "--out", tmp_path / "m.skops", "--alpha", "0").one_error_line()
    assert "--alpha must be a number above 0" in line and not (tmp_path / "m.skops").exists()


def _strict(text: str):
    def refuse(name):
        raise ValueError(f"{name} in JSON output")

    return json.loads(text, parse_constant=refuse)


def test_every_json_output_is_strict_for_extreme_weights(tmp_path, capsys):
    pipeline = make_pipeline(CountVectorizer(), MultinomialNB(alpha=1e-300)).fit(TEXTS, LABELS)
    path = tmp_path / "extreme.skops"
    sio.dump(pipeline, path)
    data = tmp_path / "d.csv"
    data.write_text("text,label\n" + "".join(f"{t},{l}\n" for t, l in zip(TEXTS * 2, LABELS * 2)))
    runs = [
        ("why", path, "pay the fee for the sofa", "--format", "json"),
        ("vocab", path, "--format", "json", "--data", data, "--text-col", "text", "--label-col", "label"),
        ("assess", path, data, "--text-col", "text", "--label-col", "label", "--format", "json"),
    ]
    for args in runs:
        result = nbledger(capsys, *args)
        assert result.code == 0, result.err
        assert isinstance(_strict(result.out), dict)
        assert "Traceback" not in result.err and "RuntimeWarning" not in result.err.replace("warning: RuntimeWarning", "")


def test_library_warnings_become_one_line_of_ours(capsys):
    import warnings

    from explain.cli import app, run

    @app.command("warn-probe", hidden=True)
    def _probe():
        np.log(np.zeros(1))  # numpy: divide by zero
        warnings.warn("from a library\nsecond line", UserWarning)

    try:
        result = nbledger(capsys, "warn-probe")
    finally:
        app.registered_commands.pop()
    lines = result.err.splitlines()
    assert result.code == 0 and lines == [
        "warning: RuntimeWarning: divide by zero encountered in log",
        "warning: UserWarning: from a library",
    ]


def test_why_refuses_a_one_class_model(tmp_path, capsys):
    vec = CountVectorizer().fit(TEXTS)
    clf = MultinomialNB().fit(vec.transform(TEXTS), ["ok"] * len(TEXTS))
    path = tmp_path / "one.skops"
    sio.dump(Pipeline([("v", vec), ("nb", clf)]), path)
    line = nbledger(capsys, "why", path, "fee").one_error_line()
    assert "one class (ok)" in line and "nothing to explain" in line


def test_card_is_named_from_the_whole_model_name():
    assert card_path_for(Path("m.v1.skops")) == Path("m.v1.card.json")
    assert card_path_for(Path("m.v2.skops")) != card_path_for(Path("m.v1.skops"))
    assert card_path_for(Path("demo_out/tideway.skops")) == Path("demo_out/tideway.card.json")
