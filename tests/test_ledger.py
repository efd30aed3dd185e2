"""The ledger of one decision adds up, tips where it says, and finds disguised words."""

from __future__ import annotations

import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.special import logsumexp

from corpora import FEATURE_KINDS, VARIANT_TYPES, cases, loaded, make_pipeline, messages
from explain.analysis.ledger import ledger_of
from explain.analysis.lookalike import lookalikes, skeleton


def sklearn_balance(pipeline, ledger, text) -> float:
    """The balance from scikit-learn itself.

    Argmax: ``predict_joint_log_proba`` of the credit class minus the debit
    class. Threshold: log P(not normal) - log P(normal) from
    ``predict_log_proba`` (log P(not normal) as a logsumexp over the flagged
    classes).
    """
    classes = list(ledger.classes)
    debit = classes.index(ledger.debit_class)
    credit = [classes.index(c) for c in ledger.credit_classes]
    if ledger.rule == "argmax":
        jll = pipeline[-1].predict_joint_log_proba(pipeline[:-1].transform([text]))[0]
        return float(jll[credit[0]] - jll[debit])
    logp = pipeline.predict_log_proba([text])[0]
    return float(logsumexp(logp[credit]) - logp[debit])


def close(a: float, b: float) -> bool:
    return math.isclose(a, b, rel_tol=1e-9, abs_tol=1e-9)


@pytest.mark.parametrize("variant", sorted(VARIANT_TYPES))
@pytest.mark.parametrize("kind", FEATURE_KINDS)
@settings(max_examples=15, deadline=None)
@given(data=st.data(), text=messages, threshold=st.sampled_from([None, 0.5, 0.9, 0.01]))
def test_ledger_adds_up_to_scikit_learn(variant, kind, data, text, threshold):
    """opening + entries == closing == scikit-learn's own balance (relative error <= 1e-9)."""
    case = data.draw(cases(kind=kind, variant=variant))
    if not text.strip():
        return
    ledger = ledger_of(loaded(case.pipeline, normal_class="class0"), text, threshold)
    assert close(ledger.opening + math.fsum(e.amount for e in ledger.entries), ledger.closing)
    assert close(ledger.closing, sklearn_balance(case.pipeline, ledger, text))
    assert close(ledger.opening, ledger.opening_prior + ledger.opening_absence)
    if ledger.entries:
        assert close(ledger.entries[-1].balance_after, ledger.closing)
    assert ledger.on_credit_side(ledger.closing) == ledger.credit_wins
    assert (ledger.decision in ledger.credit_classes) == ledger.credit_wins
    assert ledger.decision == case.pipeline.predict([text])[0] or threshold is not None
    # Entries are exact shares exactly when the balance is a difference of two classes.
    assert ledger.exact == (threshold is None or len(ledger.classes) == 2)
    assert all(e.exact == ledger.exact for e in ledger.entries)


@settings(max_examples=80, deadline=None)
@given(case=cases(), text=messages, threshold=st.sampled_from([None, 0.5, 0.9]))
def test_the_balance_tips_where_the_ledger_says(case, text, threshold):
    if not text.strip():
        return
    ledger = ledger_of(loaded(case.pipeline, normal_class="class0"), text, threshold)
    before = [ledger.opening] + [e.balance_after for e in ledger.entries]
    sides = [ledger.on_credit_side(b) for b in before]  # sides[i + 1] is after entry i
    decided = ledger.credit_wins
    if ledger.tipped_at is None:
        assert all(s == decided for s in sides)
    else:
        i = ledger.tipped_at
        assert sides[i] != decided  # before the entry: the other side
        assert all(s == decided for s in sides[i + 1 :])  # from it on: the decided side


def test_entries_follow_the_message_and_carry_support_and_flags():
    pipeline = make_pipeline("counts", "multinomial").fit(
        ["pay the fee now", "fee fee link now", "tea at the hall", "the hall is open"], ["scam", "scam", "ok", "ok"]
    )
    ledger = ledger_of(loaded(pipeline, normal_class="ok"), "tea now, pay the fee")
    assert [e.token for e in ledger.entries] == ["tea", "now", "pay", "the", "fee"]
    fee = ledger.entries[-1]
    # feature_count_ is scikit-learn's own count of training occurrences per class.
    assert fee.support == tuple(pipeline[-1].feature_count_[:, pipeline[0].vocabulary_["fee"]])
    assert ledger.support_kind == "occurrences"
    assert fee.direction == "credit" and fee.toward == "scam"
    assert ledger.entries[0].direction == "debit" and ledger.entries[0].toward == "ok"
    assert "thin" in fee.flags  # strong evidence on 3 training occurrences (< 10)


