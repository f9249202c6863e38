"""Personal-data masking: find e-mail addresses, URLs, IBANs, payment cards and phone numbers.

:func:`mask_personal_data` replaces each finding with a typed placeholder
(``⟨email⟩``, ``⟨url⟩``, ``⟨iban⟩``, ``⟨card⟩``, ``⟨phone⟩``) and returns the
offsets of the placeholders **in the masked text** (see ``clean.py``).

How each type is found
----------------------
email
    ``local@domain.tld`` with the lengths of RFC 5321 (local part at most 64
    characters, labels at most 63, at most 8 labels); searched only when the
    text holds an ``@``.
url
    anything starting with ``http://``, ``https://``, ``ftp://`` or ``www.``
    up to the next white space (trailing punctuation is given back to the
    sentence), and bare domains ending in a generic top-level domain
    (``example.com``, ``shop.net/offer``). Bare domains under country codes
    (``.de``, ``.it``, ``.no``) are *not* masked unless followed by a path: a
    missing space after a full stop ("good.it was") is far more common in
    survey answers than a bare national web address.
iban
    two letters, two check digits and 11–30 letters/digits, optionally grouped
    by spaces or hyphens; kept only when python-stdnum's ``iban.is_valid``
    accepts it (ISO 13616 structure per country and the ISO 7064 mod-97-10
    check: the number, rotated by four and with letters as 10..35, leaves
    remainder 1 modulo 97).
card
    13–19 digits, optionally grouped by spaces or hyphens; kept only when the
    Luhn check passes (python-stdnum ``luhn.is_valid``: doubling every second
    digit from the right, digit sums, total ≡ 0 mod 10).
phone
    Google's ``phonenumbers`` library (``PhoneNumberMatcher``). National
    forms (``030 901820``, ``0049 30 …``) use leniency ``VALID``: the digits
    must form a number that is valid for the region according to the
    library's numbering-plan metadata — ``POSSIBLE`` (length only) would mask
    years, prices and order numbers, and ``STRICT_GROUPING`` misses numbers
    typed with casual spacing, which survey answers are full of. National
    forms are tried for the study's ``clean.phone_regions`` or — when that
    list is empty — for the main regions of the expected languages
    (:data:`LANGUAGE_REGIONS`, common practice). Numbers written with a
    leading ``+`` use ``POSSIBLE``: the plus and country code already say
    "phone number", and a number in a range the metadata does not list yet
    (or one reserved for fiction) is still someone's to protect.

Overlaps are resolved by type priority (email > url > iban > card > phone),
then by length: a card number is never also reported as a phone number.

Linear time
-----------
Every regular expression here runs on user text, so every repetition is
either bounded or separated by a literal that the repeated class excludes:
no pattern can backtrack more than a constant number of steps per start
position. The phone matcher runs only on runs of 6–20 digits (with
separators) found by such a pattern, never on the whole answer, and on at
most :data:`MAX_PHONE_RUNS` of them per answer, so a 100,000-character answer
of digits costs linear time too.
"""

from __future__ import annotations

import bisect
import re
from collections.abc import Callable, Iterable, Sequence
from typing import NamedTuple

import phonenumbers
from phonenumbers import Leniency
from stdnum import iban as _iban
from stdnum import luhn as _luhn

#: Placeholder written into the cleaned text for each masked type.
PLACEHOLDERS: dict[str, str] = {
    "email": "⟨email⟩",
    "url": "⟨url⟩",
    "iban": "⟨iban⟩",
    "card": "⟨card⟩",
    "phone": "⟨phone⟩",
}
#: Any placeholder, for stages that must ignore them (language detection, terms).
PLACEHOLDER_RE = re.compile("⟨(?:" + "|".join(PLACEHOLDERS) + ")⟩")
_PRIORITY = {"email": 5, "url": 4, "iban": 3, "card": 2, "phone": 1}

#: Regions whose national phone formats are tried when the study names none
#: (common practice: the countries where each language is the main one).
LANGUAGE_REGIONS: dict[str, tuple[str, ...]] = {
    "ca": ("ES",),
    "cs": ("CZ",),
    "da": ("DK",),
    "de": ("DE", "AT", "CH"),
    "el": ("GR", "CY"),
    "en": ("GB", "US", "IE"),
    "es": ("ES", "MX"),
    "fi": ("FI",),
    "fr": ("FR", "BE", "CH"),
    "hu": ("HU",),
    "it": ("IT",),
    "nb": ("NO",),
    "nl": ("NL", "BE"),
    "pl": ("PL",),
    "pt": ("PT", "BR"),
    "ro": ("RO",),
    "ru": ("RU",),
    "sv": ("SE",),
    "tr": ("TR",),
}


