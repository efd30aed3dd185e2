"""Figures an auditor can reproduce: thresholds typed back, base-rate projection, slices, label errors, layout."""

import json
import re
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from rich.console import Console
from scipy.stats import binomtest, fisher_exact
from statsmodels.stats.multitest import multipletests

from explain.analysis import slices as slicing
from explain.analysis.assessment import assess, class_indices
from explain.analysis.label_errors import find_suspected, label_errors, out_of_sample_probabilities
from explain.analysis.rates import Rate, project_to_base_rate
from explain.cli import run
from explain.model.data_io import read_messages
from explain.model.loading import load_model
from explain.present.assessment import render, to_json

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "demo_corpus" / "messages.csv"
NOISE = ROOT / "demo_corpus" / "label_noise.csv"
COLUMNS = ["--text-col", "text", "--label-col", "label", "--normal-class", "ok"]


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    """A filter trained on half of the demo corpus; the other half to assess."""
    folder = tmp_path_factory.mktemp("audit")
    frame = pd.read_csv(DEMO, dtype=str, keep_default_na=False)
    frame.iloc[::2].to_csv(folder / "train.csv", index=False)
    frame.iloc[1::2].rename(columns={"id": "message"}).to_csv(folder / "held.csv", index=False)
    assert run(["train", str(folder / "train.csv"), "--text-col", "text", "--label-col", "label",
                "--out", str(folder / "model.skops"), "--normal-class", "ok"]) == 0
    return folder


def cli(capsys, *args):
    code = run(["assess", *map(str, args)])
    out, err = capsys.readouterr()
    assert code == 0, err
    return out


def assess_json(capsys, files, *extra):
    out = cli(capsys, files / "model.skops", files / "held.csv", *COLUMNS, "--id-col", "message",
              "--format", "json", *extra)
    return json.loads(out)["assessment"]


def in_use_counts(doc) -> tuple[int, int]:
    figures = doc["operating_points"][0]["figures"]
    assert doc["operating_points"][0]["kind"] == "in use"
    return figures["tp"], figures["fp"]


# --- 1. thresholds typed back --------------------------------------------------------


def test_every_printed_threshold_reproduces_its_row(files, capsys):
    doc = assess_json(capsys, files, "--costs", "10:1", "--threshold", "0.5")
    points = [p for p in doc["operating_points"][1:] if p["figures"] is not None]
    assert len(points) >= 5
    text = cli(capsys, files / "model.skops", files / "held.csv", *COLUMNS, "--costs", "10:1", "--threshold", "0.5")
    printed = dict(re.findall(r"^  (.+?): --threshold-log-odds (\S+)$", text, flags=re.M))
    for p in points:
        f = p["figures"]
        # JSON: the float as json wrote it (Python's repr, every digit)
        again = assess_json(capsys, files, "--threshold-log-odds", repr(f["threshold_log_odds"]))
        assert in_use_counts(again) == (f["tp"], f["fp"]), p["kind"]
        assert again["threshold_log_odds"] == f["threshold_log_odds"]
    # text: the string printed in the terminal output, typed back as is
    labels = {"fpr": "false alarms <= {:g} %", "recall": "recall >= {:g} %"}
    for p in points:
        label = labels[p["kind"]].format(100 * p["target"]) if p["kind"] in labels else p["kind"]
        again = assess_json(capsys, files, "--threshold-log-odds", printed[label])
        assert in_use_counts(again) == (p["figures"]["tp"], p["figures"]["fp"]), label


def test_threshold_and_log_odds_together_are_refused(files, capsys):
    code = run(["assess", str(files / "model.skops"), str(files / "held.csv"), *COLUMNS,
                "--threshold", "0.5", "--threshold-log-odds", "0"])
    assert code == 2
    assert capsys.readouterr().err.strip() == "error: give --threshold or --threshold-log-odds, not both"


# --- 2. base rate ---------------------------------------------------------------------


