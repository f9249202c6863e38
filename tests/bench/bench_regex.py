"""Every regular expression termloom runs on text a user supplies, against catastrophic-backtracking input.

Run on demand (not part of the test suite)::

    python tests/bench/bench_regex.py [--length 100000] [--texts 1000000]

User text here means anything from outside the program: answers, column names, study and
profile files, glossaries and dictionaries. :data:`PATTERNS` lists each pattern with the module
that uses it and how it is applied (``finditer`` scans every start position, the worst case;
``match``/``fullmatch``/``sub``/``split`` as the code calls them). ``tests/test_security.py``
checks that the list names every pattern in ``workbench/core``, so a new one cannot skip this.

Each pattern meets each input of :func:`attacks` (``'a' * n + '!'``, ``'@' * n``, ``'1 ' * n/2``,
runs of dots, hyphens, digits, spaces, brackets...) at n = 100,000 and 4n = 400,000 characters
(below about 100,000 characters the shorter input still fits the processor caches and linear patterns
look super-linear: 25,000 -> 100,000 gave ratios of 8-16 for plain character classes).
The table reports, per pattern, the slowest input, its time at 4n and the growth ratio
t(4n) / t(n): about 4 means linear, about 16 quadratic. Times are the fastest of five runs; a
ratio above 8 for an input taking 20 ms or more at 4n is flagged SUPER-LINEAR (exit status 1).

Then the cleaning functions themselves run on answers of ``--texts`` characters made of the same
attacks: normalisation, personal-data masking (all five kinds, phone regions of en and de), the
non-answer rules, the identify stage's text preparation and the glossary/phrase key.
"""

from __future__ import annotations

import argparse
import re
import sys
import time
from collections.abc import Callable, Iterator
from typing import Any

from workbench.core import dictd, identify, ingest, nonanswer, pii, settings, starter, tables, terms
from workbench.core.readers import delimited, jsonl
from workbench.core import clean

