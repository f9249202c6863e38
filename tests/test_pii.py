"""Personal-data masking: IBAN and Luhn checks against published numbers, placeholders and offsets."""

from __future__ import annotations

import pytest

from workbench.core.pii import (
    PLACEHOLDERS,
    check_regions,
    default_regions,
    find_personal_data,
    is_valid_card,
    is_valid_iban,
    mask_personal_data,
)

ALL = tuple(PLACEHOLDERS)


@pytest.mark.parametrize(
    "number",
    [
        "GR16 0110 1050 0000 1054 7023 795",  # python-stdnum 2.2, stdnum/iban.py module docstring
        "BE31435411161155",  # python-stdnum 2.2, stdnum/iban.py module docstring
        "GB82 WEST 1234 5698 7654 32",  # SWIFT IBAN registry example for GB [recalled from memory]
        "DE89 3704 0044 0532 0130 00",  # SWIFT IBAN registry example for DE [recalled from memory]
    ],
)
def test_published_ibans_are_valid_and_masked(number: str) -> None:
    """ISO 13616 / ISO 7064 mod-97-10 via python-stdnum: published example IBANs pass and are masked.

    Sources: python-stdnum 2.2 ``stdnum.iban`` docstring (GR16…, BE31…); the SWIFT IBAN
    registry examples GB82 WEST… and DE89 3704… [recalled from memory].
    """
    assert is_valid_iban(number)
    masked, masks = mask_personal_data(f"my account is {number}, thanks", ALL)
    assert masked == "my account is ⟨iban⟩, thanks"
    assert masks == [("iban", 14, 20)]


@pytest.mark.parametrize(
    "number",
    [
        "GB82 WEST 1234 5698 7654 33",  # last digit changed
        "DE89 3704 0044 0532 0130 01",  # last digit changed
        "GR16 0110 1050 0000 1054 7023 796",  # last digit changed
        "BE31435411161156",  # last digit changed
        "GB28 WEST 1234 5698 7654 32",  # check digits swapped
    ],
)
def test_altered_ibans_fail_and_stay(number: str) -> None:
    """One changed digit breaks the mod-97 check (ISO 7064 detects every single-digit error);
    the same published examples as above with one digit altered."""
    assert not is_valid_iban(number)
    assert all(s.type != "iban" for s in find_personal_data(f"iban {number}", ALL))


@pytest.mark.parametrize(
    "number",
    [
        "4111 1111 1111 1111",  # Visa test number [recalled from memory]
        "5555 5555 5555 4444",  # Mastercard test number [recalled from memory]
        "3782 822463 10005",  # American Express test number [recalled from memory]
        "4012-8888-8888-1881",  # Visa test number [recalled from memory]
    ],
)
def test_card_test_numbers_pass_luhn_and_are_masked(number: str) -> None:
    """Card-network test numbers pass the Luhn check (python-stdnum ``luhn``) [recalled from memory]."""
    assert is_valid_card(number)
    masked, masks = mask_personal_data(f"card {number} exp 12/27", ALL)
    assert masked == "card ⟨card⟩ exp 12/27"
    assert [m[0] for m in masks] == ["card"]


@pytest.mark.parametrize("number", ["4111 1111 1111 1112", "5555 5555 5555 4445", "4012-8888-8888-1882"])
def test_cards_with_one_digit_changed_fail(number: str) -> None:
    """The Luhn check catches any single changed digit; the test numbers above with the last digit altered."""
    assert not is_valid_card(number)
    assert all(s.type != "card" for s in find_personal_data(number, ALL))


def test_luhn_matches_stdnum_docstring_examples() -> None:
    """python-stdnum 2.2 ``stdnum/luhn.py`` docstring: '78949' is valid, '7894' is not; our wrapper
    adds the 13–19 digit length of payment cards, so both are too short to be cards."""
    from stdnum import luhn

    assert luhn.is_valid("78949") and not luhn.is_valid("7894")
    assert not is_valid_card("78949")