def test_projection_matches_a_published_worked_example():
    # Gigerenzer, Gaissmaier, Kurz-Milcke, Schwartz & Woloshin 2007, "Helping doctors and patients make sense
    # of health statistics", Psychological Science in the Public Interest 8(2), the screening question posed
    # to gynecologists: prevalence 1 %, sensitivity 90 %, false-positive rate 9 %; in natural frequencies,
    # of 1,000 women 10 are ill and 9 of them test positive, 89 of the 990 others test positive too, so
    # about 1 in 10 positives (9 of 98) is ill (figures as quoted in public write-ups of the example, not read in the paper itself).
    recall = Rate(0.9, 0.9, 0.9, 9, 10)
    fpr = Rate(0.09, 0.09, 0.09, 89, 990)
    p = project_to_base_rate(recall, fpr, 0.01)
    assert round(p.precision.value, 2) == round(9 / 98, 2) == 0.09
    assert round(p.false_alarms_per_10k.value / 10) == 89  # per 1,000
    assert round(p.flagged_per_10k.value / 10) == 98
    # Bayes' rule written out: P(abuse | flagged) = P(flagged | abuse) P(abuse) / P(flagged)
    assert p.precision.value == pytest.approx(0.9 * 0.01 / (0.9 * 0.01 + 0.09 * 0.99), rel=1e-15)
    assert p.missed_per_10k.value == pytest.approx(10_000 * 0.01 * 0.1)


@settings(max_examples=80, deadline=None)
@given(st.integers(1, 400), st.integers(1, 400), st.integers(0, 400), st.integers(0, 400),
       st.floats(1e-4, 0.9999))
def test_projection_is_bayes_rule_with_intervals_carried(n_pos, n_neg, tp, fp, base):
    tp, fp = min(tp, n_pos), min(fp, n_neg)
    recall = Rate(tp / n_pos, *binomtest(tp, n_pos).proportion_ci(method="wilson"), tp, n_pos)
    fpr = Rate(fp / n_neg, *binomtest(fp, n_neg).proportion_ci(method="wilson"), fp, n_neg)
    p = project_to_base_rate(recall, fpr, base)
    flagged = base * recall.value + (1 - base) * fpr.value
    if flagged > 0:
        assert p.precision.value == pytest.approx(base * recall.value / flagged, rel=1e-12)
        assert p.precision.low <= p.precision.value + 1e-12 and p.precision.value <= p.precision.high + 1e-12
    for e in (p.false_alarms_per_10k, p.missed_per_10k, p.flagged_per_10k):
        assert e.low <= e.value + 1e-9 <= e.high + 2e-9


def test_base_rate_is_printed_as_a_projection_beside_the_measured_figures(files, capsys):
    text = cli(capsys, files / "model.skops", files / "held.csv", *COLUMNS, "--base-rate", "1%")
    measured = text.index("per 10,000 of each population (measured")
    projected = text.index("per 10,000 messages of traffic at a base rate of 1 % (a projection")
    assert measured < projected
    # every "per 10,000" names its population (issue 21): ok messages, flagged-class messages, traffic
    assert "ok messages" in text and "flagged-class messages" in text  # the column headings (two lines each)
    assert "per 10,000 messages of traffic" in " ".join(text.split())
    doc = assess_json(capsys, files, "--base-rate", "0.01")
    for p in doc["operating_points"]:
        if p["figures"] is not None:
            assert p["figures"]["projection"]["base_rate"] == 0.01


# --- 3. slices --------------------------------------------------------------------------


