"""Issue 12's vocabulary checks: flags as defined, unsigned statistics, the personal-data check,
the rows `--data` counts, and the support map."""

import contextlib
import io
import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from PIL import Image
from sklearn.feature_extraction.text import ENGLISH_STOP_WORDS, CountVectorizer
from sklearn.model_selection import train_test_split

from corpora import cases, loaded
from explain.analysis.risk import (
    PERSONAL_KINDS,
    PERSONAL_PROBES,
    RiskThresholds,
    Watchlist,
    redaction_check,
    token_traits,
)
from explain.analysis.vocab import REST, review_vocabulary
from explain.cli import run
from explain.model.loading import load_model
from explain.present import vocab_pictures

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "demo_corpus" / "messages.csv"


@settings(max_examples=60, deadline=None)
@given(cases(n_classes=3), st.sampled_from([None, "ok-side", "rest"]), st.floats(0.2, 3))
def test_watchlist_strong_and_stopword_follow_the_glossary(case, against, strong_log_odds):
    """watchlist-strong: a watchlist token strong toward a side holding only flagged classes."""
    classes = [str(c) for c in case.pipeline.classes_]
    normal = classes[0]
    view = loaded(case.pipeline, normal_class=normal).view
    watch = Watchlist(tuple(str(t) for t in view.tokens), "all.txt")
    thresholds = RiskThresholds(strong_log_odds=strong_log_odds)
    target = None if against != "rest" else normal
    review = review_vocabulary(view, target=target, against=REST if against else None,
                               watchlist=watch, thresholds=thresholds)
    for c in review.comparisons:
        expected = []
        for j in range(review.n_features):
            side = [c.target] if c.ratio[j] > 0 else list(c.other_classes)
            toward_flagged = normal not in side
            expected.append(bool(abs(c.ratio[j]) >= strong_log_odds and toward_flagged))
        assert c.flag("watchlist_strong").tolist() == expected
        stop = [str(t) in ENGLISH_STOP_WORDS for t in view.tokens]
        assert c.flag("stopword").tolist() == stop


def test_watchlist_strong_on_the_demo_filter(model_files):
    model, _ = model_files
    review = review_vocabulary(load_model(model).view, watchlist=Watchlist(("polish", "the"), "w.txt"))
    column = {str(t): j for j, t in enumerate(review.tokens)}
    for c in review.comparisons:
        j = column["polish"]
        strong_toward_target = c.ratio[j] >= review.thresholds.strong_log_odds
        assert bool(c.flag("watchlist_strong")[j]) == bool(strong_toward_target)  # target is flagged, other is ok
        assert c.flag("stopword")[column["the"]]


@pytest.fixture(scope="module")
def model_files(tmp_path_factory):
    folder = tmp_path_factory.mktemp("audit")
    frame = pd.read_csv(DEMO, dtype=str, keep_default_na=False).iloc[:2000]
    frame.to_csv(folder / "train.csv", index=False)
    frame.iloc[:300].to_csv(folder / "other.csv", index=False)
    out = io.StringIO()
    with contextlib.redirect_stdout(out):
        assert run(["train", str(folder / "train.csv"), "--text-col", "text", "--label-col", "label",
                    "--normal-class", "ok", "--holdout", "0.25", "--seed", "11", "--out", str(folder / "m.skops")]) == 0
    return folder / "m.skops", folder


def vocab_json(capsys, *args):
    capsys.readouterr()
    code = run(["vocab", *map(str, args), "--format", "json"])
    out, err = capsys.readouterr()
    assert code == 0, err
    return json.loads(out)


def test_data_counts_only_the_rows_the_model_trained_on(model_files, capsys):
    model, folder = model_files
    frame = pd.read_csv(folder / "train.csv", dtype=str, keep_default_na=False)
    card = json.loads(model.with_name("m.card.json").read_text(encoding="utf-8"))
    # Outside reference: scikit-learn's own split with the card's seed and fraction.
    _, held = train_test_split(np.arange(len(frame)), test_size=0.25, random_state=11, stratify=frame.label)
    assert card["holdout"]["data_rows"] == sorted(int(r) + 1 for r in held)
    assert card["holdout"]["ids"] == frame.id.iloc[np.sort(held)].tolist()
    trained = frame.drop(index=held)
    assert card["training_rows_per_class"] == trained.label.value_counts().sort_index().to_dict()

    doc = vocab_json(capsys, model, "--data", folder / "train.csv", "--text-col", "text", "--label-col", "label",
                     "--class", "scam", "--against", "ok")
    assert "counted the 1,500 rows the model trained on" in doc["review"]["counts"]["reason"]
    assert doc["review"]["counts"]["rows_counted"] == len(trained) == 1500
    assert doc["review"]["counts"]["rows_note"].endswith("leaving out the 500 held-out rows the card lists")
    (comparison,) = doc["comparisons"]
    present = CountVectorizer(binary=True).fit(trained.text)
    X = present.transform(trained.text)
    for row in comparison["top_for"][:5] + comparison["top_against"][:5]:
        column = X[:, present.vocabulary_[row["token"]]].toarray().ravel() > 0
        assert row["n11"] == int((column & (trained.label == "scam").to_numpy()).sum())
        assert row["n10"] == int((column & (trained.label == "ok").to_numpy()).sum())
        assert row["n11"] + row["n01"] == int((trained.label == "scam").sum())
        assert row["chi2"] >= 0 and row["g2"] >= 0
        assert row["direction"] == np.sign(row["n11"] * row["n00"] - row["n10"] * row["n01"])