class Span(NamedTuple):
    """One finding: its type and ``[start, end)`` offsets in the text it was found in."""

    type: str
    start: int
    end: int


_EMAIL_RE = re.compile(
    r"(?<![\w.%+-])[A-Za-z0-9._%+-]{1,64}@(?:[A-Za-z0-9-]{1,63}\.){1,8}[A-Za-z]{2,24}(?![\w-])"
)
_GENERIC_TLDS = "com|org|net|info|biz|edu|gov|io|app|dev|eu|online|shop|site"
_URL_RE = re.compile(
    r"(?:\b(?:https?|ftp)://|\bwww\.)[^\s<>\"'`]{1,2000}"
    r"|\b(?:[A-Za-z0-9-]{1,63}\.){1,8}(?:" + _GENERIC_TLDS + r")\b(?:/[^\s<>\"'`]{0,2000})?"
    r"|\b(?:[A-Za-z0-9-]{1,63}\.){1,8}[A-Za-z]{2}/[^\s<>\"'`]{1,2000}",
    re.IGNORECASE,
)
_URL_TRAILING = ".,;:!?)]}»\"'"
#: What every URL match holds: "://", "www." or a full stop followed by a letter
#: (a top-level domain's first letter; the same class under the same flag, so
#: the few non-ASCII letters IGNORECASE folds onto a-z count too). Most answers
#: end their sentences with ". " and never reach the slower URL pattern.
_URL_HINT_RE = re.compile(r"\.[A-Za-z]|://|www\.", re.IGNORECASE)
_IBAN_RE = re.compile(r"\b[A-Za-z]{2}[0-9]{2}(?:[ -]?[A-Za-z0-9]){11,30}\b")
_CARD_RE = re.compile(r"(?<![\d-])\d(?:[ -]?\d){12,18}(?![\d])")
#: Runs worth handing to the phone matcher: digits and the separators people
#: type in phone numbers, with room for a leading + or (. The trailing \d
#: can only give back separators, so the scan stays linear.
_PHONE_RUN_RE = re.compile(r"[+(]?\d[\d \t().\-/]*\d")
_PHONE_CONTEXT = 4
_DIGIT_RE = re.compile(r"\d")
#: Dates (03.04.2024, 3/4/24) look like short phone numbers in some regions.
_DATE_RE = re.compile(r"\d{1,4}[./-]\d{1,2}[./-]\d{1,4}")
#: A phone number has 6–17 digits (E.164 allows 15, plus a 00 prefix); longer
#: runs are numeric dumps, not numbers someone would call.
_PHONE_DIGITS = (6, 20)
#: At most this many runs per answer go to the matcher (0.2 ms each per
#: region); an answer with more number groups is a data dump, not prose.
MAX_PHONE_RUNS = 256


def is_valid_iban(text: str) -> bool:
    """ISO 13616 IBAN check (country format and ISO 7064 mod-97-10) via python-stdnum."""
    return bool(_iban.is_valid(text))


def is_valid_card(text: str) -> bool:
    """13–19 digits (spaces and hyphens ignored) that pass the Luhn check (python-stdnum ``luhn``)."""
    digits = text.replace(" ", "").replace("-", "")
    return digits.isdigit() and digits.isascii() and 13 <= len(digits) <= 19 and bool(_luhn.is_valid(digits))


def _find_emails(text: str) -> Iterable[Span]:
    if "@" not in text:
        return
    for m in _EMAIL_RE.finditer(text):
        yield Span("email", m.start(), m.end())


def _find_urls(text: str) -> Iterable[Span]:
    if _URL_HINT_RE.search(text) is None:
        return
    for m in _URL_RE.finditer(text):
        end = m.end()
        while end > m.start() and text[end - 1] in _URL_TRAILING:
            end -= 1
        if end > m.start():
            yield Span("url", m.start(), end)


def _valid_prefix(candidate: str, valid: Callable[[str], bool]) -> int:
    """Length of the longest prefix, cut at a group separator, that ``valid`` accepts (0 if none).

    A greedy match may run into a following word or number ("… 0130 00 OK");
    cutting only where the writer put a space or hyphen keeps this to a few tries.
    """
    cuts = [len(candidate)] + [i for i in range(len(candidate) - 1, 0, -1) if candidate[i] in " -"]
    for cut in cuts:
        if valid(candidate[:cut]):
            return cut
    return 0


def _find_ibans(text: str) -> Iterable[Span]:
    for m in _IBAN_RE.finditer(text):
        cut = _valid_prefix(m.group(), is_valid_iban)
        if cut:
            yield Span("iban", m.start(), m.start() + cut)