def test_slice_rates_match_pandas_and_scipy(files, capsys):
    doc = assess_json(capsys, files, "--threshold", "0.5", "--slice-by", "sent_at:month",
                      "--watchlist", ROOT / "demo_corpus" / "examples" / "watchlist.txt")
    model = load_model(files / "model.skops", normal_class="ok")
    messages = read_messages(files / "held.csv", "text", "label", "message")
    jll_flag = assess(model.view, model.featurizer.transform(messages.texts), messages.labels, threshold=0.5)
    assert jll_flag.flag_confusion.counts.tolist() == doc["flag_confusion"]["counts"]
    frame = pd.read_csv(files / "held.csv", dtype=str, keep_default_na=False)
    # the decisions, from scikit-learn's own pipeline: flagged when P(ok) <= 0.5
    from skops.io import get_untrusted_types, load

    pipe = load(files / "model.skops", trusted=get_untrusted_types(file=files / "model.skops"))
    proba = pipe.predict_proba(frame.text.tolist())
    frame["flagged"] = proba[:, list(pipe.classes_).index("ok")] <= 0.5
    frame["normal"] = frame.label == "ok"
    frame["error"] = frame.normal == frame.flagged  # a false alarm among normal, a miss among flagged-class
    frame["month"] = pd.to_datetime(frame.sent_at, utc=True).dt.strftime("%Y-%m")
    got = {s["name"]: s for s in doc["slices"]["slices"] if s["group"] == "sent_at by month"}
    assert sorted(got) == sorted(frame.month.unique())
    checked = 0
    for key, population in (("false_alarm_test", frame[frame.normal]), ("miss_test", frame[~frame.normal])):
        counts = population.groupby("month").error.agg(["sum", "count"])
        for month, (k, n) in counts.iterrows():
            test = got[month][key]
            ci = binomtest(int(k), int(n)).proportion_ci(method="wilson")
            assert (test["rate"]["numerator"], test["rate"]["denominator"]) == (k, n)
            assert test["rate"]["low"] == pytest.approx(ci.low, abs=1e-12)
            assert test["rate"]["high"] == pytest.approx(ci.high, abs=1e-12)
            rest = population[population.month != month].error
            assert (test["rest"]["numerator"], test["rest"]["denominator"]) == (rest.sum(), len(rest))
            # the reference: scipy's own Fisher exact test on the same 2x2 table, for both rates
            p = fisher_exact([[k, n - k], [rest.sum(), len(rest) - rest.sum()]]).pvalue
            assert test["p_value"] == pytest.approx(p, rel=1e-12), (key, month)
            checked += 1
    assert checked >= 6
    # the length slices partition the messages
    lengths = [s for s in doc["slices"]["slices"] if s["group"] == "message length"]
    assert sum(s["n_messages"] for s in lengths) == len(frame)
    # one Benjamini-Hochberg family over every test of the table, both rates: statsmodels' multipletests
    tests = [s[key] for s in doc["slices"]["slices"] for key in ("false_alarm_test", "miss_test")
             if s[key]["p_value"] is not None]
    assert len(tests) == doc["slices"]["n_tests"] > len(doc["slices"]["slices"])
    reject, expected, *_ = multipletests([t["p_value"] for t in tests], alpha=0.05, method="fdr_bh")
    np.testing.assert_allclose([t["adjusted_p_value"] for t in tests], expected, rtol=1e-12)
    assert [t["outcome"] in ("higher", "lower") for t in tests] == list(reject)


def test_a_slice_that_differs_in_misses_only_says_so():
    # the issue's case: short messages miss 6 of 13 flagged-class messages against 2.4 % elsewhere, with
    # false alarms alike; the false-alarm test alone would call every slice alike
    n_short, n_long = 40, 400
    short = np.arange(n_short + n_long) < n_short
    truth = np.zeros(n_short + n_long, dtype=bool)
    truth[:13] = True  # 13 flagged-class short messages
    truth[n_short:n_short + 250] = True  # 250 flagged-class long ones
    decided = truth.copy()
    decided[:6] = False  # 6 of the 13 short ones missed
    decided[n_short:n_short + 6] = False  # 6 of 250 = 2.4 % missed elsewhere
    decided[20:21] = True  # a false alarm in each slice
    decided[n_short + 300:n_short + 305] = True
    report = slicing.slice_report([slicing.by_values(np.where(short, "short", "long"), "length")], truth,
                                  decided, 0.95)
    by_name = {s.name: s for s in report.slices}
    assert by_name["short"].verdict == "miss rate higher" and by_name["long"].verdict == "miss rate lower"
    assert by_name["short"].false_alarm_test.outcome == "no difference"
    assert by_name["short"].miss_test.p_value == pytest.approx(
        fisher_exact([[6, 7], [6, 244]]).pvalue, rel=1e-12)  # scipy on the same table
    assert by_name["short"].miss_test.p_value < 1e-4
    assert [s.name for s in report.differing] == ["long", "short"]  # equal p: by name


