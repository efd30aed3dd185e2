"""The printable review report: its PDF, HTML and JSON twins, redaction, safe rendering, bad input.

The model keeps whole whitespace-separated words as tokens, so e-mail
addresses, URLs and phone numbers planted in the data become tokens of its
vocabulary: redaction then has to mask them in tables, pictures and ledgers,
not only in message texts.
"""

from __future__ import annotations

import http.server
import json
import os
import re
import threading
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from pypdf import PdfReader
from sklearn.feature_extraction.text import CountVectorizer
from sklearn.metrics import brier_score_loss, confusion_matrix, precision_recall_fscore_support, roc_auc_score
from sklearn.naive_bayes import MultinomialNB
from sklearn.pipeline import Pipeline

from clirun import nbledger
from pdf_text import pdftotext_pages
from explain.analysis.report_contents import ReportSettings, build_report
from explain.analysis.risk import read_watchlist
from explain.model.data_io import read_messages
from explain.model.loading import load_model
from explain.present.report_json import dumps

ROOT = Path(__file__).resolve().parents[1]
CORPUS = ROOT / "demo_corpus"
EPOCH = "1780000000"  # 2026-05-28, fixed so that runs are comparable
# Reserved example values only (RFC 2606 domains, 555-01xx numbers, RFC 5737 addresses).
PLANTED = (
    "moorings.warden@example.org",
    "http://quay-fees.example.net/pay/8812",
    "555-0147",
    "192.0.2.44",
    "8812004417",
    # people (issue 18): invented names, a Luhn-valid test card, the ISO 13616 example IBAN, an invented
    # postcode, address and date of birth, an RFC 3849 IPv6 address
    "Oksana", "Petrenko", "Tomasz", "Nowak",
    "4111 1111 1111 1111", "GB82 WEST 1234 5698 7654 32", "TD4 7QX", "14 Gull Yard", "12/03/1984", "2001:db8::17",
)
SECTIONS = (
    "Summary for non-specialists", "Performance", "What the filter learned", "Explained messages", "Errors",
    "Risks", "Method", "Cautions and limitations",
)


def _planted_rows(label: str, n: int) -> list[dict]:
    return [
        {"id": f"planted-{label}-{i}", "sent_at": "2026-11-01T09:00:00Z", "label": label,
         "text": f"Dear Oksana Petrenko,\nUrgent: your levy refund is held. Reply to {PLANTED[0]} or pay at {PLANTED[1]}, "
                 f"ring {PLANTED[2]}, server {PLANTED[3]}, reference {PLANTED[4]}. Card {PLANTED[9]} or IBAN "
                 f"{PLANTED[10]}; deliver to {PLANTED[12]}, {PLANTED[11]}; DOB {PLANTED[13]}; from {PLANTED[14]}.\n"
                 "Kind regards,\nTomasz Nowak"}
        for i in range(n)
    ]


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    """A model with personal tokens in its vocabulary, labelled data and messages to explain."""
    import skops.io as sio

    folder = tmp_path_factory.mktemp("report")
    frame = pd.read_csv(CORPUS / "messages.csv", dtype=str, keep_default_na=False)
    train = pd.concat([frame[frame.sent_at < "2026-10-01"], pd.DataFrame(_planted_rows("scam", 12))])
    test = pd.concat([frame[frame.sent_at >= "2026-10-01"].iloc[:700], pd.DataFrame(_planted_rows("scam", 3))])
    test.to_csv(folder / "test.csv", index=False)
    pipeline = Pipeline([("words", CountVectorizer(token_pattern=r"[^\s,]+")), ("nb", MultinomialNB())])
    pipeline.fit(train.text, train.label)
    sio.dump(pipeline, folder / "filter.skops")
    pd.DataFrame(
        [{"id": "ask-1", "text": f"Please confirm your payment to {PLANTED[0]} today, ring {PLANTED[2]}."},
         {"id": "ask-2", "text": f"The workshop key is with Marisol; the rota is at {PLANTED[1]}"}]
    ).to_csv(folder / "explain.csv", index=False)
    return folder


@pytest.fixture(scope="module")
def built(files, tmp_path_factory):
    """One report with the default redaction (personal), through the command line."""
    out = tmp_path_factory.mktemp("built")
    env = os.environ.get("SOURCE_DATE_EPOCH")
    os.environ["SOURCE_DATE_EPOCH"] = EPOCH
    try:
        from explain.cli import run

        code = run(["report", str(files / "filter.skops"), "--data", str(files / "test.csv"),
                    "--explain", str(files / "explain.csv"), "--normal-class", "ok",
                    "--watchlist", str(CORPUS / "examples" / "watchlist.txt"),
                    "--out", str(out / "r.pdf"), "--html", str(out / "r.html"), "--json", str(out / "r.json")])
    finally:
        os.environ.pop("SOURCE_DATE_EPOCH") if env is None else os.environ.__setitem__("SOURCE_DATE_EPOCH", env)
    assert code == 0
    reader = PdfReader(out / "r.pdf")
    return {
        "pdf": out / "r.pdf",
        "reader": reader,
        "text": "\n".join(page.extract_text() for page in reader.pages),
        "html": (out / "r.html").read_text(encoding="utf-8"),
        "json": (out / "r.json").read_text(encoding="utf-8"),
    }


