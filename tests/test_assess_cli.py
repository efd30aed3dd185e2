"""``nbledger assess`` end to end: outputs, pictures, and bad input as one error line."""

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from PIL import Image

from explain.analysis.assessment import assess
from explain.cli import run
from explain.model.data_io import read_messages
from explain.model.loading import load_model

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "demo_corpus" / "messages.csv"


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    """A filter trained on half of the Tideway Commons demo corpus; the other half to assess."""
    folder = tmp_path_factory.mktemp("assess")
    frame = pd.read_csv(DEMO, dtype=str, keep_default_na=False)
    train, held = frame.iloc[::2], frame.iloc[1::2]
    train.to_csv(folder / "train.csv", index=False)
    held.to_csv(folder / "held.csv", index=False)
    held[held.label == "ok"].to_csv(folder / "only_ok.csv", index=False)
    odd = held.copy()
    odd.loc[odd.index[:4], "label"] = "spam"
    odd.loc[odd.index[4], "label"] = "junk"
    odd.to_csv(folder / "odd_labels.csv", index=False)
    # a normal-labelled message made of five scams outscores every real message
    planted = pd.DataFrame([{"id": "planted", "sent_at": "", "label": "ok",
                             "text": " ".join(held[held.label == "scam"].text.iloc[:5])}])
    pd.concat([held, planted]).to_csv(folder / "planted.csv", index=False)
    gap = held.copy()
    gap.loc[gap.index[7], "label"] = ""
    gap.to_csv(folder / "gap.csv", index=False)
    model = folder / "model.skops"
    assert run(["train", str(folder / "train.csv"), "--text-col", "text", "--label-col", "label",
                "--out", str(model), "--normal-class", "ok"]) == 0
    return folder


def assess_cli(capsys, *args):
    code = run(["assess", *map(str, args)])
    out, err = capsys.readouterr()
    return code, out, err


def test_json_carries_the_library_result(files, capsys):
    code, out, err = assess_cli(
        capsys, files / "model.skops", files / "held.csv", "--text-col", "text", "--label-col", "label",
        "--normal-class", "ok", "--format", "json", "--costs", "1:20", "--target-fpr", "0.2%", "--target-recall", "0.97",
    )
    assert code == 0, err
    doc = json.loads(out)
    assert doc["schema"] == "nbledger.assess/1"
    model = load_model(files / "model.skops", normal_class="ok")
    messages = read_messages(files / "held.csv", "text", "label")
    result = assess(
        model.view, model.featurizer.transform(messages.texts), messages.labels,
        ids=messages.ids, target_fpr=[0.002], target_recall=[0.97], costs=(1, 20),
    )
    got = doc["assessment"]
    assert got["flag_ranking"]["auc"]["auc"] == result.flag_ranking.auc.auc
    assert got["flag_ranking"]["auc"]["low"] == result.flag_ranking.auc.low
    assert got["confusion"]["counts"] == result.confusion.counts.tolist()
    assert got["flag_metrics"]["precision"] == {
        "value": result.flag_metrics.precision.value, "low": result.flag_metrics.precision.low,
        "high": result.flag_metrics.precision.high, "numerator": result.flag_metrics.precision.numerator,
        "denominator": result.flag_metrics.precision.denominator,
    }
    kinds = [p["kind"] for p in got["operating_points"]]
    assert kinds == ["in use", "fpr", "recall", "least cost", "cost if calibrated"]
    assert got["operating_points"][1]["target"] == 0.002
    assert got["calibration"]["brier_score"] == result.calibration.brier_score
    assert [m["id"] for m in got["errors"]["false_alarms"]] == [m.id for m in result.errors.false_alarms]
    # the ROC curve starts at threshold +inf, which JSON writes as null
    assert got["flag_ranking"]["roc_thresholds"][0] is None


def test_text_output_puts_base_rates_first(files, capsys):
    code, out, err = assess_cli(
        capsys, files / "model.skops", files / "held.csv", "--text-col", "text", "--label-col", "label",
        "--normal-class", "ok", "--threshold", "0.9",
    )
    assert code == 0, err
    order = ["base rates", "confusion matrix", "flagged versus normal", "rates at the decision in use",
             "ranking quality", "operating points", "calibration: Brier", "false alarms (", "missed (",
             "borderline", "what drives"]
    positions = [out.find(h) for h in order]
    assert -1 not in positions and positions == sorted(positions)
    assert "flag when P(flag) >= 0.9, that is flag log-odds >= 2.1972245773362196" in out


def test_out_file_and_pictures(files, capsys, tmp_path):
    report, images = tmp_path / "report.txt", tmp_path / "img"
    code, out, err = assess_cli(
        capsys, files / "model.skops", files / "held.csv", "--text-col", "text", "--label-col", "label",
        "--normal-class", "ok", "--out", report, "--images", images,
    )
    assert code == 0, err
    assert out == "" and "base rates" in report.read_text()
    names = sorted(p.name for p in images.iterdir())
    assert names == ["confusion.png", "precision_recall.png", "reliability.png", "roc.png", "scores.png"]
    for name in names:
        with Image.open(images / name) as picture:
            assert picture.format == "PNG"
            assert min(picture.info["dpi"]) >= 149.9


