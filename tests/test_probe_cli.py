"""``nbledger probe`` and ``report --probe`` end to end: outputs match the library, bad input gives one error line."""

import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from explain.analysis.probe import probe
from explain.cli import run
from explain.model.loading import load_model
from explain.present.probe import to_json
from tests.clirun import nbledger

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "demo_corpus" / "messages.csv"
SWAPS = ROOT / "demo_corpus" / "examples" / "swap_terms.txt"


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    folder = tmp_path_factory.mktemp("probe")
    frame = pd.read_csv(DEMO, dtype=str, keep_default_na=False)
    # Two classes keep the evasion exact and quick; ok is the normal class.
    two = frame[frame.label != "advert"]
    two.to_csv(folder / "messages.csv", index=False)
    assert run(["train", str(folder / "messages.csv"), "--text-col", "text", "--label-col", "label",
                "--out", str(folder / "model.skops"), "--normal-class", "ok"]) == 0
    model = load_model(folder / "model.skops")
    ok = two[two.label == "ok"].head(200)
    let_through = model.view.classes[np.argmax(model.view.joint_log_likelihood(model.featurizer.transform(ok.text)), axis=1)] == "ok"
    ok[let_through].to_csv(folder / "only_ok.csv", index=False)
    (folder / "bad_swaps.txt").write_text("solo: muslim\n", encoding="utf-8")
    (folder / "mixed_swaps.txt").write_text(
        "# a comment\npeople: she, he, the harbour master\nagain: He, they\n", encoding="utf-8"
    )
    return folder


def test_json_output_is_the_library_result(files, capsys):
    out = files / "probe.json"
    images = files / "pictures"
    result = nbledger(
        capsys, "probe", files / "model.skops", files / "messages.csv", "--text-col", "text", "--evasion",
        "--swap-terms", SWAPS, "--format", "json", "--out", out, "--images", images, "--max-added", "20",
    )
    assert result.code == 0, result.err
    written = json.loads(out.read_text(encoding="utf-8"))
    model = load_model(files / "model.skops")
    frame = pd.read_csv(files / "messages.csv", dtype=str, keep_default_na=False)
    expected = json.loads(json.dumps(to_json(probe(model, frame.text, swap_terms=SWAPS, max_added=20, ids=frame.id))))
    assert written == expected
    # each attack names its message by the data's id column (the default "id"), verbatim
    attacks = written["evasion"]["repeats"]["attacks"]
    assert attacks and all(a["id"] == frame.id.iloc[a["row"]] for a in attacks)
    assert written["evasion"]["repeats"]["method"] == "exact"
    assert any("Internal circulation" in c or "internal circulation" in c for c in written["cautions"])
    assert (images / "evasion-cost.png").exists()


def test_terminal_output_names_the_figures(files, capsys):
    result = nbledger(capsys, "probe", files / "model.skops", files / "messages.csv", "--text-col", "text",
                      "--swap-terms", files / "mixed_swaps.txt")
    assert result.code == 0, result.err
    assert "Term swaps" in result.out and "fairness gap" in result.out
    # the file's problems are named, with how they were handled
    assert "'the harbour master' is 3 tokens" in result.out
    assert "'He' reads as 'he', already in people" in result.out
    assert "Evasion cost" not in result.out


def test_untested_groups_and_pairs_are_listed_apart_with_no_gap(files, capsys, tmp_path):
    # "zzqx", "xxzy" and "qqvv" are in no message: their group and the pairs from them are untested, not fair
    swaps = tmp_path / "swaps.txt"
    swaps.write_text("people: she, he, zzqx\nnowhere: xxzy, qqvv\n", encoding="utf-8")
    common = (files / "model.skops", files / "messages.csv", "--text-col", "text", "--swap-terms", swaps)
    doc = json.loads(nbledger(capsys, "probe", *common, "--format", "json").out)["term_swaps"]
    groups = {g["group"]: g for g in doc["groups"]}
    assert groups["nowhere"] == {"group": "nowhere", "messages": 0, "swaps": 0, "decisions_changed": 0,
                                 "fairness_gap": None, "tested": False}
    assert groups["people"]["tested"] and groups["people"]["fairness_gap"] is not None
    from_zzqx = [p for p in doc["pairs"] if p["source"] == "zzqx"]
    assert len(from_zzqx) == 2 and all(p["fairness_gap"] is None and p["messages"] == 0 and not p["tested"]
                                       and p["mean_log_odds_shift"] is None for p in from_zzqx)
    assert all(p["tested"] for p in doc["pairs"] if p["source"] in ("she", "he"))
    out = nbledger(capsys, "probe", *common).out
    assert "untested (0 messages), no gap: nowhere" in out
    assert "term pairs untested (0 messages hold the term), no gap: zzqx (people, 2 pairs)" in out
    gaps = out[out.index("Term swaps: counterfactual"):out.index("untested (0 messages)")]
    assert "zzqx ->" not in gaps and "nowhere" not in gaps  # no row of an untested pair or group in the gap tables


