"""`train`'s summary and card (issue 12, item 11) and the id column of data files (item 10)."""

import contextlib
import io
import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from sklearn.model_selection import train_test_split

from explain.cli import run
from explain.errors import NbledgerError
from explain.model.data_io import read_messages
from explain.model.training import TrainSettings, feature_kind_words, ngram_words, train_filter

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "demo_corpus" / "messages.csv"


@pytest.fixture(scope="module")
def folder(tmp_path_factory):
    folder = tmp_path_factory.mktemp("ids")
    frame = pd.read_csv(DEMO, dtype=str, keep_default_na=False).iloc[:900]
    frame.to_csv(folder / "with_id.csv", index=False)
    frame.rename(columns={"id": "message_ref"}).to_csv(folder / "ref.csv", index=False)
    frame.drop(columns=["id"]).to_csv(folder / "no_id.csv", index=False)
    repeated = frame.copy()
    repeated.loc[5, "id"] = repeated.loc[2, "id"]
    repeated.to_csv(folder / "repeated.csv", index=False)
    blank = frame.copy()
    blank.loc[7, "id"] = ""
    blank.to_csv(folder / "blank.csv", index=False)
    return folder


def test_ids_come_from_the_named_column_or_id_or_row_numbers(folder):
    frame = pd.read_csv(folder / "with_id.csv", dtype=str, keep_default_na=False)
    assert read_messages(folder / "with_id.csv", "text").ids.tolist() == frame.id.tolist()
    named = read_messages(folder / "ref.csv", "text", "label", id_col="message_ref")
    assert named.ids.tolist() == frame.id.tolist() and named.id_col == "message_ref"
    plain = read_messages(folder / "no_id.csv", "text")
    assert plain.ids.tolist() == [str(i) for i in range(1, len(frame) + 1)] and plain.id_col is None
    # the default is 'id' only when present: ref.csv has none, so rows are numbered
    assert read_messages(folder / "ref.csv", "text").ids[0] == "1"


@pytest.mark.parametrize("name, id_col, message", [
    ("no_id.csv", "message_ref", "no_id.csv has no column 'message_ref'; columns found: sent_at, text, label"),
    ("repeated.csv", None, "repeated.csv: the id 'tc-00003' in column 'id' is used by more than one row"),
    ("blank.csv", None, "blank.csv: 1 rows have no 'id' (first at data row 8)"),
])
def test_bad_id_columns_are_one_line_errors(folder, name, id_col, message):
    with pytest.raises(NbledgerError) as caught:
        read_messages(folder / name, "text", id_col=id_col)
    assert str(caught.value) == message


def cli(capsys, *args):
    capsys.readouterr()
    code = run([*map(str, args)])
    out, err = capsys.readouterr()
    return code, out, err


def test_train_and_vocab_take_an_id_column(folder, capsys):
    code, out, err = cli(capsys, "train", folder / "ref.csv", "--text-col", "text", "--label-col", "label",
                         "--id-col", "message_ref", "--holdout", "0.2", "--seed", "4", "--out", folder / "r.skops")
    assert code == 0, err
    card = json.loads((folder / "r.card.json").read_text(encoding="utf-8"))
    frame = pd.read_csv(folder / "ref.csv", dtype=str, keep_default_na=False)
    held = np.array(card["holdout"]["data_rows"]) - 1
    assert card["holdout"]["ids"] == frame.message_ref.iloc[held].tolist()
    assert card["data"]["id_col"] == "message_ref"
    code, out, err = cli(capsys, "vocab", folder / "r.skops", "--data", folder / "ref.csv", "--text-col", "text",
                         "--label-col", "label", "--id-col", "message_ref", "--format", "json")
    assert code == 0, err
    assert "counted the 720 rows the model trained on" in json.loads(out)["review"]["counts"]["reason"]
    code, out, err = cli(capsys, "vocab", folder / "r.skops", "--data", folder / "ref.csv", "--text-col", "text",
                         "--label-col", "label", "--id-col", "nope")
    assert code == 2 and err.startswith("error: ref.csv has no column 'nope'") and out == ""


def test_train_counts_the_rows_it_trained_on(folder, capsys):
    code, out, err = cli(capsys, "train", folder / "with_id.csv", "--text-col", "text", "--label-col", "label",
                         "--holdout", "0.3", "--seed", "9", "--out", folder / "h.skops")
    assert code == 0, err
    frame = pd.read_csv(folder / "with_id.csv", dtype=str, keep_default_na=False)
    # Outside reference: scikit-learn's split with the same seed and stratification.
    kept, held = train_test_split(np.arange(len(frame)), test_size=0.3, random_state=9, stratify=frame.label)
    per_class = frame.label.iloc[kept].value_counts().sort_index()
    assert f"on {len(kept):,} of {len(frame):,} messages ({len(held):,} held out)" in out
    assert "rows trained on: " + ", ".join(f"{c} {n:,}" for c, n in per_class.items()) in out
    assert sum(per_class) == len(kept)
    card = json.loads((folder / "h.card.json").read_text(encoding="utf-8"))
    assert card["training_rows"] == len(kept)
    assert card["training_rows_per_class"] == per_class.to_dict()
    assert card["data"]["rows_per_class"] == frame.label.value_counts().sort_index().to_dict()
    assert card["holdout"]["seed"] == 9 and card["holdout"]["rows"] == len(held)


@pytest.mark.parametrize("variant, features, ngrams, shown", [
    ("multinomial", "counts", "1-1", "features: token counts of unigrams;"),
    ("multinomial", "binary", "1-2", "features: presence (0/1) of unigrams and bigrams;"),
    ("bernoulli", "counts", "1-2", "features: presence (0/1) of unigrams and bigrams;"),
    ("complement", "tfidf", "1-3", "features: TF-IDF weights of unigrams to trigrams;"),
])
def test_train_names_features_as_the_model_uses_them(folder, capsys, variant, features, ngrams, shown):
    code, out, err = cli(capsys, "train", folder / "with_id.csv", "--text-col", "text", "--label-col", "label",
                         "--variant", variant, "--features", features, "--ngrams", ngrams, "--out", folder / "f.skops")
    assert code == 0, err
    assert shown in out and "-grams" not in out
    card = json.loads((folder / "f.card.json").read_text(encoding="utf-8"))
    from explain.model.loading import load_model

    # the card's feature kind is the one the loaded model's arrays use
    assert card["feature_kind"] == load_model(folder / "f.skops").view.feature_kind


def test_feature_and_ngram_words():
    assert ngram_words((2, 2)) == "bigrams" and ngram_words((2, 4)) == "bigrams to 4-grams"
    assert ngram_words((3, 3), "char_wb") == "character 3-grams"
    assert feature_kind_words("tfidf", "bernoulli") == "presence (0/1)"


def test_without_hold_out_every_row_trains():
    texts = ["berth fee now", "tea at the quay", "pay the fee", "tools to lend"] * 3
    labels = np.array(["scam", "ok", "scam", "ok"] * 3)
    trained = train_filter(texts, labels, TrainSettings())
    assert trained.train_rows == 12 and trained.rows_per_class == {"ok": 6, "scam": 6} and trained.holdout is None