def test_a_slice_that_differs_is_named():
    # 40 normal messages in slice "b" all flagged, none elsewhere: Fisher's test must single it out
    truth = np.zeros(400, dtype=bool)
    decided = np.zeros(400, dtype=bool)
    decided[:40] = True
    values = np.where(np.arange(400) < 40, "b", "a")
    report = slicing.slice_report([slicing.by_values(values, "house")], truth, decided, 0.95)
    assert sorted(s.name for s in report.differing) == ["a", "b"]
    assert all(s.false_alarm_test.adjusted_p_value < 1e-10 for s in report.differing)
    assert {s.name: s.verdict for s in report.slices} == {"a": "false-alarm rate lower", "b": "false-alarm rate higher"}
    # no flagged-class message at all: the miss rate is untested, never "no difference"
    assert all(s.miss_test.outcome == "untested" and np.isnan(s.miss_test.p_value) for s in report.slices)
    assert report.n_tests == 2
    # with no difference, none differs but the closest are still named
    calm = slicing.slice_report([slicing.by_values(values, "house")], truth, np.zeros(400, dtype=bool), 0.95)
    assert calm.differing == () and sorted(s.name for s in calm.most_different) == ["a", "b"]
    assert all(s.false_alarm_test.adjusted_p_value == 1.0 and s.verdict == "no difference"
               for s in calm.most_different)
    # a slice holding every message has no rest: both rates untested
    whole = slicing.slice_report([slicing.by_values(["x"] * 400, "house")], truth, decided, 0.95)
    assert whole.slices[0].verdict == "untested" and whole.n_tests == 0 and whole.most_different == ()


def test_a_date_column_with_non_dates_is_one_error(files, capsys):
    code = run(["assess", str(files / "model.skops"), str(files / "held.csv"), *COLUMNS,
                "--slice-by", "text:month"])
    assert code == 2
    err = capsys.readouterr().err
    assert err.startswith("error: column 'text':") and "are not dates" in err and err.count("\n") == 1


# --- 4. label errors ---------------------------------------------------------------------


@pytest.fixture(scope="module")
def demo_label_errors(files):
    """Suspected label errors of the whole demo corpus, with the model's own pipeline refitted on 5 folds."""
    model = load_model(files / "model.skops", normal_class="ok")
    messages = read_messages(DEMO, "text", "label")
    truth = class_indices(model.view, messages.labels)
    probabilities = out_of_sample_probabilities(model.unfitted_copy(), messages.texts, truth, model.classes, 5)
    X = model.featurizer.transform(messages.texts)
    return truth, probabilities, label_errors(model.view, X, truth, messages.ids, probabilities, folds=5)


def test_label_errors_are_cleanlabs_list(demo_label_errors):
    from cleanlab.filter import find_label_issues

    truth, probabilities, found = demo_label_errors
    expected = find_label_issues(truth, probabilities, return_indices_ranked_by="self_confidence")
    assert [s.index for s in found.suspected] == list(expected)
    assert list(find_suspected(truth, probabilities)) == list(expected)
    for s in found.suspected:
        assert s.label_probability == probabilities[s.index, truth[s.index]]
        assert s.favoured_class == found.classes[int(np.argmax(probabilities[s.index]))]


def test_the_documented_flips_are_found(demo_label_errors):
    truth, probabilities, found = demo_label_errors
    flips = set(pd.read_csv(NOISE, dtype=str).id)
    suspected = {s.id for s in found.suspected}
    hits = len(flips & suspected)
    precision, recall = hits / len(suspected), hits / len(flips)
    print(f"demo label errors: {len(suspected)} suspected, {hits} of {len(flips)} documented flips; "
          f"precision {precision:.3f}, recall {recall:.3f}")
    # far better than picking messages at random, whose precision would be the share of flips
    assert precision > 10 * len(flips) / len(truth)
    assert recall > 0.5