def test_another_file_is_said_to_hold_unseen_rows(model_files, capsys):
    model, folder = model_files
    doc = vocab_json(capsys, model, "--data", folder / "other.csv", "--text-col", "text", "--label-col", "label")
    reason = doc["review"]["counts"]["reason"]
    assert "other.csv is not the model's training file" in reason
    assert "may include messages the model never trained on" in reason


def test_the_personal_data_check_says_what_it_found_and_what_the_tokenizer_splits(model_files, capsys):
    model, _ = model_files
    doc = vocab_json(capsys, model)
    check = doc["review"]["personal_data_check"]
    loaded_model = load_model(model)
    traits = token_traits(loaded_model.view.tokens)
    assert check["tokens_checked"] == len(loaded_model.view.tokens)
    assert [f["tokens"] for f in check["found"]] == [int((traits.personal_kind == k).sum())
                                                      for k in range(len(PERSONAL_KINDS))]
    # scikit-learn's default token pattern (\b\w\w+\b) splits at "@", ".", "/", ":" and "-"
    assert set(check["tokenizer_splits"]) == {"e-mail", "url", "ip", "phone"}
    # A tokenizer that keeps every character together splits nothing.
    assert redaction_check(traits, lambda text: [text]).tokenizer_splits == ()
    for kind, probe in PERSONAL_PROBES.items():
        assert PERSONAL_KINDS[token_traits([probe]).personal_kind[0]] == kind


def test_the_footer_never_says_zero_without_the_tokenizer_caveat(model_files, capsys):
    model, _ = model_files
    capsys.readouterr()
    assert run(["vocab", str(model), "--redact", "--top", "3"]) == 0
    text = " ".join(capsys.readouterr().out.split())
    assert "0 personal-looking tokens redacted" not in text
    assert "Personal-data check: " in text and "tokens checked for e-mail addresses" in text
    assert "This model's tokenizer splits e-mail addresses, URLs, IP addresses and phone numbers into pieces" in text


def test_a_support_map_per_comparison(model_files, tmp_path):
    model, _ = model_files
    review = review_vocabulary(load_model(model).view, lens="zscore", top=5)
    pictures = vocab_pictures.draw_all(review)
    maps = sorted(name for name in pictures if name.startswith("support_"))
    assert maps == sorted(f"support_{c.target}_vs_{c.other}.png" for c in review.comparisons)
    for name in maps:
        image = Image.open(io.BytesIO(pictures[name]))
        assert image.format == "PNG" and image.width > 1000 and image.height > 700
        # not one flat colour: points were drawn
        assert len(image.convert("RGB").getcolors(maxcolors=1 << 20)) > 50


def test_the_support_map_names_the_top_tokens_and_rings_thin_ones(model_files, monkeypatch):
    model, _ = model_files
    review = review_vocabulary(load_model(model).view, lens="ratio", top=5)
    figures = []
    monkeypatch.setattr(vocab_pictures, "png_bytes", lambda fig: figures.append(fig) or b"")
    vocab_pictures.support_map(review, 0)
    (fig,) = figures
    ax = fig.axes[0]
    c = review.comparisons[0]
    named = {t.get_text() for t in ax.texts}
    expected = [str(review.tokens[j]) for side in ("for", "against")
                for j in c.top("ratio", vocab_pictures.MAP_LABELS, side)
                if c.support_target[j] + c.support_other[j] > 0]
    assert set(expected) <= named
    assert ax.get_xscale() == "log"
    ringed = sum(len(coll.get_offsets()) for coll in ax.collections if coll.get_label().startswith("thin"))
    support = c.support_target + c.support_other
    assert ringed == int((c.flag("thin") & (support > 0)).sum()) > 0