#: name -> (pattern, how the code applies it). Inline patterns are compiled here from the same literal.
PATTERNS: dict[str, tuple[re.Pattern[str], str]] = {
    "pii.PLACEHOLDER_RE": (pii.PLACEHOLDER_RE, "finditer"),
    "pii._EMAIL_RE": (pii._EMAIL_RE, "finditer"),
    "pii._URL_RE": (pii._URL_RE, "finditer"),
    "pii._URL_HINT_RE": (pii._URL_HINT_RE, "search"),
    "pii._IBAN_RE": (pii._IBAN_RE, "finditer"),
    "pii._CARD_RE": (pii._CARD_RE, "finditer"),
    "pii._PHONE_RUN_RE": (pii._PHONE_RUN_RE, "finditer"),
    "pii._DIGIT_RE": (pii._DIGIT_RE, "finditer"),
    "pii._DATE_RE": (pii._DATE_RE, "finditer"),
    "clean._SURROGATE_RE": (clean._SURROGATE_RE, "finditer"),
    "clean._REMOVE_RE": (clean._REMOVE_RE, "finditer"),
    "clean._NON_ASCII_RE": (clean._NON_ASCII_RE, "finditer"),
    "nonanswer._APOSTROPHE_RE": (nonanswer._APOSTROPHE_RE, "sub"),
    "nonanswer._MARKS_BMP_RE": (nonanswer._MARKS_BMP_RE, "sub"),
    "nonanswer._NON_WORD": (nonanswer._NON_WORD, "sub"),
    "nonanswer._WORD_RE": (nonanswer._WORD_RE, "finditer"),
    "nonanswer._VOWEL_SCRIPTS": (nonanswer._VOWEL_SCRIPTS, "match"),
    "identify._SEGMENT_RE": (identify._SEGMENT_RE, "split"),
    "identify._NOT_TEXT_RE": (identify._NOT_TEXT_RE, "sub"),
    "identify._NON_LATIN_LETTER_RE": (identify._NON_LATIN_LETTER_RE, "finditer"),
    "identify hint split": (re.compile(r"[-_ ]"), "split"),
    "terms._SPECIAL": (terms._SPECIAL, "finditer"),
    "terms._SKIN_AND_VARIATION": (terms._SKIN_AND_VARIATION, "sub"),
    "terms emoji token": (re.compile(".+", re.S), "fullmatch"),
    "export.safe_name": (re.compile(r"[-.]*-[-.]*|\.{2,}"), "sub"),
    "groups.safe part": (re.compile(r"[^\w.+-]+"), "sub"),
    "tables._SHEET_FORBIDDEN": (tables._SHEET_FORBIDDEN, "sub"),
    "tables stata name": (re.compile(r"[^A-Za-z0-9_]+"), "sub"),
    "tables stata strN": (re.compile(r"str\d+"), "fullmatch"),
    "ingest._DECIMAL_COMMA": (re.compile(ingest._DECIMAL_COMMA), "fullmatch"),
    "settings.LANGUAGE_CODE": (settings.LANGUAGE_CODE, "match"),
    "settings._KEY_LINE": (settings._KEY_LINE, "finditer"),
    "delimited._SEP_LINE": (delimited._SEP_LINE, "match"),
    "jsonl._SURROGATE": (jsonl._SURROGATE, "finditer"),
    "jsonl._LONE": (jsonl._LONE, "finditer"),
    "starter._ID_NAME": (starter._ID_NAME, "finditer"),
    "starter._WEIGHT_NAME": (starter._WEIGHT_NAME, "finditer"),
    "starter._HINT_NAME": (starter._HINT_NAME, "finditer"),
    "starter._COUNTRY_NAME": (starter._COUNTRY_NAME, "finditer"),
    "starter._CODE": (starter._CODE, "fullmatch"),
    "starter._DATE": (starter._DATE, "fullmatch"),
    "starter._DECIMAL_COMMA": (starter._DECIMAL_COMMA, "fullmatch"),
    "starter hint split": (re.compile(r"[-_]"), "split"),
    "dictd._PAIR": (dictd._PAIR, "finditer"),
    "dictd._INDEX_LINE": (dictd._INDEX_LINE, "finditer"),
    "dictd._SKIP_LINE": (dictd._SKIP_LINE, "match"),
    "dictd._NUMBERING": (dictd._NUMBERING, "sub"),
    "dictd._BRACKETS": (dictd._BRACKETS, "sub"),
    "dictd translation split": (re.compile(r"[,;]"), "split"),
}

#: Patterns built at run time from settings, benchmarked with a typical instance.
DYNAMIC = {
    "kwic._word_search": "built from a KWIC term: (?<!\\w)word\\W+word(?!\\w), words escaped",
}
PATTERNS["kwic._word_search (3 words)"] = (
    re.compile(r"(?<!\w)" + r"\W+".join(map(re.escape, ["the", "train", "late"])) + r"(?!\w)", re.IGNORECASE),
    "finditer",
)


