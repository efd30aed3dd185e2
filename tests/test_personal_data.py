"""The detector of personal data, measured on the labelled invented set (issue 18).

Figures are printed into ``docs/redaction.md``; this test holds the floor:
recall at least 0.95 for every kind, 1.0 for Luhn-valid card numbers and
checksum-valid IBANs.
"""

from __future__ import annotations

import pytest

from explain.analysis.personal_data import KINDS, find_personal, token_kind
from explain.analysis.redaction import IdPseudonyms, pseudonym, read_id_key
from explain.errors import NbledgerError
from personal_set import build, load, measure


@pytest.fixture(scope="module")
def figures():
    return measure(load(), find_personal)


def test_the_committed_set_is_what_the_generator_makes():
    assert load() == build()
    assert len(load()) >= 300


def test_every_kind_is_in_the_set_and_found_with_recall_at_least_095(figures):
    labelled = {k for k, v in figures.items() if v["labelled"]}
    assert labelled == set(KINDS) - {"digits"}
    for kind in labelled:
        assert figures[kind]["recall"] >= 0.95, (kind, figures[kind]["misses"][:5])


def test_every_card_and_iban_is_found(figures):
    # Reference: the Luhn check of ISO/IEC 7812-1 and the ISO 13616 check digits, both through python-stdnum
    # (the set's values are made valid with stdnum.luhn.calc_check_digit and stdnum.iban.is_valid).
    assert figures["card"]["recall"] == 1.0 and figures["iban"]["recall"] == 1.0


def test_reference_values_of_the_number_checks():
    # 4111 1111 1111 1111: the card networks' published test number (recalled); that it passes the
    # Luhn check is confirmed by python-stdnum's luhn module, and one changed digit fails it.
    from stdnum import iban, luhn

    assert luhn.is_valid("4111111111111111") and not luhn.is_valid("4111111111111112")
    assert find_personal("card 4111 1111 1111 1111 ok") == [(5, 24, "card")]
    # One digit changed breaks Luhn: no longer a card (a long digit run, or a phone at most).
    assert all(k != "card" for _, _, k in find_personal("card 4111 1111 1111 1112 ok"))
    # GB82 WEST 1234 5698 7654 32: the IBAN example of the ISO 13616 registry (recalled); python-stdnum's
    # iban module (ISO 13616 check digits and the country's format) confirms it.
    assert iban.is_valid("GB82WEST12345698765432") and not iban.is_valid("GB82WEST12345698765433")
    assert find_personal("to GB82 WEST 1234 5698 7654 32 today") == [(3, 30, "iban")]
    assert token_kind("gb82west12345698765432") == "iban" and token_kind("gb82west12345698765433") is None
    # A US number of the reserved 555-01xx block, valid for phonenumbers with its area code.
    assert find_personal("ring (202) 555-0142.") == [(5, 19, "phone")]


def test_ipv6_and_ipv4_are_confirmed_by_the_standard_library():
    found = find_personal("from 2001:db8::17 and 192.0.2.7, not 10:30:45 or 999.1.1.1")
    assert [(k) for _, _, k in found] == ["ip", "ip"]


def test_one_person_one_placeholder_in_a_ledger():
    from corpora import loaded, make_pipeline
    from explain.analysis.ledger import ledger_of, redacted

    pipeline = make_pipeline("counts", "multinomial").fit(
        ["pay the fee now", "fee link now", "the parcel is here", "call me at the hall"], ["scam", "scam", "ok", "ok"]
    )
    text = "Dear Oksana,\nthe parcel is here. Oksana, call me.\nKind regards,\nTomasz"
    ledger = redacted(ledger_of(loaded(pipeline, normal_class="ok"), text))
    assert ledger.text.count("[name 1]") == 2 and "[name 2]" in ledger.text and "Oksana" not in ledger.text


def test_pseudonyms_are_keyed_hmac_sha256():
    # RFC 4231 test case 2: HMAC-SHA-256, key "Jefe", data "what do ya want for nothing?"
    assert pseudonym(b"Jefe", "what do ya want for nothing?") == "id-5bdcc146bf60754e"
    ids = IdPseudonyms(b"organisation secret 1")
    assert ids("tc-00042") == "tc-00042"  # an id without an address is shown as given
    assert ids("<77.warden@example.org>") == pseudonym(b"organisation secret 1", "<77.warden@example.org>")
    assert IdPseudonyms(b"organisation secret 1")("<77.warden@example.org>") == ids("<77.warden@example.org>")
    assert IdPseudonyms(b"another secret here")("<77.warden@example.org>") != ids("<77.warden@example.org>")


def test_a_bad_key_file_is_one_error(tmp_path):
    with pytest.raises(NbledgerError, match="does not exist"):
        read_id_key(tmp_path / "missing.key")
    (tmp_path / "empty.key").write_bytes(b"  \n")
    with pytest.raises(NbledgerError, match="is empty"):
        read_id_key(tmp_path / "empty.key")
    with pytest.raises(NbledgerError, match="is a folder"):
        read_id_key(tmp_path)


def test_the_table_in_the_docs_is_what_the_set_and_the_detector_give(figures):
    # The "Measured" table of docs/redaction.md is made by personal_set.table from these figures
    # (python tests/personal_set.py table); a changed detector or set without new docs fails here.
    from pathlib import Path

    from personal_set import table, table_in

    docs = (Path(__file__).resolve().parents[1] / "docs" / "redaction.md").read_text(encoding="utf-8")
    assert table_in(docs) == table(figures)
    for kind, f in figures.items():
        assert f["found"] == round(f["recall"] * f["labelled"]) and f["right"] <= f["detected"], kind


def test_family_names_with_particles_are_masked_whole():
    # "van der Berg" after a given name, under a sign-off and after a title (common practice, no source)
    for text, name in [("Kind regards,\nMei van der Berg", "Mei van der Berg"),
                       ("Dr van der Berg will run the session.", "van der Berg"),
                       ("Ask for Anna de Souza at the desk.", "Anna de Souza")]:
        assert [text[a:b] for a, b, k in find_personal(text) if k == "name"] == [name], text
    assert find_personal("I saw the van der Waals talk") == []
