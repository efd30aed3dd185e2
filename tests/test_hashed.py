"""Hashed features (HashingVectorizer) against scikit-learn itself."""

from __future__ import annotations

import numpy as np
import pytest
import skops.io as sio
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from sklearn.feature_extraction.text import HashingVectorizer, TfidfTransformer
from sklearn.pipeline import Pipeline

from corpora import VARIANT_TYPES, WORDS, messages
from explain.analysis.evidence import explain_message
from explain.errors import NbledgerError
from explain.model import plain_form
from explain.model.featurizer import Featurizer
from explain.model.loading import LoadedModel, load_model
from explain.model.model_view import view_of

PROPERTY = settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.too_slow])


def through_plain_form(pipeline) -> LoadedModel:
    """The model as the loading process hands it back: plain form, then rebuilt and probe-checked."""
    *text_steps, clf = [s for _, s in pipeline.steps]
    featurizer = Featurizer(*text_steps)
    view = view_of(clf, featurizer.tokens, featurizer.feature_kind)
    featurizer, view = plain_form.rebuild(*plain_form.to_plain(featurizer, view, clf))
    return LoadedModel(view, featurizer, path=None, sha256="", file_format="memory")


@st.composite
def hashed_pipelines(draw):
    """A fitted random HashingVectorizer pipeline (every variant, norm, binary, n-gram range, TF-IDF step)."""
    hasher = HashingVectorizer(
        n_features=draw(st.sampled_from([4, 16, 2**10])),
        alternate_sign=False,
        binary=draw(st.booleans()),
        norm=draw(st.sampled_from([None, "l1", "l2"])),
        ngram_range=draw(st.sampled_from([(1, 1), (1, 2), (2, 2)])),
        analyzer=draw(st.sampled_from(["word", "char_wb"])),
    )
    steps = [("v", hasher)]
    if draw(st.booleans()):
        # log(x) + 1 of a normalised value below 1/e is negative, which naive Bayes refuses
        sublinear = hasher.norm is None and draw(st.booleans())
        steps.append(("t", TfidfTransformer(sublinear_tf=sublinear)))
    variant = draw(st.sampled_from(sorted(VARIANT_TYPES)))
    docs = st.lists(st.sampled_from([w for w in WORDS if len(w) > 1]), min_size=2, max_size=8).map(" ".join)
    texts, labels = [], []
    for c in ["ok", "scam", "advert"][: draw(st.sampled_from([2, 3]))]:
        for text in draw(st.lists(docs, min_size=1, max_size=5)):
            texts.append(text)
            labels.append(c)
    return Pipeline(steps + [("nb", VARIANT_TYPES[variant](alpha=draw(st.sampled_from([1.0, 0.1]))))]).fit(texts, labels)


def rel_close(a, b, tol=1e-9):
    return abs(a - b) <= tol * max(1.0, abs(a), abs(b))


# Reference: scikit-learn's predict_joint_log_proba on the pipeline's own features (scikit-learn 1.x docs).
@PROPERTY
@given(pipeline=hashed_pipelines(), text=messages.filter(lambda t: len(t.split()) >= 2))
def test_hashed_evidence_matches_sklearn_joint_log_likelihood(pipeline, text):
    model = through_plain_form(pipeline)
    X = pipeline[:-1].transform([text])
    jll = pipeline[-1].predict_joint_log_proba(X)[0]
    e = explain_message(model, text)
    assert e.predicted == pipeline.predict([text])[0]
    np.testing.assert_allclose(e.jll, jll, rtol=1e-9)
    a, b = e.classes.index(e.predicted), e.classes.index(e.runner_up)
    assert rel_close(e.log_odds, jll[a] - jll[b])
    # weigh() reproduces the features from counts, so removals re-score exactly
    counts = model.featurizer.counts([text])
    np.testing.assert_allclose(model.featurizer.weigh(counts).toarray(), X.toarray(), rtol=1e-12, atol=1e-15)


@PROPERTY
@given(pipeline=hashed_pipelines(), texts=st.lists(messages, min_size=1, max_size=4))
def test_recovered_names_hash_to_the_column_reported(pipeline, texts):
    featurizer = through_plain_form(pipeline).featurizer
    hasher = pipeline[0]
    # scikit-learn's own HashingVectorizer decides each token's column: one token alone, no normalisation.
    reference = HashingVectorizer(**hasher.get_params()).set_params(analyzer=lambda doc: doc, norm=None)
    for column, tokens in featurizer.hashed_names(texts).items():
        for token in tokens:
            assert reference.transform([[token]]).indices.tolist() == [column]


def test_a_collision_is_reported_with_both_tokens():
    pipeline = Pipeline([("v", HashingVectorizer(n_features=2, alternate_sign=False)),
                         ("nb", VARIANT_TYPES["multinomial"]())]).fit(["prize fee", "tea harbour"], ["scam", "ok"])
    names = through_plain_form(pipeline).featurizer.hashed_names(["prize fee tea harbour"])
    assert sum(len(t) for t in names.values()) == 4
    assert any(len(t) >= 2 for t in names.values())


