"""``nbledger vocab`` end to end: outputs match the library, pictures, redaction, bad input."""

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import skops.io as sio
from PIL import Image
from sklearn.feature_extraction.text import CountVectorizer
from sklearn.naive_bayes import MultinomialNB
from sklearn.pipeline import Pipeline

from explain.present import vocab_pictures as pictures
from explain.cli import run
from explain.model.data_io import read_messages
from explain.model.loading import load_model
from explain.analysis.risk import FLAGS
from explain.analysis.vocab import LENSES, document_counts, review_vocabulary

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "demo_corpus" / "messages.csv"
# Reserved example values (example.org, 555-01xx) planted in the training data.
PLANTED_EMAIL = "warden.holt@example.org"
PLANTED_PHONE = "555-0191"  # the one 555-01xx number the demo corpus never uses


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    folder = tmp_path_factory.mktemp("vocab")
    frame = pd.read_csv(DEMO, dtype=str, keep_default_na=False)
    frame.to_csv(folder / "messages.csv", index=False)
    odd = frame.copy()
    odd.loc[odd.index[:3], "label"] = "spam"
    odd.to_csv(folder / "odd_labels.csv", index=False)
    frame[frame.label != "advert"].to_csv(folder / "no_advert.csv", index=False)
    (folder / "watch.txt").write_text("# fairness review\nroma\nTraveller\nharbour\n", encoding="utf-8")
    (folder / "latin1.txt").write_bytes("caf\xe9\n".encode("latin-1"))
    (folder / "empty.txt").write_text("# nothing yet\n\n", encoding="utf-8")
    assert run(["train", str(folder / "messages.csv"), "--text-col", "text", "--label-col", "label",
                "--out", str(folder / "model.skops"), "--normal-class", "ok"]) == 0

    # A filter whose tokenizer keeps addresses and phone numbers whole, trained on
    # messages that carry a planted e-mail address and phone number.
    planted = [f"Urgent: your berth deposit is unpaid, reply to {PLANTED_EMAIL} or call {PLANTED_PHONE} today"] * 40
    texts = list(frame.text) + planted
    labels = list(frame.label) + ["scam"] * len(planted)
    pipe = Pipeline([
        ("v", CountVectorizer(token_pattern=r"(?u)\w[\w.@+-]*\w")),
        ("nb", MultinomialNB()),
    ]).fit(texts, labels)
    sio.dump(pipe, folder / "planted.skops")
    return folder


def vocab_cli(capsys, *args):
    capsys.readouterr()
    code = run(["vocab", *map(str, args)])
    out, err = capsys.readouterr()
    return code, out, err


def test_json_carries_the_library_result(files, capsys):
    code, out, err = vocab_cli(
        capsys, files / "model.skops", "--class", "scam", "--against", "rest", "--by", "g2", "--top", "7",
        "--format", "json",
    )
    assert code == 0, err
    doc = json.loads(out)
    review = review_vocabulary(load_model(files / "model.skops").view, target="scam", against="rest", lens="g2", top=7)
    (c,) = review.comparisons
    (got,) = doc["comparisons"]
    assert doc["schema"] == "nbledger.vocab/1" and doc["review"]["ranked_by"] == "g2"
    assert (got["target"], got["other"]) == ("scam", "rest")
    assert got["flag_counts"] == dict(c.flag_counts)
    for side in ("for", "against"):
        rows = got[f"top_{side}"]
        picked = c.top("g2", 7, side)
        assert [r["token"] for r in rows] == list(review.tokens[picked])
        for r, j in zip(rows, picked):
            assert r["g2"] == c.g2[j] and r["zscore"] == c.zscore[j] and r["ratio"] == c.ratio[j]
            assert [r[k] for k in ("n11", "n10", "n01", "n00")] == list(c.table[:, j])
            assert r["flags"] == [name for k, name in enumerate(FLAGS) if c.flags[k, j]]


