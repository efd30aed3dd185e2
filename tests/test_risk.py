"""Risk flags on vocabulary tokens, redaction and watchlists (explain.analysis.risk)."""

import string

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from explain.errors import NbledgerError
from explain.analysis.risk import (
    FLAGS,
    PERSONAL_KINDS,
    RiskThresholds,
    parse_watchlist,
    read_watchlist,
    redact,
    redaction_mask,
    risk_flags,
    token_traits,
    watchlist_columns,
)

words = st.text(alphabet=string.ascii_lowercase, min_size=1, max_size=12)
# Reserved example values only: example.org domains, 555-01xx numbers, 192.0.2.x addresses.
emails = st.builds(
    lambda user, host: f"{user}@{host}",
    st.from_regex(r"[a-z][a-z0-9._+-]{0,10}[a-z0-9]", fullmatch=True),
    st.sampled_from(["example.org", "mail.example.org", "example.net", "example.com"]),
)
phones = st.builds(
    lambda fmt, last: fmt.format(last=last),
    st.sampled_from(["555-01{last:02d}", "+1 555-01{last:02d}", "(555) 01{last:02d}-000", "555.01{last:02d}.00"]),
    st.integers(0, 99),
)
ipv4 = st.integers(0, 255).map(lambda x: f"192.0.2.{x}")
urls = st.builds(
    lambda scheme, path: f"{scheme}example.org/{path}",
    st.sampled_from(["http://", "https://", "www."]),
    words,
)


def kind_of(token):
    k = int(token_traits([token]).personal_kind[0])
    return None if k < 0 else PERSONAL_KINDS[k]


@settings(max_examples=200, deadline=None)
@given(emails)
def test_email_addresses_are_personal(token):
    assert kind_of(token) == "e-mail"


@settings(max_examples=200, deadline=None)
@given(phones)
def test_phone_numbers_are_personal(token):
    assert kind_of(token) == "phone"


@settings(max_examples=100, deadline=None)
@given(ipv4)
def test_ip_addresses_are_personal(token):
    assert kind_of(token) == "ip"


def test_ipv6_addresses_are_personal_but_clock_times_are_not():
    # RFC 3849 documentation prefix 2001:db8::/32
    assert kind_of("2001:db8::1") == "ip"
    assert kind_of("2001:db8:0:0:0:0:0:1") == "ip"
    assert kind_of("10:30:45") is None


@settings(max_examples=100, deadline=None)
@given(urls)
def test_urls_are_personal(token):
    assert kind_of(token) == "url"


@settings(max_examples=200, deadline=None)
@given(st.integers(7, 20).flatmap(lambda n: st.text(alphabet=string.digits, min_size=n, max_size=n)))
def test_long_digit_runs_are_personal_and_numeric(token):
    from stdnum import luhn

    traits = token_traits([token])
    # 13-19 digits passing the Luhn check of ISO/IEC 7812-1 (stdnum.luhn) are a payment card number
    card = 13 <= len(token) <= 19 and luhn.is_valid(token)
    assert kind_of(token) == ("card" if card else "digits")
    assert traits.numeric[0]


@settings(max_examples=200, deadline=None)
@given(st.text(alphabet=string.digits, min_size=1, max_size=6), st.sampled_from(["", "$", "%", ",", "."]))
def test_short_numbers_are_numeric_not_personal(digits, symbol):
    traits = token_traits([symbol + digits])
    assert traits.numeric[0]
    assert not traits.personal[0]


@settings(max_examples=200, deadline=None)
@given(words, st.text(alphabet=string.digits, max_size=6))
def test_a_letter_makes_a_token_not_numeric(word, digits):
    traits = token_traits([digits + word])
    assert not traits.numeric[0]
    assert not traits.personal[0]


# Cyrillic letters that look like Latin ones (common practice, no source).
HOMOGLYPHS = "аеорсху"


@settings(max_examples=200, deadline=None)
@given(words, st.sampled_from(HOMOGLYPHS), st.data())
def test_a_cyrillic_letter_inside_a_latin_word_is_mixed_script(word, glyph, data):
    at = data.draw(st.integers(0, len(word)))
    assert token_traits([word[:at] + glyph + word[at:]]).mixed_script[0]
    assert not token_traits([word]).mixed_script[0]
    assert not token_traits([glyph * 3]).mixed_script[0]


def test_compatibility_forms_and_unspaced_scripts_do_not_count_as_mixing():
    # Decisions documented in explain.analysis.risk: NFKD decides the script; Han, kana and Hangul
    # next to Latin are ordinary writing.
    traits = token_traits(["naïve", "ｆree", "ªpple", "solaris上にあります", "it분야에서는", "ρa", "ѡa"])
    assert traits.mixed_script.tolist() == [False, False, False, False, False, True, True]