def _find_cards(text: str) -> Iterable[Span]:
    for m in _CARD_RE.finditer(text):
        cut = _valid_prefix(m.group(), is_valid_card)
        if cut:
            yield Span("card", m.start(), m.start() + cut)


def _find_phones(text: str, regions: Sequence[str]) -> Iterable[Span]:
    tried = 0
    for run in _PHONE_RUN_RE.finditer(text):
        digits = sum(map(str.isdigit, run.group()))
        if not _PHONE_DIGITS[0] <= digits <= _PHONE_DIGITS[1] or _DATE_RE.fullmatch(run.group()):
            continue
        tried += 1
        if tried > MAX_PHONE_RUNS:
            return
        lo = max(0, run.start() - _PHONE_CONTEXT)
        hi = min(len(text), run.end() + _PHONE_CONTEXT)
        piece = text[lo:hi]
        seen: set[tuple[int, int]] = set()
        # Numbers written with a leading + parse without a region and need only
        # be possible (right length for the country code): the + says "phone".
        # 00-prefixed and national forms need a region and must be valid.
        international = run.group().startswith("+")
        leniency = Leniency.POSSIBLE if international else Leniency.VALID
        for region in (None,) if international else (None, *regions):
            for match in phonenumbers.PhoneNumberMatcher(piece, region, leniency=leniency, max_tries=50):
                key = (lo + match.start, lo + match.end)
                if key not in seen:
                    seen.add(key)
                    yield Span("phone", *key)


def find_personal_data(text: str, kinds: Iterable[str], regions: Sequence[str] = ()) -> list[Span]:
    """Every finding of the requested kinds, overlaps resolved, sorted by start.

    Parameters
    ----------
    text
        Normalised text (NFC, no control characters).
    kinds
        Subset of ``{"email", "url", "iban", "card", "phone"}``.
    regions
        ISO 3166 alpha-2 regions for national phone formats.
    """
    kinds = set(kinds)
    found: list[Span] = []
    if "email" in kinds:
        found.extend(_find_emails(text))
    if "url" in kinds:
        found.extend(_find_urls(text))
    has_digits = _DIGIT_RE.search(text) is not None
    if has_digits:
        if "iban" in kinds:
            found.extend(_find_ibans(text))
        if "card" in kinds:
            found.extend(_find_cards(text))
        if "phone" in kinds:
            found.extend(_find_phones(text, regions))
    if len(found) < 2:
        return found
    found.sort(key=lambda s: (-_PRIORITY[s.type], -(s.end - s.start), s.start))
    # Kept spans never overlap, so sorted by start they are sorted by end too: a new span
    # overlaps one of them iff it overlaps the last kept span starting before its end.
    # (Checking every kept span was quadratic: 1M characters of "aa@aa." took 9 minutes.)
    starts: list[int] = []
    kept: list[Span] = []
    for span in found:
        at = bisect.bisect_left(starts, span.end)
        if at and kept[at - 1].end > span.start:
            continue
        starts.insert(at, span.start)
        kept.insert(at, span)
    return kept


def mask_personal_data(
    text: str, kinds: Iterable[str], regions: Sequence[str] = ()
) -> tuple[str, list[tuple[str, int, int]]]:
    """Replace each finding by its placeholder.

    Returns the masked text and one ``(type, start, end)`` per placeholder,
    where ``masked[start:end] == PLACEHOLDERS[type]``.
    """
    spans = find_personal_data(text, kinds, regions)
    if not spans:
        return text, []
    parts: list[str] = []
    masks: list[tuple[str, int, int]] = []
    cursor = 0
    length = 0
    for span in spans:
        before = text[cursor : span.start]
        parts.append(before)
        length += len(before)
        placeholder = PLACEHOLDERS[span.type]
        parts.append(placeholder)
        masks.append((span.type, length, length + len(placeholder)))
        length += len(placeholder)
        cursor = span.end
    parts.append(text[cursor:])
    return "".join(parts), masks


def default_regions(languages: Iterable[str]) -> tuple[str, ...]:
    """Phone regions for a set of languages (:data:`LANGUAGE_REGIONS`), first-seen order."""
    regions: dict[str, None] = {}
    for code in languages:
        for region in LANGUAGE_REGIONS.get(code, ()):
            regions[region] = None
    return tuple(regions)


def check_regions(regions: Sequence[str]) -> list[str]:
    """Regions unknown to phonenumbers' metadata (for a settings error)."""
    supported = phonenumbers.SUPPORTED_REGIONS
    return [r for r in regions if r.upper() not in supported]