def test_error_review_marks_suspected_labels(files, capsys):
    doc = assess_json(capsys, files, "--label-errors", "--folds", "3", "--top", "1000")
    suspected = {s["id"] for s in doc["label_errors"]["suspected"]}
    reviewed = doc["errors"]["false_alarms"] + doc["errors"]["missed"]
    assert suspected and any(m["label_may_be_wrong"] for m in reviewed)
    assert all(m["label_may_be_wrong"] == (m["id"] in suspected) for m in reviewed)
    assert all(m["id"].startswith("tc-") for m in reviewed)  # ids from --id-col


# --- 5, 7. words, keys, layout ------------------------------------------------------------


def keys(obj):
    if isinstance(obj, dict):
        for k, v in obj.items():
            yield k
            yield from keys(v)
    elif isinstance(obj, list):
        for v in obj:
            yield from keys(v)


def full_result(files):
    model = load_model(files / "model.skops", normal_class="ok")
    messages = read_messages(files / "held.csv", "text", "label", "message")
    frame = pd.read_csv(files / "held.csv", dtype=str, keep_default_na=False)
    groups = [slicing.by_length(messages.texts), slicing.by_period(frame.sent_at, "sent_at", "week")]
    X = model.featurizer.transform(messages.texts)
    truth = class_indices(model.view, messages.labels)
    oos = out_of_sample_probabilities(model.unfitted_copy(), messages.texts, truth, model.classes, 3)
    return assess(model.view, X, messages.labels, ids=messages.ids, costs=(10, 1), base_rate=0.01, slices=groups,
                  label_errors=label_errors(model.view, X, truth, messages.ids, oos, folds=3))


def test_json_keys_are_snake_case(files):
    doc = to_json(full_result(files))
    bad = {k for k in keys(doc) if not re.fullmatch(r"[a-z][a-z0-9_]*", k)}
    assert not bad


INTERVAL = re.compile(r"-?[\d.]+( %)? \(-?[\d.]+ to -?[\d.]+\)")
OPENED = re.compile(r"\(-?[\d.]+( to)?( -?[\d.]*)?$")
CLOSING = re.compile(r"^\s*(to -?[\d.]+|-?[\d.]+ to -?[\d.]+)\)")


@pytest.mark.parametrize("width", [80, 120])
def test_tables_fit_without_splitting_a_number(files, width):
    result = full_result(files)
    buffer = __import__("io").StringIO()
    render(result, Console(file=buffer, width=width, no_color=True, highlight=False))
    lines = buffer.getvalue().splitlines()
    too_long = [line for line in lines if len(line.rstrip()) > width]
    assert not too_long
    assert "…" not in "".join(lines)  # nothing cut short
    # no interval opened on one line and closed on the next; no evidence parted from its token
    for line in lines:
        assert not re.match(r"^\s*[-+]\d+\.\d\d(,|$)", line), line
        assert not OPENED.search(line.rstrip(" │┃")), line
        assert not CLOSING.match(line.strip("│┃ ")), line
    # every rate of the decision in use, and every projected precision, appears whole in the text
    text = "\n".join(lines)
    m = result.flag_metrics
    for r in (m.precision, m.recall, m.specificity, m.false_alarm_rate, m.f1, m.accuracy):
        d = 2 if 100 * min(r.value, r.low) < 1 else 1
        assert f"{100 * r.value:.{d}f} % ({100 * r.low:.{d}f} to {100 * r.high:.{d}f})" in text
    for p in result.operating_points:
        if p.figures is not None:
            e = p.figures.projection.precision
            d = 2 if 100 * min(e.value, e.low) < 1 else 1
            assert f"{100 * e.value:.{d}f} % ({100 * e.low:.{d}f} to {100 * e.high:.{d}f})" in text
    assert len(INTERVAL.findall(text)) > 20