def test_single_class_data_still_reports(files, capsys, tmp_path):
    code, out, err = assess_cli(
        capsys, files / "model.skops", files / "only_ok.csv", "--text-col", "text", "--label-col", "label",
        "--normal-class", "ok", "--format", "json", "--images", tmp_path,
    )
    assert code == 0, err
    # no ROC or precision-recall picture without abuse to rank
    assert sorted(p.name for p in tmp_path.iterdir()) == ["confusion.png", "reliability.png", "scores.png"]
    got = json.loads(out)["assessment"]
    assert got["flag_ranking"] is None
    assert any("AUC and precision-recall curve undefined: the data hold only ok messages" in n for n in got["notes"])
    assert got["flag_metrics"]["false_alarm_rate"]["denominator"] > 0


def test_unmeetable_target_is_a_note_not_a_failure(files, capsys):
    code, out, err = assess_cli(
        capsys, files / "model.skops", files / "planted.csv", "--text-col", "text", "--label-col", "label",
        "--normal-class", "ok", "--target-fpr", "0", "--format", "json",
    )
    assert code == 0, err
    got = json.loads(out)["assessment"]
    (point,) = [p for p in got["operating_points"] if p["kind"] == "fpr"]
    # with one normal message above all abuse, any flagging costs a false alarm
    assert point["met"] is False and point["figures"] is None
    assert got["errors"]["false_alarms"][0]["id"] == "planted"
    code, text, err = assess_cli(
        capsys, files / "model.skops", files / "planted.csv", "--text-col", "text", "--label-col", "label",
        "--normal-class", "ok", "--target-fpr", "0",
    )
    assert code == 0 and "not met: no threshold keeps the false-alarm rate at or below 0 %" in " ".join(text.split())


BAD = [
    (["odd_labels.csv"], "labels not among the model's classes (advert, ok, scam): 'junk' (1 message), 'spam' (4 messages)"),
    (["gap.csv"], "gap.csv: 1 row has no 'label' (first at data row 8)"),
    (["held.csv", "--label-col", "kind"], "held.csv has no column 'kind'; columns found: id, sent_at, text, label"),
    (["held.csv", "--costs", "1-20"], "--costs takes FP:FN"),
    (["held.csv", "--costs", "0:5"], "--costs must be two positive numbers"),
    (["held.csv", "--target-fpr", "5"], "--target-fpr must be between 0 and 1"),
    (["held.csv", "--target-recall", "most"], "--target-recall must be a fraction (0.01) or a percentage (1%)"),
    (["held.csv", "--format", "pdf"], "--format must be text or json"),
    (["held.csv", "--threshold", "1.5"], "threshold must be a probability in [0, 1]"),
    (["held.csv", "--normal-class", "fine"], "no class 'fine' in this model; its classes are: advert, ok, scam"),
]


@pytest.mark.parametrize("args, message", BAD, ids=[b[1][:30] for b in BAD])
def test_bad_input_is_one_error_line_and_no_file(files, capsys, tmp_path, args, message):
    data, *rest = args
    out_file, images = tmp_path / "out.json", tmp_path / "img"
    options = ["--text-col", "text", "--label-col", "label", "--normal-class", "ok"]
    code, out, err = assess_cli(
        capsys, files / "model.skops", files / data, *options, *rest, "--out", out_file, "--images", images,
    )
    assert code != 0
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: ")
    assert message in lines[0]
    assert "Traceback" not in err + out
    assert not out_file.exists() and not (images.exists() and any(images.iterdir()))
    assert not any(p.name.startswith(".out.json") for p in tmp_path.iterdir())


def test_real_entry_point_prints_no_traceback(files):
    done = subprocess.run(
        [sys.executable, "-m", "explain", "assess", str(files / "model.skops"), str(files / "odd_labels.csv"),
         "--text-col", "text", "--label-col", "label"],
        capture_output=True, text=True, cwd=ROOT,
    )
    assert done.returncode == 2
    assert done.stderr.startswith("error: labels not among the model's classes") and done.stderr.count("\n") == 1
    assert done.stdout == ""


def test_labels_are_not_confused_with_text(files, capsys):
    # every message scored and counted once: the confusion matrix sums to the rows read
    code, out, err = assess_cli(
        capsys, files / "model.skops", files / "held.csv", "--text-col", "text", "--label-col", "label",
        "--normal-class", "ok", "--format", "json",
    )
    got = json.loads(out)["assessment"]
    held = pd.read_csv(files / "held.csv", dtype=str, keep_default_na=False)
    assert int(np.sum(got["confusion"]["counts"])) == len(held)
    assert got["base_rates"]["counts"] == [int((held.label == c).sum()) for c in got["classes"]]


def test_counts_on_the_screen_carry_thousands_separators(files, capsys):
    code, out, err = assess_cli(
        capsys, files / "model.skops", files / "held.csv", "--text-col", "text", "--label-col", "label",
        "--normal-class", "ok",
    )
    assert code == 0, err
    import re

    table_rows = [line for line in out.splitlines() if line.startswith("│")]
    # every run of four or more digits is part of a decimal or grouped by commas
    bare = [m.group() for line in table_rows for m in re.finditer(r"(?<![\d.,])\d{4,}(?![\d.])", line)]
    assert bare == [], bare
    assert re.search(r"\b\d,\d{3} \(", out)  # e.g. "2,310 (97.4 %)" in the confusion matrix