def _squeezed(text: str) -> str:
    return re.sub(r"\s+", "", text)


# --- the PDF --------------------------------------------------------------------------


def test_pdf_pages_headings_fingerprint_numbers_images_bookmarks(built, files):
    reader, text = built["reader"], built["text"]
    assert 8 <= len(reader.pages) <= 40
    for heading in SECTIONS:
        assert heading in text, heading
    sha = load_model(files / "filter.skops", normal_class="ok").sha256
    assert sha in _squeezed(text)  # the cover prints it whole (it may wrap)
    assert f"page 2 of {len(reader.pages)}" in text and f"page {len(reader.pages)} of {len(reader.pages)}" in text
    images = sum(len(page.images) for page in reader.pages)
    assert images >= 7  # confusion, ROC, PR, reliability, scores, and a cloud and bars per flagged class
    titles = [item.title for item in reader.outline if not isinstance(item, list)]
    for heading in SECTIONS:
        assert heading in titles
    assert reader.metadata.creation_date.year == 2026 and reader.metadata.creation_date.month == 5


def test_contents_lists_the_page_of_each_section(built):
    # on the cover page below the facts, in two columns (or on the next page when the cover is full)
    contents_page = next(t for t in (p.extract_text() for p in built["reader"].pages[:2]) if "Contents" in t)
    for heading in SECTIONS:
        page = int(re.search(re.escape(heading) + r"[\s.]*(\d+)", contents_page).group(1))
        assert heading in built["reader"].pages[page - 1].extract_text()


# --- the JSON twin ---------------------------------------------------------------------


def test_json_figures_equal_scikit_learn(built, files):
    """Figures of the JSON twin against scikit-learn's own metrics (source: scikit-learn 1.x, sklearn.metrics)."""
    twin = json.loads(built["json"])
    assert twin["schema"] == "nbledger.report/1"
    import skops.io as sio
    from scipy.special import logsumexp

    path = files / "filter.skops"
    pipeline = sio.load(path, trusted=sio.get_untrusted_types(file=path))  # our own file
    data = read_messages(files / "test.csv", "text", "label")
    words, nb = pipeline[0], pipeline[-1]
    jll = nb.predict_joint_log_proba(words.transform(data.texts))
    classes = list(pipeline.classes_)
    decided = pipeline.predict(data.texts)
    a = twin["assessment"]
    assert a["confusion"]["counts"] == confusion_matrix(data.labels, decided, labels=a["confusion"]["labels"]).tolist()
    precision, recall, _, _ = precision_recall_fscore_support(data.labels, decided, labels=a["classes"], zero_division=0)
    for m, p, r in zip(a["class_metrics"], precision, recall):
        assert m["precision"]["value"] == pytest.approx(p, rel=1e-12)
        assert m["recall"]["value"] == pytest.approx(r, rel=1e-12)
    flagged = data.labels != "ok"
    ok = classes.index("ok")
    # the flag score log P(not ok) - log P(ok): probabilities round to 1.0 where log-odds stay distinct
    score = logsumexp(np.delete(jll, ok, axis=1), axis=1) - jll[:, ok]
    p_not_ok = 1 - pipeline.predict_proba(data.texts)[:, ok]
    assert a["flag_ranking"]["auc"]["auc"] == pytest.approx(roc_auc_score(flagged, score), abs=1e-9)
    assert a["calibration"]["brier_score"] == pytest.approx(brier_score_loss(flagged, p_not_ok), abs=1e-9)
    fpr = a["flag_metrics"]["false_alarm_rate"]
    assert twin["summary"]["false_alarms"]["value"] == pytest.approx(10_000 * fpr["value"])
    assert twin["summary"]["missed"]["value"] == pytest.approx(10_000 * (1 - a["flag_metrics"]["recall"]["value"]))
    # each explained message's ledger closes on scikit-learn's log-odds (predict_joint_log_proba differences)
    for message, text in zip(twin["explained_messages"]["messages"], read_messages(files / "explain.csv", "text").texts):
        row = nb.predict_joint_log_proba(words.transform([text]))[0]
        ledger = message["ledger"]
        credit, debit = classes.index(ledger["credit_classes"][0]), classes.index(ledger["debit_class"])
        assert ledger["closing"] == pytest.approx(row[credit] - row[debit], rel=1e-9)
        assert ledger["opening"] + sum(e["amount"] for e in ledger["entries"]) == pytest.approx(ledger["closing"], rel=1e-9)


def test_json_twin_is_byte_identical_across_runs(files, monkeypatch):
    monkeypatch.setenv("SOURCE_DATE_EPOCH", EPOCH)
    model = load_model(files / "filter.skops", normal_class="ok")
    data = read_messages(files / "test.csv", "text", "label")
    watch = read_watchlist(CORPUS / "examples" / "watchlist.txt")
    first = dumps(build_report(model, data=data, watchlist=watch))
    second = dumps(build_report(load_model(files / "filter.skops", normal_class="ok"),
                                data=read_messages(files / "test.csv", "text", "label"), watchlist=watch))
    assert first.encode() == second.encode()
    assert json.loads(first)["date"] == "2026-05-28T20:26:40+00:00"