def test_email_url_phone_are_masked_with_offsets_into_clean_text() -> None:
    """Each mask's offsets point at its placeholder in the masked text (the documented choice)."""
    text = "Write to jane.roe@example.org or see https://example.org/help. Call +44 20 7946 0958!"
    masked, masks = mask_personal_data(text, ALL, ("GB",))
    assert masked == "Write to ⟨email⟩ or see ⟨url⟩. Call ⟨phone⟩!"
    assert [m[0] for m in masks] == ["email", "url", "phone"]
    for kind, start, end in masks:
        assert masked[start:end] == PLACEHOLDERS[kind]


@pytest.mark.parametrize(
    ("text", "region"),
    [
        ("ruf mich an: 030 901820", "DE"),  # Berlin number, national format
        ("appelez le 01 23 45 67 89", "FR"),
        ("call (415) 555-2671 please", "US"),
        ("bel 020 123 4567", "NL"),
    ],
)
def test_national_phone_formats_found_for_their_region(text: str, region: str) -> None:
    """phonenumbers' PhoneNumberMatcher with leniency VALID finds national formats when given the region."""
    assert [s.type for s in find_personal_data(text, ("phone",), (region,))] == ["phone"]


@pytest.mark.parametrize(
    "text",
    ["in 2019 we paid 1234 euros", "order 12345 arrived on 03.04.2024", "rated 10/10", "version 1.2.3"],
)
def test_numbers_that_are_not_phones_are_left(text: str) -> None:
    """Leniency VALID: years, prices, dates and order numbers are not valid phone numbers."""
    assert mask_personal_data(text, ALL, ("DE", "GB", "US", "FR"))[1] == []


def test_bare_country_domain_without_path_is_not_a_url() -> None:
    """A missing space after a full stop ("good.it") must not be masked; a generic domain is."""
    assert mask_personal_data("it was good.it was cheap", ALL)[1] == []
    assert mask_personal_data("bought at shop.example.com today", ALL)[0] == "bought at ⟨url⟩ today"


def test_only_requested_kinds_are_masked() -> None:
    masked, masks = mask_personal_data("a@b.org 4111 1111 1111 1111", ("card",))
    assert masked == "a@b.org ⟨card⟩" and masks == [("card", 8, 14)]


def test_default_regions_follow_languages_and_unknown_regions_are_reported() -> None:
    assert default_regions(["de", "fr"]) == ("DE", "AT", "CH", "FR", "BE")
    assert check_regions(["DE", "XX"]) == ["XX"]


@pytest.mark.parametrize(
    "text",
    [
        "a" * 100_000 + "@",
        "a." * 50_000,
        "1" * 100_000,
        "12 " * 33_333,
        "1234 5678 x " * 8_000,
        "DE89 " * 20_000,
        "http://" * 14_000,
    ],
    ids=["letters-then-at", "dotted", "digits", "digit-pairs", "number-groups", "iban-prefixes", "schemes"],
)
def test_pathological_100k_inputs_complete(text: str) -> None:
    """Every pattern is linear (bounded repetitions); a 100k-character answer is scanned without
    catastrophic backtracking. (Speed is measured in tests/bench/bench_clean.py, not asserted here.)"""
    masked, masks = mask_personal_data(text, ALL, ("DE", "GB"))
    for kind, start, end in masks:
        assert masked[start:end] == PLACEHOLDERS[kind]


def test_overlapping_findings_resolve_to_disjoint_spans_in_order() -> None:
    """Thousands of overlapping e-mail/URL candidates: kept spans are disjoint and sorted, and a
    dropped candidate always overlaps a kept one (the rule of find_personal_data's docstring).
    Its cost is measured in tests/bench/bench_regex.py (1M characters of 'aa@aa.': 538 s before
    the sorted-neighbour check, 0.4 s after)."""
    from workbench.core.pii import _find_emails, _find_urls, find_personal_data

    text = "x@ab.com " * 2000 + "see www.example.org/x or b@c.de"  # each address holds a URL too
    kept = find_personal_data(text, ["email", "url"])
    assert kept and all(a.end <= b.start for a, b in zip(kept, kept[1:], strict=False))
    candidates = [*_find_emails(text), *_find_urls(text)]
    assert len(candidates) > len(kept)
    for span in candidates:
        assert any(not (span.end <= k.start or span.start >= k.end) for k in kept)