def test_alternate_sign_is_refused_in_one_line():
    pipeline = Pipeline([("v", HashingVectorizer(n_features=16)), ("nb", VARIANT_TYPES["bernoulli"]())])
    pipeline.fit(["prize fee", "tea harbour"], ["scam", "ok"])
    with pytest.raises(NbledgerError) as err:
        Featurizer(pipeline[0])
    assert "alternate_sign" in str(err.value) and "non-negative" in str(err.value)
    assert "\n" not in str(err.value)


@pytest.mark.parametrize("with_tfidf", [False, True])
def test_hashed_model_file_loads_through_the_child_process(tmp_path, with_tfidf):
    steps = [("v", HashingVectorizer(n_features=2**12, alternate_sign=False, ngram_range=(1, 2)))]
    if with_tfidf:
        steps.append(("t", TfidfTransformer()))
    texts = ["win a prize now", "tea at the harbour", "claim the prize fee", "kids club tea"]
    labels = ["scam", "ok", "scam", "ok"]
    pipeline = Pipeline(steps + [("nb", VARIANT_TYPES["complement"]())]).fit(texts, labels)
    path = tmp_path / "hashed.skops"
    sio.dump(pipeline, path)
    model = load_model(path)
    assert model.view.tokens[7] == "column 7"
    X = pipeline[:-1].transform(texts)
    np.testing.assert_allclose(model.view.joint_log_likelihood(model.featurizer.transform(texts)),
                               pipeline[-1].predict_joint_log_proba(X), rtol=1e-9)


# --- the command line -------------------------------------------------------

from clirun import nbledger  # noqa: E402

TEXTS = ["win a prize now claim the fee", "tea at the harbour", "claim the prize fee link",
         "kids club tea at the harbourmaster office", "parcel courier fee link", "sofa for sale"]
LABELS = ["scam", "ok", "scam", "ok", "scam", "ok"]


def _hashed_file(tmp_path, **options):
    hasher = HashingVectorizer(**{"n_features": 8, "alternate_sign": False, **options})
    pipeline = Pipeline([("v", hasher), ("nb", VARIANT_TYPES["multinomial"]())]).fit(TEXTS, LABELS)
    path = tmp_path / "hashed.skops"
    sio.dump(pipeline, path)
    return path, pipeline


def test_cli_refuses_alternate_sign_in_one_line(tmp_path, capsys):
    hasher = HashingVectorizer(n_features=8)  # alternate_sign=True by default
    pipeline = Pipeline([("v", hasher), ("nb", VARIANT_TYPES["bernoulli"]())]).fit(TEXTS, LABELS)
    path = tmp_path / "signed.skops"
    sio.dump(pipeline, path)
    line = nbledger(capsys, "why", path, "claim the prize").one_error_line()
    assert "alternate_sign" in line and "non-negative" in line


def test_cli_why_reports_a_collision_with_both_tokens(tmp_path, capsys):
    path, pipeline = _hashed_file(tmp_path)
    text = "claim your prize fee at the harbourmaster office"
    result = nbledger(capsys, "why", path, text, "--format", "json")
    assert result.code == 0, result.err
    import json

    report = json.loads(result.out)
    reference = HashingVectorizer(n_features=8, alternate_sign=False, analyzer=lambda d: d, norm=None)
    assert report["collisions"]  # eight columns for eight distinct words: some must share
    for entry in report["collisions"]:
        assert len(entry["tokens"]) >= 2
        for token in entry["tokens"]:
            assert reference.transform([[token]]).indices.tolist() == [entry["column"]]
    # every token row is named by the message's own words, not by a column number
    assert all(not t["token"].startswith("column ") for t in report["tokens"])


def test_cli_vocab_without_names_shows_columns_by_number_with_a_note(tmp_path, capsys):
    path, _ = _hashed_file(tmp_path)
    result = nbledger(capsys, "vocab", path, "--top", "3")
    assert result.code == 0, result.err
    assert "columns are shown by number" in result.out
    assert "column " in result.out


def test_cli_vocab_names_from_file(tmp_path, capsys):
    path, _ = _hashed_file(tmp_path, n_features=2**12)
    names = tmp_path / "sample.txt"
    names.write_text("\n".join(TEXTS), encoding="utf-8")
    result = nbledger(capsys, "vocab", path, "--top", "3", "--names-from", names, "--format", "json")
    assert result.code == 0, result.err
    import json

    report = json.loads(result.out)
    assert "named by the tokens of" in report["review"]["names_note"]
    assert "fee" in result.out and "prize" in result.out


def test_cli_names_from_refused_for_a_model_with_a_vocabulary(tmp_path, capsys):
    from corpora import make_pipeline

    pipeline = make_pipeline("counts", "multinomial").fit(TEXTS, LABELS)
    path = tmp_path / "counts.skops"
    sio.dump(pipeline, path)
    names = tmp_path / "sample.txt"
    names.write_text("fee", encoding="utf-8")
    line = nbledger(capsys, "vocab", path, "--names-from", names).one_error_line()
    assert "hashed" in line