def test_printed_thresholds_reproduce_their_rows_and_the_base_rate_is_projected(files):
    """Each operating point's threshold, as the JSON twin holds it (every digit), flags exactly its messages.

    Pages show it to 6 significant figures (the issue's rule; checked here against Python's own ``%g``).
    """
    from explain.present.numbers import threshold

    model = load_model(files / "filter.skops", normal_class="ok")
    data = read_messages(files / "test.csv", "text", "label")
    twin = json.loads(dumps(build_report(model, data=data)))
    points = [p for p in twin["assessment"]["operating_points"] if p["kind"] != "in use" and p["figures"]]
    assert points
    truth = np.isin(data.labels, ["advert", "scam"])
    import skops.io as sio

    path = files / "filter.skops"
    pipeline = sio.load(path, trusted=sio.get_untrusted_types(file=path))
    jll = pipeline[-1].predict_joint_log_proba(pipeline[:-1].transform(list(data.texts)))  # scikit-learn's own
    ok = list(pipeline.classes_).index("ok")
    flag_log_odds = np.logaddexp.reduce(np.delete(jll, ok, axis=1), axis=1) - jll[:, ok]
    for point in points:
        printed = float(repr(point["figures"]["threshold_log_odds"]))
        on_page = threshold(printed)
        assert float(on_page) == float(f"{printed:.6g}") and len(on_page.lstrip("-").replace(".", "").lstrip("0")) <= 6
        again = json.loads(dumps(build_report(model, data=data, settings=ReportSettings(threshold_log_odds=printed))))
        flagged = flag_log_odds >= printed
        for key, count in (("tp", flagged & truth), ("fp", flagged & ~truth)):
            assert point["figures"][key] == int(count.sum())  # from the joint log-likelihoods directly
            in_use = next(p for p in again["assessment"]["operating_points"] if p["kind"] == "in use")
            assert in_use["figures"][key] == point["figures"][key]
    # Bayes' rule at base rate p from the measured recall r and false-alarm rate f, written out here
    p = 0.02
    projected = json.loads(dumps(build_report(model, data=data, settings=ReportSettings(base_rate=p))))["summary"]
    decided = pipeline.predict(list(data.texts)) != "ok"
    r, f = (decided & truth).sum() / truth.sum(), (decided & ~truth).sum() / (~truth).sum()
    assert projected["base_rate"] == pytest.approx(truth.mean())
    assert projected["projection"]["precision"]["value"] == pytest.approx(p * r / (p * r + (1 - p) * f))
    assert projected["projection"]["false_alarms_per_10k"]["value"] == pytest.approx(10_000 * (1 - p) * f)
    assert projected["projection"]["missed_per_10k"]["value"] == pytest.approx(10_000 * p * (1 - r))
    with pytest.raises(Exception, match="not both"):
        ReportSettings(threshold=0.5, threshold_log_odds=0.0)


def test_audit_figures_are_the_ones_assess_computes(files, tmp_path, capsys):
    """--slice-by and --label-errors: report and assess share one function, so their figures are equal."""
    common = ("--slice-by", "sent_at:month", "--label-errors", "--folds", "3", "--normal-class", "ok")
    report = nbledger(capsys, "report", files / "filter.skops", "--data", files / "test.csv", *common,
                      "--redact", "none", "--out", tmp_path / "r.pdf", "--json", tmp_path / "r.json")
    assert report.code == 0, report.err
    assessed = nbledger(capsys, "assess", files / "filter.skops", files / "test.csv", "--text-col", "text",
                        "--label-col", "label", *common, "--format", "json")
    assert assessed.code == 0, assessed.err
    mine = json.loads((tmp_path / "r.json").read_text(encoding="utf-8"))["assessment"]
    theirs = json.loads(assessed.out)["assessment"]
    assert mine["slices"] == theirs["slices"] and len(mine["slices"]["slices"]) > 2
    assert mine["label_errors"]["suspected"] == theirs["label_errors"]["suspected"]
    text = "\n".join(page.extract_text() for page in PdfReader(tmp_path / "r.pdf").pages)
    for heading in ("Slices", "Suspected label errors", "Benjamini", "Northcutt"):
        assert heading in text, heading


def test_a_raw_e_mail_is_explained_in_the_text_view_why_uses(files, tmp_path, capsys):
    """--explain FILE.eml reads the e-mail as why --file does: as given (a card with no view), or in --text-view."""
    eml = CORPUS / "examples" / "notice.eml"
    for view in ([], ["--text-view", "subject+body"]):
        made = nbledger(capsys, "report", files / "filter.skops", "--normal-class", "ok", "--explain", eml, *view,
                        "--out", tmp_path / "r.pdf", "--json", tmp_path / "r.json")
        assert made.code == 0, made.err
        shown = json.loads((tmp_path / "r.json").read_text(encoding="utf-8"))["explained_messages"]["messages"][0]
        why = nbledger(capsys, "why", files / "filter.skops", "--normal-class", "ok", "--file", eml, *view,
                       "--format", "json")
        assert why.code == 0, why.err
        assert shown["id"] == "notice.eml"
        assert shown["ledger"]["closing"] == json.loads(why.out)["ledger"]["closing"]
        # The filter's card records no text view: without --text-view the file is explained as given.
        assert shown["text_view"] == json.loads(why.out)["text_view"] == ("subject+body" if view else "raw")
        assert ("Content-Type" in (shown["text"] or "")) == (not view)


# --- redaction -------------------------------------------------------------------------


