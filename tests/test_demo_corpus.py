"""Checks on the invented Tideway Commons demo corpus (demo_corpus/)."""

from __future__ import annotations

import csv
import hashlib
import importlib.util
import ipaddress
import re
import subprocess
import sys
from collections import Counter
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
CORPUS = ROOT / "demo_corpus"
MESSAGES = CORPUS / "messages.csv"
NOISE = CORPUS / "label_noise.csv"
README = CORPUS / "README.md"
GENERATOR = CORPUS / "generate.py"

RESERVED_MAIL_DOMAINS = {"example.org", "example.net", "example.com"}
IPV4 = re.compile(r"(?<![\d.])(\d{1,3}(?:\.\d{1,3}){3})(?![\d])")
URL = re.compile(r"\b(?:https?://|www\.)([^/\s?#(),;!]+)", re.IGNORECASE)
BARE_HOST = re.compile(r"\b((?:[a-z0-9-]+\.)+(?:com|org|net|uk|io|co|info|biz))\b", re.IGNORECASE)
EMAIL = re.compile(r"[\w.+-]+@([\w-]+(?:\.[\w-]+)+)")
# Digit groups joined by single spaces, dots, dashes or brackets; seven or more
# digits in all makes it phone-like.
PHONE_LIKE = re.compile(r"(?<![\w.])\+?\(?\d+\)?(?:[-.\s]\(?\d+\)?)*(?!\w)")
RESERVED_PHONE = re.compile(r"^55501\d\d$")


def _load_generator():
    spec = importlib.util.spec_from_file_location("demo_corpus_generate", GENERATOR)
    module = importlib.util.module_from_spec(spec)
    assert spec.loader is not None
    spec.loader.exec_module(module)
    return module


@pytest.fixture(scope="module")
def rows() -> list[dict[str, str]]:
    with MESSAGES.open(encoding="utf-8", newline="") as fh:
        return list(csv.DictReader(fh))


@pytest.fixture(scope="module")
def noise_rows() -> list[dict[str, str]]:
    with NOISE.open(encoding="utf-8", newline="") as fh:
        return list(csv.DictReader(fh))


def _readme_sha() -> str:
    m = re.search(r"SHA-256[^\n]*?`([0-9a-f]{64})`", README.read_text(encoding="utf-8"))
    assert m, "README.md must state the SHA-256 of messages.csv in backticks"
    return m.group(1)


def test_regeneration_is_byte_identical_and_matches_readme():
    gen = _load_generator()
    messages, noise = gen.render()
    committed = MESSAGES.read_bytes()
    assert messages == committed, "generate.py output differs from the committed messages.csv"
    assert noise == NOISE.read_bytes(), "generate.py output differs from the committed label_noise.csv"
    assert hashlib.sha256(committed).hexdigest() == _readme_sha()


def test_check_flag(tmp_path):
    ok = subprocess.run([sys.executable, str(GENERATOR), "--check"], capture_output=True, text=True)
    assert ok.returncode == 0, ok.stderr
    bad = tmp_path / "messages.csv"
    bad.write_bytes(MESSAGES.read_bytes() + b"tc-99999,2026-12-31T23:59:59Z,extra,ok\n")
    res = subprocess.run([sys.executable, str(GENERATOR), "--check", "--out", str(bad)], capture_output=True, text=True)
    assert res.returncode == 1
    assert len(res.stderr.strip().splitlines()) == 1


def test_columns_ids_and_timestamps(rows):
    assert list(rows[0]) == ["id", "sent_at", "text", "label"]
    ids = [r["id"] for r in rows]
    assert len(ids) == len(set(ids))
    assert all(re.fullmatch(r"tc-\d{5}", i) for i in ids)
    assert 5500 <= len(rows) <= 6500
    stamps = [r["sent_at"] for r in rows]
    assert all(re.fullmatch(r"2026-\d\d-\d\dT\d\d:\d\d:\d\dZ", s) for s in stamps)
    assert stamps == sorted(stamps)
    assert {r["label"] for r in rows} == {"ok", "scam", "advert"}
    assert all(r["text"].strip() for r in rows)


def test_class_shares(rows):
    counts = Counter(r["label"] for r in rows)
    n = len(rows)
    assert 0.13 <= counts["scam"] / n <= 0.17
    assert 0.06 <= counts["advert"] / n <= 0.10


def test_emails_only_reserved_domains(rows):
    for r in rows:
        for domain in EMAIL.findall(r["text"]):
            assert domain.lower() in RESERVED_MAIL_DOMAINS, (r["id"], domain)


def test_ipv4_only_documentation_range(rows):
    net = ipaddress.ip_network("192.0.2.0/24")
    for r in rows:
        for ip in IPV4.findall(r["text"]):
            assert ipaddress.ip_address(ip) in net, (r["id"], ip)


def test_hosts_only_reserved(rows):
    net = ipaddress.ip_network("192.0.2.0/24")
    for r in rows:
        hosts = URL.findall(r["text"]) + BARE_HOST.findall(r["text"])
        for host in hosts:
            host = host.lower().rstrip(".")
            if IPV4.fullmatch(host):
                assert ipaddress.ip_address(host) in net, (r["id"], host)
                continue
            base = ".".join(host.split(".")[-2:])
            assert base in RESERVED_MAIL_DOMAINS, (r["id"], host)


def test_phone_numbers_only_reserved_range(rows):
    seen = 0
    for r in rows:
        text = re.sub(r"(?:https?://|www\.)\S+", " ", r["text"], flags=re.IGNORECASE)
        text = IPV4.sub(" ", text)
        for match in PHONE_LIKE.findall(text):
            digits = re.sub(r"\D", "", match)
            if len(digits) < 7:
                continue
            seen += 1
            assert RESERVED_PHONE.match(digits), (r["id"], match)
    assert seen > 0  # the check is not vacuous


def test_label_noise_documented(rows, noise_rows):
    by_id = {r["id"]: r for r in rows}
    n = len(rows)
    assert 0.005 <= len(noise_rows) / n <= 0.015
    readme = README.read_text(encoding="utf-8")
    for nr in noise_rows:
        assert nr["id"] in by_id
        assert by_id[nr["id"]]["label"] == nr["label"]
        assert nr["true_label"] in {"ok", "scam", "advert"} and nr["true_label"] != nr["label"]
        assert re.search(rf"{re.escape(nr['id'])}\b.*\b{nr['true_label']}\b", readme), nr["id"]


def test_naive_bayes_is_good_but_not_perfect(rows):
    # Why a band: a demo set that a bag-of-words model separates perfectly shows
    # nothing worth explaining, and one it cannot learn is no demo either
    # (common practice, no source).
    from sklearn.feature_extraction.text import CountVectorizer
    from sklearn.model_selection import train_test_split
    from sklearn.naive_bayes import MultinomialNB

    texts = [r["text"] for r in rows]
    labels = [r["label"] for r in rows]
    x_tr, x_te, y_tr, y_te = train_test_split(texts, labels, test_size=0.25, random_state=0, stratify=labels)
    vec = CountVectorizer()
    model = MultinomialNB().fit(vec.fit_transform(x_tr), y_tr)
    accuracy = model.score(vec.transform(x_te), y_te)
    assert 0.85 <= accuracy <= 0.995, accuracy