@pytest.mark.parametrize(
    "hasher_options, with_tfidf, kind",
    [({"norm": None}, False, "counts"), ({"norm": None, "binary": True}, False, "binary"),
     ({"norm": "l2"}, False, "normalised"), ({"norm": "l1"}, True, "tfidf")],
)
def test_feature_kind_follows_the_hasher_norm_and_tfidf_step(hasher_options, with_tfidf, kind):
    steps = [HashingVectorizer(n_features=16, alternate_sign=False, **hasher_options)]
    if with_tfidf:
        steps.append(TfidfTransformer().fit(steps[0].transform(TEXTS)))
    assert Featurizer(*steps).feature_kind == kind


def test_batch_rows_name_hashed_columns_by_the_texts_tokens():
    from explain.analysis.batch import score_texts

    pipeline = Pipeline([("v", HashingVectorizer(n_features=2**12, alternate_sign=False, norm=None)),
                         ("nb", VARIANT_TYPES["multinomial"]())]).fit(TEXTS, LABELS)
    model = through_plain_form(pipeline)
    texts = ["claim the prize fee now", "tea at the harbour"]
    batch = score_texts(model, texts, top_k=2)
    jll = pipeline[-1].predict_joint_log_proba(pipeline[:-1].transform(texts))
    np.testing.assert_allclose(batch.jll, jll, rtol=1e-9)
    words = {w for t in texts for w in t.split()}
    named = {str(batch.tokens[c]) for c in pipeline[0].transform(texts).indices}
    assert named and all(set(n.split(" / ")) <= words for n in named)


def test_plain_form_with_a_wrong_n_features_is_refused_before_naming_columns():
    pipeline = Pipeline([("v", HashingVectorizer(n_features=16, alternate_sign=False)),
                         ("nb", VARIANT_TYPES["multinomial"]())]).fit(TEXTS, LABELS)
    featurizer = Featurizer(pipeline[0])
    view = view_of(pipeline[-1], featurizer.tokens, featurizer.feature_kind)
    arrays, settings = plain_form.to_plain(featurizer, view, pipeline[-1])
    settings["params"]["n_features"] = 2**40  # naming 2**40 columns would exhaust memory
    with pytest.raises(NbledgerError, match="do not fit together"):
        plain_form.rebuild(arrays, settings)


def test_cli_probe_is_refused_for_a_hashed_model_in_one_line(tmp_path, capsys):
    path, _ = _hashed_file(tmp_path)
    data = tmp_path / "d.csv"
    data.write_text("text\nclaim the prize fee\n", encoding="utf-8")
    line = nbledger(capsys, "probe", path, data, "--text-col", "text", "--evasion",
                    "--normal-class", "ok").one_error_line()
    assert "vocabulary" in line


def test_report_names_hashed_columns_by_the_tokens_of_its_messages(tmp_path, capsys):
    import json

    path, pipeline = _hashed_file(tmp_path, n_features=2**12)
    data = tmp_path / "labelled.csv"
    data.write_text("text,label\n" + "".join(f"{t},{lab}\n" for t, lab in zip(TEXTS, LABELS)), encoding="utf-8")
    twin = tmp_path / "r.json"
    result = nbledger(capsys, "report", path, "--data", data, "--text-col", "text", "--label-col", "label",
                      "--normal-class", "ok", "--out", tmp_path / "r.pdf", "--json", twin)
    assert result.code == 0, result.err
    document = json.loads(twin.read_text(encoding="utf-8"))
    assert document["model"]["hashed"] is True
    listed = [t["token"] for c in document["vocabulary"]["comparisons"] for t in c["top_for"]]
    assert listed and all(not t.startswith("column ") for t in listed)
    # every name is made of words of the data, and all words of one name hash into one column
    words = set(" ".join(TEXTS).split())
    for name in listed:
        parts = name.split(" / ")
        assert set(parts) <= words
        assert len({pipeline[0].transform([p]).indices[0] for p in parts}) == 1


def test_compare_with_data_names_hashed_columns_by_the_data(tmp_path, capsys):
    import json

    path, _ = _hashed_file(tmp_path, n_features=2**12)
    other = tmp_path / "other.skops"
    hasher = HashingVectorizer(n_features=2**12, alternate_sign=False)
    sio.dump(Pipeline([("v", hasher), ("nb", VARIANT_TYPES["multinomial"](alpha=0.1))]).fit(TEXTS, LABELS), other)
    data = tmp_path / "labelled.csv"
    data.write_text("text,label\n" + "".join(f"{t},{lab}\n" for t, lab in zip(TEXTS, LABELS)), encoding="utf-8")
    result = nbledger(capsys, "compare", path, other, "--data", data, "--text-col", "text", "--label-col", "label",
                      "--normal-class", "ok", "--format", "json")
    assert result.code == 0, result.err
    document = json.loads(result.out)
    assert any("hashed columns are named" in n for n in document["notes"])
    shifted = [s["token"] for c in document["vocabulary"]["comparisons"] for s in c["gained"] + c["lost"]]
    assert shifted and all(not t.startswith("column ") for t in shifted)