def test_csv_has_every_token_and_the_documented_columns(files, capsys, tmp_path):
    out_file = tmp_path / "vocab.csv"
    code, out, err = vocab_cli(capsys, files / "model.skops", "--format", "csv", "--out", out_file)
    assert code == 0 and out == "", err
    table = pd.read_csv(out_file, keep_default_na=False)
    review = review_vocabulary(load_model(files / "model.skops").view)
    expected = (["comparison", "target", "other", "rank", "token", "zscore", "weighted_log_odds", "ratio", "mass",
                 "chi2", "g2", "mi", "direction", "support_target", "support_other",
                 "support_advert", "support_ok", "support_scam", "documents_target",
                 "documents_other", "n11", "n10", "n01", "n00"]
                + [f"rank_{lens}" for lens in LENSES] + list(FLAGS) + ["personal_kind"])
    assert list(table.columns) == expected
    import explain.present.vocab as presenter
    for column in expected:
        documented = column.startswith(("rank_", "support_", "n1", "n0")) or column in FLAGS
        assert f"``{column}``" in presenter.__doc__ or documented
    assert len(table) == len(review.comparisons) * review.n_features
    for c in review.comparisons:
        part = table[table.comparison == c.label]
        order = c.order[LENSES.index("zscore")]
        assert list(part.token.astype(str)) == [str(t) for t in review.tokens[order]]
        # floats are written with full precision: the file reproduces the arrays exactly
        np.testing.assert_array_equal(part.zscore.to_numpy(), c.zscore[order])
        np.testing.assert_array_equal(part.mass.to_numpy(), c.mass[order])
        np.testing.assert_array_equal(part.support_scam.to_numpy(), review.support_by_class[2, order])
        assert list(part["rank"]) == list(range(1, review.n_features + 1))


def test_text_output_names_settings_and_both_sides(files, capsys, tmp_path):
    code, out, err = vocab_cli(
        capsys, files / "model.skops", "--top", "5", "--watchlist", files / "watch.txt", "--out", tmp_path / "v.txt"
    )
    assert code == 0 and out == "", err
    flat = " ".join((tmp_path / "v.txt").read_text(encoding="utf-8").split())
    assert "2x2 tables (chi-square, G2, MI) count token occurrences" in flat
    assert "advert vs ok" in flat and "scam vs ok" in flat
    assert "strongest 5 for scam" in flat and "strongest 5 for ok" in flat
    assert "thin: strong with support below 10 (both sides together)" in flat
    assert "roma" in flat and "not in the vocabulary" in flat


def test_labelled_data_counts_messages(files, capsys):
    code, out, err = vocab_cli(
        capsys, files / "model.skops", "--data", files / "messages.csv", "--text-col", "text",
        "--label-col", "label", "--format", "json", "--class", "advert",
    )
    assert code == 0, err
    doc = json.loads(out)
    assert doc["review"]["counts"]["kind"] == "documents"
    assert doc["data"]["path"].endswith("messages.csv")
    loaded = load_model(files / "model.skops")
    messages = read_messages(files / "messages.csv", "text", "label")
    docs = document_counts(loaded.view, loaded.featurizer.transform(messages.texts), messages.labels, "messages.csv")
    a, o = loaded.view.class_index("advert"), loaded.view.class_index("ok")
    for row in doc["comparisons"][0]["top_for"]:
        j = int(np.flatnonzero(loaded.view.tokens == row["token"])[0])
        assert row["documents_target"] == docs.counts[a, j] and row["documents_other"] == docs.counts[o, j]
        assert row["n01"] == docs.messages[a] - docs.counts[a, j]


def test_watchlist_terms_are_reported_even_when_absent(files, capsys):
    code, out, err = vocab_cli(
        capsys, files / "model.skops", "--watchlist", files / "watch.txt", "--format", "json", "--class", "scam",
    )
    assert code == 0, err
    terms = {t["term"]: t for t in json.loads(out)["watchlist"]["terms"]}
    assert set(terms) == {"roma", "Traveller", "harbour"}
    assert terms["roma"]["in_vocabulary"] is False and terms["roma"]["rows"] == [None]
    harbour = terms["harbour"]["rows"][0]
    assert terms["harbour"]["in_vocabulary"] and "watchlist" in harbour["flags"] and harbour["rank"] >= 1