# Unicode Technical Standard #39, "Unicode Security Mechanisms", section 4 (skeletons
# over confusables.txt), as shipped by the confusable-homoglyphs package.
LOOKALIKE_CASES = [
    ("t\u0456d\u0435way", "tideway", "Cyrillic і (U+0456) and е (U+0435)"),
    ("\u0440a\u0443", "pay", "Cyrillic р (U+0440) and у (U+0443)"),
    ("\u03c1\u03b1rcel", "parcel", "Greek ρ (U+03C1) and α (U+03B1)"),
    ("f\u0435\u0435", "fee", "Cyrillic е twice"),
    ("h\u03bfme", "home", "Greek omicron (U+03BF)"),
    ("zebra", None, "an ordinary unknown word"),
    ("tidewya", None, "a misspelling, not a look-alike"),
    ("parcels", None, "another word that shares letters"),
    ("tid\u00e9way", None, "an accented letter is not a look-alike in UTS #39"),
]


@pytest.mark.parametrize("word,known,why", LOOKALIKE_CASES)
def test_disguised_words_table(word, known, why):
    vocabulary = ["tideway", "pay", "parcel", "fee", "home", "harbour"]
    found = lookalikes([word], vocabulary)
    assert found.get(word) == known, why
    if known is not None:
        assert skeleton(word) == skeleton(known)


def test_a_disguised_word_is_reported_with_the_evidence_it_avoided():
    pipeline = make_pipeline("counts", "multinomial").fit(
        ["tideway fee pay now", "pay the tideway fee", "tea at the hall", "the hall is open"],
        ["scam", "scam", "ok", "ok"],
    )
    model = loaded(pipeline, normal_class="ok")
    plain = ledger_of(model, "the tideway fee")
    disguised = ledger_of(model, "the t\u0456d\u0435way fee")
    (word,) = disguised.disguised
    assert word.token == "t\u0456d\u0435way" and word.looks_like == "tideway" and word.count == 1
    assert close(word.avoided, plain.closing - disguised.closing)
    assert ledger_of(model, "the zebra fee").disguised == ()


@settings(max_examples=40, deadline=None)
@given(
    before=messages,
    after=messages,
    value=st.sampled_from(["warden@example.org", "555-0142", "http://parcel-fee.example.net/x", "192.0.2.7"]),
)
def test_redaction_moves_spans_to_the_masked_text(before, after, value):
    from explain.analysis.ledger import redacted

    pipeline = make_pipeline("counts", "multinomial").fit(
        ["pay the fee now", "fee link now example net", "tea at the hall", "the hall is open 555"],
        ["scam", "scam", "ok", "ok"],
    )
    text = f"{before} {value} {after}".strip()
    ledger = redacted(ledger_of(loaded(pipeline, normal_class="ok"), text, message_id="warden@example.org"))
    # the id identifies the message and is kept as given (issue 18); callers pseudonymise ids holding addresses
    assert value not in ledger.text and ledger.message_id == "warden@example.org"
    for e in ledger.entries:
        for a, b in e.spans:
            piece = ledger.text[a:b]
            # Each span shows its word, or the placeholder of the value it was part of.
            assert piece.lower() == e.token or (piece.startswith("[") and piece.endswith("]"))
    assert close(ledger.opening + math.fsum(e.amount for e in ledger.entries), ledger.closing)


def test_display_names_in_sender_lines_are_masked():
    """A raw message read with its headers names people beside their addresses (RFC 5322 3.6.2-3.6.3)."""
    from explain.analysis.ledger import redacted
    from explain.analysis.risk import display_names

    header = 'From: Marta Quill <marta@example.org>\nTo: "Levy Office, Tideway" <levy@example.net>, Ann Lee <ann@example.com>\n'
    names = [header[s:e] for s, e, _ in display_names(header + "Subject: from Marta <m@example.org>\n\nHello")]
    assert names == ["Marta Quill", "Levy Office, Tideway", "Ann Lee"]  # not in the Subject line
    pipeline = make_pipeline("counts", "multinomial").fit(
        ["pay the fee now", "fee link now example net", "tea at the hall", "the hall is open"],
        ["scam", "scam", "ok", "ok"],
    )
    text = header + "\nPay the levy fee now."
    ledger = redacted(ledger_of(loaded(pipeline, normal_class="ok"), text))
    for name in ("Marta", "Quill", "Levy Office", "Ann Lee", "@example"):
        assert name not in ledger.text, name
    assert "[name 1]" in ledger.text and "Pay the levy fee now." in ledger.text