def test_personal_values_appear_nowhere_with_personal_redaction(built, files):
    for value in PLANTED:
        assert _squeezed(value) not in _squeezed(built["text"]), value
        assert value not in built["html"], value
        assert value not in built["json"], value
        assert value.lower() not in built["json"].lower() or " " in value, value  # tokens are lower case


def test_every_page_says_internal(built):
    pages = [page.extract_text() for page in built["reader"].pages]
    assert pages and all("Internal" in page for page in pages)
    assert '"circulation": "internal"' in built["json"] and 'content="Internal"' in built["html"]


def test_poppler_reads_internal_on_every_page_and_no_planted_value(built):
    pages = pdftotext_pages(built["pdf"])
    assert len(pages) == len(built["reader"].pages)
    for n, page in enumerate(pages, 1):
        assert "Internal" in page, n
        for value in PLANTED:
            assert _squeezed(value) not in _squeezed(page), (n, value)


def test_ids_of_misjudged_messages_are_printed_verbatim_in_the_error_tables(built, files):
    """Every id the error tables list is a message scikit-learn's predict misjudges, printed as given."""
    import skops.io as sio

    path = files / "filter.skops"
    pipeline = sio.load(path, trusted=sio.get_untrusted_types(file=path))  # our own file
    frame = pd.read_csv(files / "test.csv", dtype=str, keep_default_na=False)
    decided = pipeline.predict(frame.text)
    errors = json.loads(built["json"])["assessment"]["errors"]
    false_alarms = set(frame.id[(frame.label == "ok") & (decided != "ok")])
    missed = set(frame.id[(frame.label != "ok") & (decided == "ok")])
    assert (errors["n_false_alarms"], errors["n_missed"]) == (len(false_alarms), len(missed))
    listed = [(x["id"], false_alarms) for x in errors["false_alarms"]] + [(x["id"], missed) for x in errors["missed"]]
    assert len(listed) >= 4
    pages = pdftotext_pages(built["pdf"])
    tables = "".join(p for p in pages if "Most confident false alarms" in p or "Most confident misses" in p)
    for shown_id, truth in listed:
        assert shown_id in truth, shown_id
        assert shown_id in tables.split(), shown_id  # whole, on one line, not cut
        assert f'<td class="id whole">{shown_id}</td>' in built["html"], shown_id


def test_message_ids_holding_an_address_are_keyed_pseudonyms_stable_across_runs(files, tmp_path, capsys):
    """--id-col names the ids; those holding an address are shown as HMAC-SHA-256 pseudonyms (RFC 2104) under
    --id-key-file, the same in every run with the same key; the other ids verbatim; the address nowhere."""
    from explain.analysis.redaction import pseudonym

    frame = pd.read_csv(files / "test.csv", dtype=str, keep_default_na=False)
    frame["msgid"] = [f"<{i}.{n}@mail.example.org>" if n % 2 else i for n, i in enumerate(frame.id)]
    frame.to_csv(tmp_path / "ided.csv", index=False)
    secret = b"tideway commons secret 2026"
    (tmp_path / "org.key").write_bytes(secret + b"\n")
    given = dict(zip(frame.id, frame.msgid))
    twins = []
    for run in (1, 2):
        made = nbledger(capsys, "report", files / "filter.skops", "--data", tmp_path / "ided.csv", "--normal-class", "ok",
                        "--id-col", "msgid", "--id-key-file", tmp_path / "org.key",
                        "--out", tmp_path / f"r{run}.pdf", "--json", tmp_path / f"r{run}.json")
        assert made.code == 0, made.err
        twins.append(json.loads((tmp_path / f"r{run}.json").read_text(encoding="utf-8")))
    errors = [twin["assessment"]["errors"] for twin in twins]
    ids = [[x["id"] for x in e["false_alarms"] + e["missed"]] for e in errors]
    assert ids[0] == ids[1]
    expected = {pseudonym(secret, m) if "@" in m else m for m in given.values()}
    assert set(ids[0]) <= expected
    assert any(i.startswith("id-") for i in ids[0]) and any(not i.startswith("id-") for i in ids[0])
    text = "".join(pdftotext_pages(tmp_path / "r1.pdf"))
    for i in ids[0]:
        assert i in text.split(), i
    assert "mail.example.org" not in text and "mail.example.org" not in json.dumps(twins[0])


@pytest.mark.parametrize("redact", ["personal", "none"])
def test_pictures_draw_no_personal_token(files, picture_inputs, redact, tmp_path):
    """Every word laid out in a word cloud and every text drawn in the report's pictures holds no planted value;
    with --redact none (the control) planted values are drawn, so the check can fail."""
    import skops.io as sio

    from explain.present.report_pages import draw_pictures

    # A model trained on many planted messages, so that planted values rank among the tokens drawn.
    frame = pd.read_csv(CORPUS / "messages.csv", dtype=str, keep_default_na=False)
    train = pd.concat([frame[frame.sent_at < "2026-10-01"], pd.DataFrame(_planted_rows("scam", 200))])
    pipeline = Pipeline([("words", CountVectorizer(token_pattern=r"[^\s,]+")), ("nb", MultinomialNB())])
    sio.dump(pipeline.fit(train.text, train.label), tmp_path / "planted.skops")
    model = load_model(tmp_path / "planted.skops", normal_class="ok")
    data = read_messages(files / "test.csv", "text", "label")
    report = build_report(model, data=data, settings=ReportSettings(redact=redact))
    pictures = draw_pictures(report)
    assert any(name.startswith("cloud_") for name in pictures) and any(name.startswith("bars_") for name in pictures)
    drawn = "\n".join(map(str, picture_inputs)).lower()
    assert any(v in " ".join(map(str, model.view.tokens)) for v in PLANTED)  # they are tokens of the model
    leaked = [value for value in PLANTED if value.lower() in drawn]
    if redact == "personal":
        assert leaked == [] and "[ip " in drawn
    else:
        assert len(leaked) >= 3, leaked