def test_pictures_are_png_at_print_resolution_and_deterministic(files, capsys, tmp_path):
    images = tmp_path / "img"
    code, out, err = vocab_cli(capsys, files / "model.skops", "--class", "scam", "--top", "10", "--images", images)
    assert code == 0, err
    names = sorted(p.name for p in images.iterdir())
    assert names == ["bars_scam_vs_ok.png", "cloud_scam_vs_ok_for_ok.png", "cloud_scam_vs_ok_for_scam.png",
                     "support_scam_vs_ok.png"]
    for name in names:
        with Image.open(images / name) as im:
            assert im.format == "PNG" and min(im.info["dpi"]) >= 150
    model = load_model(files / "model.skops")
    review = review_vocabulary(model.view, target="scam", top=10,
                               analyzer=lambda text: model.featurizer.occurrences(text, with_spans=False).tokens)
    # the same review always gives the same bytes (seeded layout, no time stamps)
    assert pictures.word_cloud(review, 0, "for") == (images / "cloud_scam_vs_ok_for_scam.png").read_bytes()
    assert pictures.bar_chart(review, 0) == (images / "bars_scam_vs_ok.png").read_bytes()
    assert pictures.support_map(review, 0) == (images / "support_scam_vs_ok.png").read_bytes()


@pytest.mark.parametrize("redact", [True, False])
def test_redaction_keeps_planted_personal_data_out_of_tables_and_pictures(files, capsys, tmp_path, picture_inputs, redact):
    outputs = []
    for fmt, images in (("text", ["--images", tmp_path / "img"]), ("csv", []), ("json", [])):
        args = [files / "planted.skops", "--normal-class", "ok", "--format", fmt, "--top", "40", "--by", "ratio"]
        code, out, err = vocab_cli(capsys, *args, *images, *(["--redact"] if redact else []))
        assert code == 0, err
        outputs.append(out)
    shown = "\n".join(outputs + [str(s) for s in picture_inputs])
    assert picture_inputs, "no picture was drawn"
    drawn = "\n".join(map(str, picture_inputs))
    for planted in (PLANTED_EMAIL, PLANTED_PHONE):
        # without --redact the planted values are there to find, so the check can fail
        assert (planted in shown) is not redact
        assert (planted in drawn) is not redact
    if redact:
        assert "[e-mail" in shown and "[phone" in shown


BAD = [
    (["--watchlist", "latin1.txt"], "the watchlist", "is not UTF-8 text (byte 0xe9 at offset 3)"),
    (["--watchlist", "empty.txt"], "the watchlist", "has no terms (only blank lines and # comments)"),
    (["--class", "spam"], "no class 'spam' in this model; its classes are: advert, ok, scam", None),
    (["--class", "scam", "--against", "junk"], "no class 'junk' in this model; its classes are: advert, ok, scam", None),
    (["--class", "ok", "--against", "ok"], "--class and --against both name 'ok'", None),
    (["--data", "odd_labels.csv", "--text-col", "text", "--label-col", "label"],
     "odd_labels.csv has labels the model does not have: spam; the model's classes are: advert, ok, scam", None),
    (["--data", "no_advert.csv", "--text-col", "text", "--label-col", "label"],
     "no_advert.csv has no messages labelled advert", None),
    (["--data", "messages.csv", "--text-col", "text", "--label-col", "kind"],
     "messages.csv has no column 'kind'; columns found: id, sent_at, text, label", None),
    (["--data", "messages.csv"], "messages.csv is a table: give --text-col (and --label-col)", None),
    (["--by", "frequency"], "--by must be one of zscore, ratio, mass, chi2, g2", None),
    (["--format", "pdf"], "--format must be text, csv or json", None),
    (["--strong", "0.5"], "--strong is an odds factor and must be above 1", None),
    (["--thin-below", "-3"], "the thin threshold must be a count >= 0", None),
]


@pytest.mark.parametrize("args, message, tail", BAD, ids=[b[0][-1] + ":" + b[1][:25] for b in BAD])
def test_bad_input_is_one_error_line_and_no_file(files, capsys, tmp_path, args, message, tail):
    args = [str(files / a) if (files / a).is_file() else a for a in args]
    out_file, images = tmp_path / "out.json", tmp_path / "img"
    code, out, err = vocab_cli(capsys, files / "model.skops", *args, "--out", out_file, "--images", images)
    assert code != 0
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: "), err
    assert message in lines[0] and (tail is None or lines[0].endswith(tail))
    assert "Traceback" not in err + out
    assert not out_file.exists() and not (images.exists() and any(images.iterdir()))
    assert not any(p.name.startswith(".out.json") for p in tmp_path.iterdir())


def test_real_entry_point_prints_no_traceback(files):
    done = subprocess.run(
        [sys.executable, "-m", "explain", "vocab", str(files / "model.skops"), "--class", "spam"],
        capture_output=True, text=True, cwd=ROOT,
    )
    assert done.returncode == 2
    assert done.stderr == "error: no class 'spam' in this model; its classes are: advert, ok, scam\n"
    assert done.stdout == ""