def attacks(n: int) -> dict[str, str]:
    """Inputs known to make backtracking engines work hard, each about ``n`` characters."""
    half = n // 2
    return {
        "a*n+!": "a" * n + "!",
        "@*n": "@" * n,
        "1 *n": "1 " * half,
        "dots": "." * n,
        "hyphens": "-" * n,
        "digits": "1" * n,
        "spaces": " " * n,
        "tabs+spaces": " \t" * half,
        "a.": "a." * half,
        "a-": "a-" * half,
        "a@": "a@" * half,
        "1-": "1-" * half,
        "1.": "1." * half,
        "digits+x": "1" * n + "x",
        "www.": "www." * (n // 4),
        "http://": "http://" + "a" * n + " ",
        "aa@aa.": "aa@aa." * (n // 6),
        "DE89 blocks": "DE89 " + "1234 " * (n // 5),
        "brackets": "[" * n,
        "angles": "<" * n,
        "parens": "(" * n,
        "slashes": "/" * n,
        "key=": "a" * n,
        "unicode escapes": "\\ud800" * (n // 6),
        "tab fields": "a\t" * half,
        "emoji": "😀" * n,
        "mixed word punct": "ab, " * (n // 4),
        "x.y.": "x.y." * (n // 4),
    }


def timed(pattern: re.Pattern[str], mode: str, text: str) -> float:
    begin = time.perf_counter()
    if mode == "finditer":
        for _ in pattern.finditer(text):
            pass
    elif mode == "sub":
        pattern.sub(" ", text)
    elif mode == "split":
        pattern.split(text)
    elif mode == "search":
        pattern.search(text)
    elif mode == "match":
        pattern.match(text)
    elif mode == "fullmatch":
        pattern.fullmatch(text)
    else:
        raise ValueError(mode)
    return time.perf_counter() - begin


def bench_patterns(n: int, repeats: int = 5) -> list[tuple[str, str, float, str, float]]:
    """Per pattern: the slowest attack and its time at 4n; the attack whose time grows most from n
    to 4n (among those taking 20 ms or more at 4n, where timer noise does not dominate) and its
    t(4n)/t(n): about 4 is linear, 16 quadratic. Times are the fastest of ``repeats`` runs: a busy
    machine only ever adds time, so the minimum is the least noisy estimate."""
    small, large = attacks(n), attacks(4 * n)
    rows = []
    for name, (pattern, mode) in PATTERNS.items():
        slowest, growth = ("", 0.0), ("", 0.0)
        for attack in small:
            t4 = min(timed(pattern, mode, large[attack]) for _ in range(repeats))
            if t4 > slowest[1]:
                slowest = (attack, t4)
            if t4 >= 0.02:
                t1 = min(timed(pattern, mode, small[attack]) for _ in range(repeats))
                if t4 / t1 > growth[1]:
                    growth = (attack, t4 / t1)
        rows.append((name, *slowest, *growth))
    return rows


def bench_cleaning(n: int) -> Iterator[tuple[str, str, float]]:
    """The functions clean and identify run on each answer, on answers of ``n`` characters."""
    rules = nonanswer.NonAnswerRules(["no comment", "n/a"], 2)
    regions = pii.default_regions(["en", "de"])
    steps: dict[str, Callable[[str], Any]] = {
        "normalise_text": lambda text: clean.normalise_text(text),
        "mask_personal_data": lambda text: pii.mask_personal_data(text, ["email", "url", "iban", "card", "phone"], regions),
        "NonAnswerRules.classify": rules.classify,
        "identify.detection_text": identify.detection_text,
        "nonanswer.phrase_key": nonanswer.phrase_key,
    }
    texts = attacks(n)
    for step, function in steps.items():
        worst = ("", 0.0)
        for attack, text in texts.items():
            begin = time.perf_counter()
            function(text)
            seconds = time.perf_counter() - begin
            if seconds > worst[1]:
                worst = (attack, seconds)
        yield (step, *worst)


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--length", type=int, default=100_000)
    parser.add_argument("--texts", type=int, default=1_000_000)
    args = parser.parse_args()
    flagged = 0
    print(f"{len(PATTERNS)} patterns x {len(attacks(10))} attacks, n = {args.length:,} and 4n = {4 * args.length:,} characters")
    print(f"{'pattern':<34} {'slowest attack':<16} {'t(4n) s':>8}   {'fastest-growing':<16} {'t(4n)/t(n)':>10}")
    rows = bench_patterns(args.length)
    for name, attack, seconds, grows, ratio in rows:
        bad = ratio > 8
        flagged += bad
        print(f"{name:<34} {attack:<16} {seconds:8.4f}   {grows or '-':<16} {ratio:10.1f}{'  SUPER-LINEAR' if bad else ''}")
    worst = max(rows, key=lambda r: r[2])
    print(f"\nworst pattern: {worst[0]} on '{worst[1]}': {worst[2]:.4f} s at {4 * args.length:,} characters")
    print(f"\nwhole functions on one answer of {args.texts:,} characters (slowest attack):")
    for step, attack, seconds in bench_cleaning(args.texts):
        print(f"{step:<26} {attack:<18} {seconds:8.3f} s", flush=True)
    print(f"\n{flagged} super-linear pattern(s)")
    return 1 if flagged else 0


if __name__ == "__main__":
    sys.exit(main())