# --- 6. pictures read the result ------------------------------------------------------------


def test_reliability_and_score_shares_on_the_scales_the_pictures_draw(files):
    from scipy.special import logit

    result = full_result(files)
    cal = result.calibration
    finite = (cal.mean_predicted > 0) & (cal.mean_predicted < 1) & (np.abs(logit(cal.mean_predicted)) < 15)  # beyond, logit of a rounded mean loses digits
    np.testing.assert_allclose(cal.mean_predicted_log_odds[finite], logit(cal.mean_predicted[finite]), atol=1e-6)
    np.testing.assert_array_equal(cal.observed_log_odds, logit(cal.observed))
    s = result.scores
    np.testing.assert_allclose(s.shares.sum(axis=1), 1.0)
    np.testing.assert_allclose(s.shares * s.counts.sum(axis=1, keepdims=True), s.counts, rtol=1e-12)


def test_pictures_include_the_slices(files, capsys, tmp_path):
    from PIL import Image

    cli(capsys, files / "model.skops", files / "held.csv", *COLUMNS, "--slice-by", "sent_at:week",
        "--images", tmp_path, "--out", tmp_path / "out.txt")
    names = sorted(p.name for p in tmp_path.glob("*.png"))
    assert names == ["confusion.png", "precision_recall.png", "reliability.png", "roc.png", "scores.png", "slices.png"]
    for name in names:
        assert Image.open(tmp_path / name).size[0] > 600


def test_thresholds_beside_the_roc_picture_have_six_significant_figures(files, monkeypatch):
    # the issue's case: 16 digits beside the ROC picture; pages show 6 significant figures (Python's "%g" as
    # the reference), the JSON keeps every digit
    from explain.present import assess_pictures

    drawn = []
    monkeypatch.setattr(assess_pictures, "png_bytes", lambda fig: drawn.append(fig) or b"")
    result = full_result(files)
    assess_pictures.roc_picture(result)
    key = next(t.get_text() for t in drawn[0].findobj(lambda a: hasattr(a, "get_text"))
               if t.get_text().startswith("operating points"))
    printed = re.findall(r"log-odds >= (\S+)", key)
    exact = [p.figures.threshold_log_odds for p in result.operating_points
             if p.figures is not None and p.kind != "in use"]
    assert len(printed) == len(exact) >= 3
    assert printed == [f"{x:.6g}" for x in exact] and any(float(p) != x for p, x in zip(printed, exact))


# Table structure rather than terms: what a column counts or where a row sits.
STRUCTURE = {"class", "messages", "total", "id", "bin", "to", "chosen by", "positive class", "positive", "positives",
             "negatives", "true \\ decided"}


def test_assess_screen_terms_are_in_the_glossary(files, monkeypatch):
    import glossary
    from explain.present import assessment as present

    headings = []
    real = present._emit

    def spy(console, title, columns, rows, **kw):
        headings.extend(columns)
        return real(console, title, columns, rows, **kw)

    monkeypatch.setattr(present, "_emit", spy)
    model = load_model(files / "model.skops", normal_class="ok")
    messages = read_messages(files / "held.csv", "text", "label", "message")
    X = model.featurizer.transform(messages.texts)
    truth = class_indices(model.view, messages.labels)
    oos = out_of_sample_probabilities(model.unfitted_copy(), messages.texts, truth, model.classes, 3)
    result = assess(model.view, X, messages.labels, ids=messages.ids, costs=(10, 1), base_rate=0.01,
                    slices=[slicing.by_length(messages.texts)],
                    label_errors=label_errors(model.view, X, truth, messages.ids, oos, folds=3))
    render(result, Console(file=__import__("io").StringIO(), width=120, no_color=True))
    assert len(headings) > 40
    names = set(result.classes) | {"normal", "flagged"} | {f"{100 * q:g} %" for q in result.scores.quantile_levels}
    for heading in set(headings):
        h = re.sub(r" \(.*\)$", "", heading.replace("\n", " "))
        h = re.sub(r"^mean | (>=|from)$", "", h)
        ok = h in STRUCTURE or h in names or glossary.is_term(h) or (h.endswith("s") and glossary.is_term(h[:-1]))
        assert ok, heading