@pytest.mark.parametrize(
    "args, message",
    [
        (["--evasion", "--max-added", "0"], "--max-added must be at least 1"),
        (["--swap-terms", "{bad}"], "no group of two or more usable terms"),
        ([], "nothing to probe"),
        (["--evasion", "--format", "csv"], "--format must be text or json"),
    ],
)
def test_bad_requests_give_one_error_line(files, capsys, args, message):
    args = [a.replace("{bad}", str(files / "bad_swaps.txt")) for a in args]
    result = nbledger(capsys, "probe", files / "model.skops", files / "messages.csv", "--text-col", "text", *args)
    assert message in result.one_error_line()


def test_no_flagged_messages_is_said(files, capsys):
    result = nbledger(capsys, "probe", files / "model.skops", files / "only_ok.csv", "--text-col", "text", "--evasion")
    line = result.one_error_line()
    assert "no message in the data is flagged" in line


def test_report_gains_the_section_only_when_asked(files, capsys):
    plain, asked = files / "plain.json", files / "asked.json"
    common = ["report", files / "model.skops", "--data", files / "messages.csv", "--normal-class", "ok"]
    assert nbledger(capsys, *common, "--out", files / "plain.pdf", "--json", plain).code == 0
    result = nbledger(capsys, *common, "--probe", "--swap-terms", SWAPS, "--out", files / "asked.pdf",
                      "--html", files / "asked.html", "--json", asked)
    assert result.code == 0, result.err
    assert json.loads(plain.read_text())["robustness_and_fairness"] is None
    section = json.loads(asked.read_text())["robustness_and_fairness"]
    assert section["evasion"]["flagged_messages"] > 0 and "attacks" not in section["evasion"]["repeats"]
    html = (files / "asked.html").read_text(encoding="utf-8")
    assert "Robustness and fairness" in html and "Internal circulation only" in html


def test_term_evidence_needs_only_the_model(files, capsys):
    result = nbledger(capsys, "probe", files / "model.skops", "--swap-terms", SWAPS, "--format", "json")
    assert result.code == 0, result.err
    written = json.loads(result.out)
    assert written["term_swaps"] is None and written["messages"] == 0
    model = load_model(files / "model.skops")
    vocabulary = set(map(str, model.view.tokens))
    for row in written["term_evidence"]:
        assert row["known"] == (row["token"] in vocabulary)
        if not row["known"]:
            assert set(row["evidence"].values()) == {0.0}
    evasion = nbledger(capsys, "probe", files / "model.skops", "--evasion")
    assert "--evasion needs DATA" in evasion.one_error_line()


def test_id_col_and_id_key_file_name_each_attack_traceably(files, capsys, tmp_path):
    """--id-col names the ids; an id holding an address is its keyed pseudonym, the same in every run with the key.

    Reference: HMAC-SHA-256 (RFC 2104) through explain.analysis.redaction.pseudonym, itself checked against
    RFC 4231 in test_personal_data.py.
    """
    from explain.analysis.redaction import pseudonym

    frame = pd.read_csv(files / "messages.csv", dtype=str, keep_default_na=False)
    frame["msgid"] = [f"<{i}.notice@example.org>" if n % 2 else f"ref-{n}" for n, i in enumerate(frame.id)]
    frame.to_csv(tmp_path / "ided.csv", index=False)
    key = tmp_path / "org.key"
    key.write_bytes(b"tideway commons secret 2026\n")
    common = ["probe", files / "model.skops", tmp_path / "ided.csv", "--text-col", "text", "--evasion",
              "--id-col", "msgid", "--format", "json"]
    runs = [nbledger(capsys, *common, "--id-key-file", key) for _ in range(2)]
    assert all(r.code == 0 for r in runs), runs[0].err
    attacks = [json.loads(r.out)["evasion"]["repeats"]["attacks"] for r in runs]
    assert attacks[0] == attacks[1]  # the same key: the same pseudonyms
    shown = {a["row"]: a["id"] for a in attacks[0]}
    assert any(frame.msgid.iloc[r].startswith("ref-") for r in shown) and any("@" in frame.msgid.iloc[r] for r in shown)
    for row, given in shown.items():
        original = frame.msgid.iloc[row]
        assert given == (pseudonym(b"tideway commons secret 2026", original) if "@" in original else original)
    assert "example.org" not in runs[0].out
    other = nbledger(capsys, *common)  # no key: a pseudonym drawn for this run, never the address
    assert other.code == 0 and "example.org" not in other.out


@pytest.mark.parametrize("case", ["missing", "empty", "folder", "under a file"])
def test_a_bad_id_key_file_is_one_error_line(files, capsys, tmp_path, case):
    key = {"missing": tmp_path / "none.key", "empty": tmp_path / "empty.key", "folder": tmp_path,
           "under a file": tmp_path / "empty.key" / "org.key"}[case]
    (tmp_path / "empty.key").write_bytes(b"")
    result = nbledger(capsys, "probe", files / "model.skops", files / "messages.csv", "--text-col", "text",
                      "--evasion", "--id-key-file", key)
    assert result.code == 2 and "id key file" in result.one_error_line()


def test_id_col_needs_data_and_an_existing_column(files, capsys):
    alone = nbledger(capsys, "probe", files / "model.skops", "--swap-terms", SWAPS, "--id-col", "id")
    assert alone.code == 2 and "--id-col names a column of DATA" in alone.one_error_line()
    missing = nbledger(capsys, "probe", files / "model.skops", files / "messages.csv", "--text-col", "text",
                       "--evasion", "--id-col", "msgid")
    assert missing.code == 2 and "msgid" in missing.one_error_line()