def test_without_redaction_the_values_are_there(files):
    """The control: the same inputs with --redact none show the planted values (so the test above can fail)."""
    model = load_model(files / "filter.skops", normal_class="ok")
    report = build_report(model, settings=ReportSettings(redact="none"),
                          explain=read_messages(files / "explain.csv", "text"))
    text = dumps(report)
    assert PLANTED[0] in text and PLANTED[2] in text


def test_bodies_redaction_prints_no_message_text(files):
    model = load_model(files / "filter.skops", normal_class="ok")
    report = build_report(model, settings=ReportSettings(redact="bodies"),
                          explain=read_messages(files / "explain.csv", "text"))
    twin = json.loads(dumps(report))
    assert twin["redaction"] == "bodies"
    for message in twin["explained_messages"]["messages"]:
        assert message["text"] is None
        assert all(not e["spans"] for e in message["ledger"]["entries"])
    assert "Marisol" not in json.dumps(twin)


# --- safe rendering ----------------------------------------------------------------------


class _Counter(http.server.BaseHTTPRequestHandler):
    hits: list = []

    def do_GET(self):  # noqa: N802 (the standard library's name)
        type(self).hits.append(self.path)
        self.send_response(200)
        self.end_headers()

    def log_message(self, *args):
        pass


@pytest.fixture()
def loopback():
    """A loopback HTTP server that counts every request it gets."""
    _Counter.hits = []
    server = http.server.ThreadingHTTPServer(("127.0.0.1", 0), _Counter)
    threading.Thread(target=server.serve_forever, daemon=True).start()
    yield server.server_address[1], _Counter.hits
    server.shutdown()


def _hostile(port: int) -> list[str]:
    return [
        f'<img src="http://127.0.0.1:{port}/img">',
        f"<style>body {{ background: url(http://127.0.0.1:{port}/css) }}</style>",
        f"<script>fetch('http://127.0.0.1:{port}/js')</script>",
        '<link rel="stylesheet" href="file:///etc/passwd">',
    ]


def test_hostile_texts_are_shown_literally_and_nothing_is_fetched(files, loopback, tmp_path, capsys):
    port, hits = loopback
    hostile = _hostile(port)
    name = tmp_path / "m<b onclick=x>.csv"
    pd.DataFrame([{"id": f"h{i}", "text": f"Your parcel fee is unpaid {h} pay today"} for i, h in enumerate(hostile)]
                 ).to_csv(name, index=False)
    result = nbledger(capsys, "report", files / "filter.skops", "--explain", name, "--normal-class", "ok",
                      "--redact", "none", "--title", f'<img src="http://127.0.0.1:{port}/title">',
                      "--out", tmp_path / "h.pdf", "--html", tmp_path / "h.html")
    assert result.code == 0, result.err
    assert hits == []
    page = (tmp_path / "h.html").read_text(encoding="utf-8")
    for h in hostile:
        assert h not in page  # never as markup
        assert h.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;").replace('"', "&#34;").replace(
            "'", "&#39;") in page
    assert "<script" not in page
    text = _squeezed("\n".join(p.extract_text() for p in PdfReader(tmp_path / "h.pdf").pages))
    for h in hostile:
        assert _squeezed(h) in text
    assert _squeezed("m<b onclick=x>.csv") in text


def test_headless_chromium_fetches_nothing_logs_no_error_and_draws(files, loopback, tmp_path, capsys):
    """The HTML twin in Debian's chromium: no network request, no console error, a screenshot that is not blank."""
    import shutil
    import subprocess

    from PIL import Image

    browser = shutil.which("chromium") or shutil.which("chromium-browser")
    if browser is None:
        if os.environ.get("CI") == "true":
            pytest.fail("chromium is missing under CI (make system-packages installs it)")
        pytest.skip("chromium is not installed (make system-packages installs it)")
    port, hits = loopback
    name = tmp_path / "m.csv"
    pd.DataFrame([{"id": f"h{i}", "text": h} for i, h in enumerate(_hostile(port))]).to_csv(name, index=False)
    result = nbledger(capsys, "report", files / "filter.skops", "--data", files / "test.csv", "--explain", name,
                      "--normal-class", "ok", "--redact", "none", "--out", tmp_path / "c.pdf",
                      "--html", tmp_path / "c.html")
    assert result.code == 0, result.err
    shot = tmp_path / "shot.png"
    done = subprocess.run(
        [browser, "--headless", "--no-sandbox", "--disable-gpu", "--hide-scrollbars", "--enable-logging=stderr",
         "--v=0", "--window-size=1000,1400", f"--screenshot={shot}", (tmp_path / "c.html").as_uri()],
        capture_output=True, text=True, timeout=120,
    )
    assert shot.is_file(), done.stderr[-2000:]
    assert hits == []
    console = [l for l in done.stderr.splitlines() if "CONSOLE" in l or "Uncaught" in l or "Refused" in l]
    assert console == []
    picture = np.asarray(Image.open(shot).convert("L"))
    assert picture.std() > 10 and len(np.unique(picture)) > 20