# --- 1. the shared decision rule, and why -----------------------------------------------------


@settings(max_examples=60, deadline=None)
@given(st.lists(st.floats(-50, 50), min_size=6, max_size=6), st.floats(-40, 40), st.floats(0.001, 0.999))
def test_decision_rule_flags_at_log_odds_exactly(values, L, p):
    from scipy.special import logit

    from explain.model.decision import DecisionRule

    jll = np.array(values).reshape(2, 3)
    rule = DecisionRule(3, 1, log_odds=L)
    flagged = rule.flag_log_odds(jll) >= L
    assert ((rule.decide(jll) != 1) == flagged).all()
    # at its own score a message is flagged, one float above it is not
    own = rule.flag_log_odds(jll)[0]
    assert DecisionRule(3, 1, log_odds=own).decide(jll)[0] != 1
    assert DecisionRule(3, 1, log_odds=np.nextafter(own, np.inf)).decide(jll)[0] == 1
    by_probability = DecisionRule(3, 1, threshold=p)
    assert by_probability.threshold_log_odds == logit(p)
    assert (by_probability.decide(jll) == DecisionRule(3, 1, log_odds=float(logit(p))).decide(jll)).all()


def test_why_takes_the_exact_threshold(files, capsys):
    from explain.analysis.batch import score_texts

    model = load_model(files / "model.skops", normal_class="ok")
    text = (ROOT / "demo_corpus" / "examples" / "clear_scam.txt").read_text(encoding="utf-8")
    own = float(score_texts(model, [text]).flag_log_odds[0])
    decisions = []
    for L in (own, np.nextafter(own, np.inf)):
        code = run(["why", str(files / "model.skops"), "--file", str(ROOT / "demo_corpus" / "examples" / "clear_scam.txt"),
                    "--threshold-log-odds", repr(float(L)), "--format", "json"])
        out, err = capsys.readouterr()
        assert code == 0, err
        decisions.append(json.loads(out)["decision"])
    assert decisions[0] != "ok" and decisions[1] == "ok"


@pytest.mark.parametrize("extra, message", [
    (["--slice-by", "house"], "held.csv has no column 'house'; columns found: message, sent_at, text, label"),
    (["--slice-by", "message"], "column 'message' has 3000 distinct values, more than 60 slices"),
    (["--slice-by", "sent_at:fortnight"], "held.csv has no column 'sent_at:fortnight'"),
    (["--base-rate", "0"], "the base rate must be a share strictly between 0 and 1, got 0"),
    (["--base-rate", "150%"], "--base-rate must be between 0 and 1"),
    (["--label-errors", "--folds", "1"], "--folds must be at least 2, got 1"),
    (["--label-errors", "--folds", "5000"], "5000 folds need at least 5000 labelled messages of every class"),
    (["--watchlist", "no-such-file.txt"], "cannot read the watchlist no-such-file.txt"),
    (["--id-col", "nope"], "held.csv has no column 'nope'"),
    (["--threshold-log-odds", "nan"], "the threshold log-odds must be a number, got nan"),
])
def test_bad_options_end_in_one_error_line(files, capsys, extra, message):
    code = run(["assess", str(files / "model.skops"), str(files / "held.csv"), *COLUMNS, "--id-col", "message", *extra]
               if "--id-col" not in extra else
               ["assess", str(files / "model.skops"), str(files / "held.csv"), *COLUMNS, *extra])
    out, err = capsys.readouterr()
    assert code == 2 and out == ""
    assert err.startswith("error: ") and message in err and err.count("\n") == 1, err