# Invented people and reserved values (issue 18): names found by where they stand in the messages at hand.
PEOPLE = ["Oksana", "Petrenko", "Tomasz", "Nowak", "Keziah", "Quayle", "4111111111111111", "GB82WEST12345698765432",
          "TD4 7QX", "12/03/1984", "2001:db8::17"]


def _people_message(i: int) -> str:
    return (f"Dear Oksana Petrenko, your berth refund {i} is held. Card 4111111111111111 or IBAN GB82WEST12345698765432, "
            f"postcode TD4 7QX, DOB 12/03/1984, from 2001:db8::17. Ask Keziah Quayle at the desk.\n"
            "Kind regards,\nTomasz Nowak")


@pytest.mark.parametrize("redact", [True, False])
def test_vocab_outputs_hold_no_planted_person_with_redact(files, capsys, tmp_path, picture_inputs, redact):
    """Tables (text, csv with every token, json) and pictures of `vocab --redact --data` name nobody; the
    control without --redact shows the planted names, so the check can fail."""
    import re

    frame = pd.read_csv(DEMO, dtype=str, keep_default_na=False)
    people = pd.DataFrame({"id": [f"p-{i}" for i in range(60)], "sent_at": "", "label": "scam",
                           "text": [_people_message(i) for i in range(60)]})
    both = pd.concat([frame, people])
    both.to_csv(tmp_path / "people.csv", index=False)
    pipe = Pipeline([("v", CountVectorizer(token_pattern=r"(?u)\w[\w.@+:/-]*\w")), ("nb", MultinomialNB())])
    sio.dump(pipe.fit(both.text, both.label), tmp_path / "people.skops")
    outputs = []
    for fmt, images in (("text", ["--images", tmp_path / "img"]), ("csv", []), ("json", [])):
        code, out, err = vocab_cli(capsys, tmp_path / "people.skops", "--normal-class", "ok", "--format", fmt,
                                   "--top", "40", "--by", "ratio", "--data", tmp_path / "people.csv", "--text-col",
                                   "text", "--label-col", "label", *images, *(["--redact"] if redact else []))
        assert code == 0, err
        outputs.append(out)
    assert picture_inputs, "no picture was drawn"
    shown = "\n".join(outputs + [str(s) for s in picture_inputs]).lower()
    drawn = "\n".join(map(str, picture_inputs)).lower()
    found = [v for v in PEOPLE if re.search(rf"(?<![\w.]){re.escape(v.lower())}(?![\w])", shown)]
    if redact:
        assert found == [], found
        assert not any(re.search(rf"\b{n.lower()}\b", drawn) for n in PEOPLE[:6])
    else:
        assert {"oksana", "petrenko", "tomasz", "nowak"} <= {v.lower() for v in found}, found


def test_a_model_of_many_classes_gives_each_comparison_one_line(tmp_path, capsys):
    """Beyond FULL_COMPARISONS the screen lists each comparison in one line, with the tokens the tables would lead with."""
    import numpy as np
    import skops.io as sio
    from sklearn.feature_extraction.text import CountVectorizer
    from sklearn.naive_bayes import MultinomialNB
    from sklearn.pipeline import make_pipeline

    from explain.analysis.vocab import review_vocabulary
    from explain.model.loading import load_model
    from clirun import nbledger
    from explain.present.vocab import FULL_COMPARISONS, LINE_TOKENS

    rng = np.random.default_rng(3)
    n = FULL_COMPARISONS + 20
    words = [f"w{j}" for j in range(30)]
    texts = [" ".join(rng.choice(words, 6)) for _ in range(2 * n)]
    labels = [f"group{i:03d}" for i in range(n)] * 2
    path = tmp_path / "many.skops"
    sio.dump(make_pipeline(CountVectorizer(), MultinomialNB()).fit(texts, labels), path)
    result = nbledger(capsys, "vocab", path)
    assert result.code == 0, result.err
    lines = [l for l in result.out.splitlines() if " vs rest: " in l]
    assert len(lines) == n and f"{n:,} comparisons, one line each" in result.out
    review = review_vocabulary(load_model(path).view)
    for line, c in zip(lines, review.comparisons):
        assert line.startswith(f"{c.label}: ")
        strongest = ", ".join(review.tokens[c.top("zscore", LINE_TOKENS, "for")])
        assert f"strongest for {c.target}: {strongest};" in line, line