# --- bad input ---------------------------------------------------------------------------


def _bad(capsys, files, tmp_path, *args) -> str:
    result = nbledger(capsys, "report", files / "filter.skops", "--normal-class", "ok", *args)
    result.err = "\n".join(l for l in result.err.splitlines() if not l.startswith("report: "))  # progress lines
    line = result.one_error_line()
    assert not [p for p in tmp_path.rglob("*") if p.suffix in (".pdf", ".html", ".json") or p.name.startswith(".")]
    return line


def test_bad_input_is_one_line_and_writes_nothing(files, tmp_path, capsys):
    out = ("--out", tmp_path / "r.pdf", "--html", tmp_path / "r.html")
    assert "does not exist" in _bad(capsys, files, tmp_path, "--out", tmp_path / "missing" / "r.pdf")
    assert ".pdf" in _bad(capsys, files, tmp_path, "--out", tmp_path / "r.docx")
    assert "--max-messages" in _bad(capsys, files, tmp_path, "--max-messages", "0", *out)
    (tmp_path / "bytes.txt").write_bytes(b"\xff\xfe\x00binary\x00")
    assert "not UTF-8" in _bad(capsys, files, tmp_path, "--watchlist", tmp_path / "bytes.txt", *out)
    pd.DataFrame([{"id": 1, "body": "hello"}]).to_csv(tmp_path / "notext.csv", index=False)
    assert "no column 'text'" in _bad(capsys, files, tmp_path, "--explain", tmp_path / "notext.csv", *out)
    assert "--redact" in _bad(capsys, files, tmp_path, "--redact", "some", *out)
    assert "--data" in _bad(capsys, files, tmp_path, "--slice-by", "sent_at:month", *out)
    assert "--base-rate" in _bad(capsys, files, tmp_path, "--base-rate", "150%", *out)
    assert "not both" in _bad(capsys, files, tmp_path, "--threshold", "0.5", "--threshold-log-odds", "0", *out)
    (tmp_path / "empty.key").write_bytes(b"\n")
    for key in (tmp_path / "missing.key", tmp_path / "empty.key", tmp_path, tmp_path / "empty.key" / "org.key"):
        assert "id key file" in _bad(capsys, files, tmp_path, "--id-key-file", key, *out)


@pytest.mark.skipif(os.geteuid() == 0, reason="root may write anywhere")
def test_a_folder_without_write_permission_is_refused(files, tmp_path, capsys):
    locked = tmp_path / "locked"
    locked.mkdir()
    locked.chmod(0o500)
    try:
        assert "permission" in _bad(capsys, files, tmp_path, "--out", locked / "r.pdf")
    finally:
        locked.chmod(0o700)


def test_without_data_each_left_out_section_is_one_line(files, tmp_path, capsys):
    """No labelled data and nothing to explain: performance, errors and explained messages each say what would add them."""
    result = nbledger(capsys, "report", files / "filter.skops", "--normal-class", "ok", "--paper", "letter",
                      "--redact", "bodies", "--out", tmp_path / "bare.pdf")
    assert result.code == 0, result.err
    reader = PdfReader(tmp_path / "bare.pdf")
    assert [round(float(v)) for v in reader.pages[0].mediabox[2:]] == [612, 792]  # US letter, in points
    text = " ".join(" ".join(p.extract_text() for p in reader.pages).split())
    assert text.count("Left out: this section needs labelled data") == 3  # summary figures, performance, errors
    assert "Left out: this section needs messages to explain" in text
    assert "bodies: no message text is printed" in text
    for heading in SECTIONS:
        assert heading in text


def test_a_sheet_that_cannot_fit_one_page_says_how_many_pages_it_has(files):
    from explain.analysis.ledger import ledger_of
    from explain.present.report_pages import sheet_pdf

    model = load_model(files / "filter.skops", normal_class="ok")
    short = ledger_of(model, "Can I borrow the ladder on Saturday?", message_id="short")
    long_text = " ".join(["Your parcel is held at the depot, pay the fee today."] * 70)
    long = ledger_of(model, long_text, message_id="long")
    import io

    one = PdfReader(io.BytesIO(sheet_pdf([short], date="2026-01-01T00:00:00+00:00")))
    assert len(one.pages) == 1 and "runs to" not in one.pages[0].extract_text()
    both = PdfReader(io.BytesIO(sheet_pdf([short, long], date="2026-01-01T00:00:00+00:00")))
    alone = PdfReader(io.BytesIO(sheet_pdf([long], date="2026-01-01T00:00:00+00:00")))
    n = len(alone.pages)
    assert n > 1 and len(both.pages) == 1 + n  # pypdf counts the pages (outside the renderer)
    text = _squeezed(" ".join(p.extract_text() for p in both.pages))
    assert _squeezed(f"This sheet runs to {n} pages") in text and text.count("runsto") == 1
    assert "one-pagesheet" not in text