@settings(max_examples=300, deadline=None)
@given(st.lists(st.text(max_size=8), max_size=30))
def test_traits_of_a_vocabulary_equal_those_of_each_token_alone(tokens):
    # Vectorised reductions over the joined vocabulary must not leak between tokens.
    together = token_traits(tokens)
    for j, token in enumerate(tokens):
        alone = token_traits([token])
        assert together.personal_kind[j] == alone.personal_kind[0]
        assert together.numeric[j] == alone.numeric[0]
        assert together.mixed_script[j] == alone.mixed_script[0]
        assert together.stopword[j] == alone.stopword[0]


def test_stopword_trait_follows_sklearn_english_list():
    # sklearn.feature_extraction.text.ENGLISH_STOP_WORDS, scikit-learn >= 1.5
    from sklearn.feature_extraction.text import ENGLISH_STOP_WORDS

    tokens = sorted(ENGLISH_STOP_WORDS) + ["harbour", "moorings", "co-op"]
    traits = token_traits(tokens)
    assert traits.stopword.tolist() == [t in ENGLISH_STOP_WORDS for t in tokens]


finite = st.floats(-20, 20, allow_nan=False)


@settings(max_examples=200, deadline=None)
@given(
    st.lists(st.tuples(finite, st.integers(0, 40), st.booleans()), min_size=1, max_size=40),
    st.floats(0, 30),
    st.floats(0.01, 5),
    st.tuples(st.booleans(), st.booleans()),
)
def test_flags_follow_their_definitions(rows, thin_below, strong, flagged_sides):
    ratio = np.array([r for r, _, _ in rows])
    support = np.array([s for _, s, _ in rows], dtype=float)
    watched = np.array([w for _, _, w in rows])
    tokens = ["the" if i % 2 else f"moorings{i}" for i in range(len(rows))]
    traits = token_traits(tokens)
    flags = risk_flags(traits, ratio, support, watched, RiskThresholds(thin_below, strong), flagged_sides)
    assert flags.shape == (len(FLAGS), len(rows))
    is_strong = np.abs(ratio) >= strong
    assert flags[FLAGS.index("thin")].tolist() == (is_strong & (support < thin_below)).tolist()
    # Every stop word, whatever its evidence (issue 12: "the" went unflagged while "if" was).
    assert flags[FLAGS.index("stopword")].tolist() == traits.stopword.tolist()
    assert flags[FLAGS.index("watchlist")].tolist() == watched.tolist()
    target_flagged, other_flagged = flagged_sides
    expected = [
        bool(w and abs(r) >= strong and ((r > 0 and target_flagged) or (r < 0 and other_flagged)))
        for r, _, w in rows
    ]
    assert flags[FLAGS.index("watchlist_strong")].tolist() == expected
    assert flags[FLAGS.index("personal")].tolist() == traits.personal.tolist()


def test_thresholds_are_validated():
    with pytest.raises(NbledgerError):
        RiskThresholds(thin_below=-1)
    with pytest.raises(NbledgerError):
        RiskThresholds(strong_log_odds=0)


@settings(max_examples=100, deadline=None)
@given(st.lists(st.one_of(words, emails, phones, ipv4), min_size=1, max_size=30))
def test_redaction_hides_every_personal_token_and_nothing_else(tokens):
    traits = token_traits(tokens)
    shown = redact(tokens, traits)
    mask = redaction_mask(traits)
    for token, out, hidden in zip(tokens, shown, mask):
        if hidden:
            assert out != token and token not in " ".join(shown)
        else:
            assert out == token
    placeholders = [s for s, hidden in zip(shown, mask) if hidden]
    assert len(set(placeholders)) == len(placeholders)


def test_watchlist_skips_comments_blank_lines_and_duplicates():
    wl = parse_watchlist("# terms for the fairness review\n\nroma\n  migrant  \nroma\n#not a term\n", "terms.txt")
    assert wl.terms == ("roma", "migrant")


def test_watchlist_file_with_byte_order_mark(tmp_path):
    path = tmp_path / "watch.txt"
    path.write_bytes("\ufeffharbour\nberth\n".encode("utf-8"))
    assert read_watchlist(path).terms == ("harbour", "berth")


def test_watchlist_not_utf8_is_one_line_error(tmp_path):
    path = tmp_path / "watch.txt"
    path.write_bytes(b"harbour\n\xff\xfeberth\n")
    with pytest.raises(NbledgerError) as err:
        read_watchlist(path)
    assert "not UTF-8" in str(err.value) and "\n" not in str(err.value)


@pytest.mark.parametrize("content", ["", "\n\n", "# only a comment\n"])
def test_empty_watchlist_is_one_line_error(tmp_path, content):
    path = tmp_path / "watch.txt"
    path.write_text(content, encoding="utf-8")
    with pytest.raises(NbledgerError, match="no terms"):
        read_watchlist(path)


def test_watchlist_columns_match_exactly_then_lower_case():
    tokens = np.array(["harbour", "Berth", "roma", "migrant"], dtype=object)
    cols = watchlist_columns(["Roma", "Berth", "asylum", "migrant"], tokens)
    assert cols.tolist() == [2, 1, -1, 3]