def test_the_refitted_copy_has_the_models_own_settings(tmp_path):
    from sklearn.feature_extraction.text import CountVectorizer, TfidfTransformer
    from sklearn.naive_bayes import ComplementNB
    from sklearn.pipeline import Pipeline
    from skops.io import dump

    frame = pd.read_csv(DEMO, dtype=str, keep_default_na=False).iloc[:600]
    original = Pipeline([("v", CountVectorizer(ngram_range=(1, 2), min_df=2, lowercase=False)),
                         ("t", TfidfTransformer(sublinear_tf=True)), ("c", ComplementNB(alpha=0.3, norm=True))])
    original.fit(frame.text, frame.label)
    dump(original, tmp_path / "m.skops")
    model = load_model(tmp_path / "m.skops", trust=[])
    copy = model.unfitted_copy()
    steps = [s for _, s in copy.steps]
    assert [type(s) for s in steps] == [type(s) for _, s in original.steps]
    for mine, theirs in zip(steps, (s for _, s in original.steps)):
        assert mine.get_params() == theirs.get_params()
        assert not hasattr(mine, "vocabulary_") and not hasattr(mine, "idf_") and not hasattr(mine, "classes_")


# --- 6. the summary's recommendation --------------------------------------------------------


def _point(kind, tp, fp, target=None, n_pos=100, n_neg=900, costs=None):
    from explain.analysis.ranking import FigureSettings, OperatingPoint, threshold_figures

    how = FigureSettings(costs=costs, confidence=0.95)
    return OperatingPoint(kind, target, True, None, threshold_figures(0.5, tp, fp, n_pos, n_neg, how))


def test_the_recommendation_names_a_point_that_beats_the_rule_on_both_rates():
    from types import SimpleNamespace

    from explain.analysis.report_contents import recommend

    in_use = _point("in use", tp=90, fp=20)
    trade = _point("fpr", tp=80, fp=5, target=0.01)  # fewer false alarms, more misses: a trade, not better
    better = _point("recall", tp=92, fp=15, target=0.9)  # fewer of both
    also = _point("fpr", tp=90, fp=19, target=0.05)  # better too, but more errors than `better`
    rec = recommend(SimpleNamespace(operating_points=[in_use, trade, also, better]))
    assert rec.better is better and rec.least_cost is None
    assert recommend(SimpleNamespace(operating_points=[in_use, trade])).better is None
    # equal on both rates does not beat it (common practice, no source: Pareto dominance)
    assert recommend(SimpleNamespace(operating_points=[in_use, _point("fpr", tp=90, fp=20)])).better is None
    cheap = _point("least cost", tp=95, fp=30, costs=(1, 5))
    assert recommend(SimpleNamespace(operating_points=[in_use, trade, cheap])).least_cost is cheap


def test_the_report_summary_recommends_and_names_the_least_cost_point(files, capsys, tmp_path):
    out = tmp_path / "r.pdf"
    code = run(["report", str(files / "model.skops"), "--data", str(files / "held.csv"), "--normal-class", "ok",
                "--costs", "1:5", "--out", str(out), "--json", str(tmp_path / "r.json"), "--html",
                str(tmp_path / "r.html")])
    assert code == 0, capsys.readouterr().err
    twin = json.loads((tmp_path / "r.json").read_text(encoding="utf-8"))
    rec = twin["summary"]["recommendation"]
    points = twin["assessment"]["operating_points"]
    least = next(p for p in points if p["kind"] == "least cost")
    assert rec["least_cost"] == least and twin["costs"] == [1.0, 5.0]
    in_use = next(p for p in points if p["kind"] == "in use")["figures"]
    beating = [p for p in points if p["kind"] != "in use" and p["figures"] and p["figures"]["fp"] <= in_use["fp"]
               and p["figures"]["fn"] <= in_use["fn"] and (p["figures"]["fp"], p["figures"]["fn"]) != (in_use["fp"], in_use["fn"])]
    assert (rec["better"] is None) == (not beating)
    page = (tmp_path / "r.html").read_text(encoding="utf-8")
    assert "the least-cost point is threshold log-odds" in page
    assert ("beats the rule in use on both rates" in page) == bool(beating)
    assert ("no listed operating point beats the rule in use" in page) == (not beating)