@pytest.mark.parametrize("redact", ["personal", "none"])
def test_the_probe_section_masks_names_found_in_the_messages_at_hand(tmp_path, picture_inputs, redact):
    """Weak points of the evasion probe are tokens toward the normal class: people thanked in ok messages become
    weak points. Their names, found in the report's data, are masked in the JSON twin and the pictures as in the
    vocabulary; --redact none (the control) shows them, so the check can fail."""
    import skops.io as sio

    from explain.present.report_pages import draw_pictures

    frame = pd.read_csv(CORPUS / "messages.csv", dtype=str, keep_default_na=False)
    frame = frame[frame.label != "advert"]
    thanks = pd.DataFrame([{"id": f"thanks-{i}", "sent_at": "", "label": "ok",
                            "text": f"Thanks Oksana Petrenko, the rota is fine. Write to {PLANTED[0]} or ring {PLANTED[2]}, "
                                    f"server {PLANTED[3]}.\nKind regards,\nTomasz Nowak"} for i in range(150)])
    pipeline = Pipeline([("words", CountVectorizer(token_pattern=r"[^\s,]+")), ("nb", MultinomialNB())])
    sio.dump(pipeline.fit(pd.concat([frame.iloc[:3000], thanks]).text, pd.concat([frame.iloc[:3000], thanks]).label),
             tmp_path / "thanked.skops")
    pd.concat([frame.iloc[3000:3300], thanks.iloc[:3]]).to_csv(tmp_path / "test.csv", index=False)
    model = load_model(tmp_path / "thanked.skops", normal_class="ok")
    report = build_report(model, data=read_messages(tmp_path / "test.csv", "text", "label"),
                          settings=ReportSettings(redact=redact), probe_evasion=True)
    section = json.dumps(json.loads(dumps(report))["robustness_and_fairness"])
    draw_pictures(report)
    drawn = "\n".join(map(str, picture_inputs))
    names = ("oksana", "petrenko", "tomasz", "nowak")
    shown = [n for n in names if re.search(rf"\b{n}\b", section.lower() + drawn.lower())]
    if redact == "personal":
        assert shown == [] and "[name]" in section
        assert not [v for v in PLANTED if v.lower() in section.lower() + drawn.lower()]
    else:
        assert shown, section


def test_message_id_headers_of_an_eml_folder_are_keyed_pseudonyms(files, tmp_path, capsys):
    """Raw e-mail: each message's id is its Message-ID header; one holding an address is shown in the error
    tables as its HMAC-SHA-256 pseudonym (RFC 2104) under --id-key-file, the same in two runs, never the address."""
    from explain.analysis.redaction import pseudonym

    frame = pd.read_csv(CORPUS / "messages.csv", dtype=str, keep_default_na=False)
    # scam texts filed under ok/ are false alarms for sure: the error tables list them
    rows = [("ok", t) for t in frame[frame.label == "ok"].text.iloc[:8]] + \
           [("ok", t) for t in frame[frame.label == "scam"].text.iloc[:4]] + \
           [("scam", t) for t in frame[frame.label == "scam"].text.iloc[4:12]]
    message_ids = {}
    for n, (label, text) in enumerate(rows):
        folder = tmp_path / "mail" / label
        folder.mkdir(parents=True, exist_ok=True)
        message_ids[n] = f"<2026{n:04d}.notice@mail.example.org>" if n % 2 else f"<2026{n:04d}.tc-notice>"
        (folder / f"m{n:02d}.eml").write_text(
            f"From: Rota <rota@example.org>\nTo: Member <member@example.net>\nSubject: Notice\n"
            f"Message-ID: {message_ids[n]}\nDate: Sun, 01 Nov 2026 09:00:00 +0000\n\n{text}\n", encoding="utf-8")
    secret = b"tideway commons secret 2026"
    (tmp_path / "org.key").write_bytes(secret)
    twins = []
    for run in (1, 2):
        made = nbledger(capsys, "report", files / "filter.skops", "--data", tmp_path / "mail", "--labels-from-folders",
                        "--normal-class", "ok", "--id-key-file", tmp_path / "org.key",
                        "--out", tmp_path / f"r{run}.pdf", "--json", tmp_path / f"r{run}.json")
        assert made.code == 0, made.err
        twins.append((tmp_path / f"r{run}.json").read_text(encoding="utf-8"))
    errors = json.loads(twins[0])["assessment"]["errors"]
    ids = [x["id"] for x in errors["false_alarms"] + errors["missed"]]
    assert ids == [x["id"] for e in [json.loads(twins[1])["assessment"]["errors"]] for x in e["false_alarms"] + e["missed"]]
    expected = {pseudonym(secret, m) if "@" in m else m for m in message_ids.values()}
    assert len(errors["false_alarms"]) >= 2 and set(ids) <= expected
    assert any(i.startswith("id-") for i in ids)
    text = " ".join(pdftotext_pages(tmp_path / "r1.pdf"))
    for i in ids:
        assert i in text.split(), i
    assert "mail.example.org" not in twins[0] and "mail.example.org" not in text


# --- pages that read well (issue 21, item 7) -------------------------------------------


@pytest.fixture(scope="module")
def full(files, tmp_path_factory):
    """A report with every section: slices, suspected label errors, a projection, costs, the probe and term swaps."""
    out = tmp_path_factory.mktemp("full")
    code = nbledger_run(["report", str(files / "filter.skops"), "--data", str(files / "test.csv"),
                         "--explain", str(files / "explain.csv"), "--normal-class", "ok",
                         "--watchlist", str(CORPUS / "examples" / "watchlist.txt"), "--slice-by", "sent_at:month",
                         "--label-errors", "--folds", "3", "--base-rate", "2%", "--costs", "1:5", "--probe",
                         "--swap-terms", str(CORPUS / "examples" / "swap_terms.txt"),
                         "--out", str(out / "r.pdf"), "--html", str(out / "r.html"), "--json", str(out / "r.json")])
    assert code == 0
    return {"html": (out / "r.html").read_text(encoding="utf-8"),
            "json": json.loads((out / "r.json").read_text(encoding="utf-8")),
            "text": "\n".join(page.extract_text() for page in PdfReader(out / "r.pdf").pages)}


def nbledger_run(argv: list[str]) -> int:
    from explain.cli import run

    return run(argv)


def _visible_text(html_text: str) -> str:
    """The text a reader sees in an HTML page (the standard library's parser; style and script left out)."""
    from html.parser import HTMLParser

    class Visible(HTMLParser):
        def __init__(self):
            super().__init__()
            self.parts, self.hidden = [], 0

        def handle_starttag(self, tag, attrs):
            self.hidden += tag in ("style", "script", "title")

        def handle_endtag(self, tag):
            self.hidden -= tag in ("style", "script", "title")

        def handle_data(self, data):
            if not self.hidden:
                self.parts.append(data)

    parser = Visible()
    parser.feed(html_text)
    return " ".join(" ".join(parser.parts).split())


def test_every_per_10000_names_its_population(full):
    # the glossary's populations (docs/glossary.md, "per 10,000"): ok messages (the normal class),
    # flagged-class messages, messages of traffic; appeals are per 10,000 flagged messages reviewed
    population = re.compile(r"per 10,000 (ok messages|flagged-class messages|messages of traffic|flagged messages"
                            r"|of each population)")
    pdf = re.sub(r"(?<=\w)- (?=\w)", "-", " ".join(full["text"].split()))  # "flagged-" at a line's end
    for medium, text in (("HTML", _visible_text(full["html"])), ("PDF", pdf)):
        said = [m.start() for m in re.finditer(r"per 10,000", text)]
        assert len(said) >= 4, medium  # summary, projection, operating points, method
        for start in said:
            assert population.match(text, start), (medium, text[start - 60:start + 60])
    assert "false alarms per 10,000 ok messages" in _visible_text(full["html"])  # the summary's first figure


def test_no_page_is_less_than_a_third_full_but_the_cover_and_section_ends(full):
    from page_layout import check_pages

    fills = check_pages(full["html"])
    assert len(fills) >= 15 and min(fills[1:-1]) > 0  # the check saw every page


def test_untested_term_swap_groups_are_listed_apart_never_as_a_gap(full):
    swaps = full["json"]["robustness_and_fairness"]["term_swaps"]
    untested = [g["group"] for g in swaps["groups"] if not g["tested"]]
    tested = [g["group"] for g in swaps["groups"] if g["tested"]]
    assert untested and tested  # the demo's swap file names terms no test message holds, and terms some do
    assert all(g["fairness_gap"] is None and g["messages"] == 0 for g in swaps["groups"] if not g["tested"])
    text = " ".join(full["text"].split())
    line = text[text.index("Untested (0 messages), no gap:"):]
    line = line[:line.index("not evidence of fair treatment")]
    assert all(group in line for group in untested)
    table = text[text.index("Term swaps"):text.index("Untested (0 messages), no gap:")]
    assert not any(f"{group} 0 0 0" in table for group in untested)  # no row of zeros that reads as fair


def test_a_sheet_whose_page_note_adds_a_page_states_the_pages_it_has(files):
    # the note "This sheet runs to N pages" takes room of its own: a message that just fills two pages runs to
    # three with it, and the sheet must say three (it said two). The message is found by bisection on its
    # length; the pages are counted by pypdf, outside the renderer.
    import io

    from explain.analysis.ledger import ledger_of
    from explain.present.report_pages import render_document, sheet_html, sheet_pdf

    model = load_model(files / "filter.skops", normal_class="ok")
    words = "Your parcel is held at the depot, pay the fee today. The harbour tea club meets on Sunday.".split()
    date = "2026-01-01T00:00:00+00:00"

    def ledger(n):
        text = " ".join(words[i % len(words)] + ("\n" if i % 9 == 8 else "") for i in range(n))
        return ledger_of(model, text, message_id="long")

    def bare_pages(n):  # without the note
        return len(render_document(sheet_html([ledger(n)], date=date), date).pages)

    low, high = 480, 700  # two pages at low, three at high (the boundary was at 576 words)
    assert bare_pages(low) <= 2 < bare_pages(high)
    while high - low > 1:
        middle = (low + high) // 2
        low, high = (middle, high) if bare_pages(middle) <= 2 else (low, middle)
    # the longest message that fits two pages without the note
    printed = PdfReader(io.BytesIO(sheet_pdf([ledger(low)], date=date)))
    text = _squeezed(" ".join(p.extract_text() for p in printed.pages))
    assert len(printed.pages) == 3 and _squeezed("This sheet runs to 3 pages") in text
