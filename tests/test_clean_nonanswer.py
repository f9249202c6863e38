"""Non-answer phrase lists and the keyboard-mash heuristic, checked against real vocabulary."""

from __future__ import annotations

import gzip
import json
import random
from pathlib import Path

import pytest

from workbench.core.nonanswer import NonAnswerRules, is_keyboard_mash, phrase_key
from workbench.core.profiles import available_languages, load_profile, profiles_root, read_word_list

LANGS = available_languages()


@pytest.fixture(params=LANGS)
def lang(request: pytest.FixtureRequest) -> str:
    return request.param


def test_every_profile_has_a_sorted_lowercase_non_answer_list(lang: str) -> None:
    """Word-list conventions (STYLE.md): one entry per line, sorted, UTF-8, lower case; no two
    entries that compare equal after phrase_key; no entry that the punctuation rule already covers."""
    path = profiles_root() / lang / "non_answers.txt"
    entries = read_word_list(path)
    assert len(entries) >= 10
    assert entries == sorted(entries)
    assert all(e == e.lower() for e in entries)
    keys = [phrase_key(e) for e in entries]
    assert all(keys), "entries of punctuation only belong to the punctuation rule"
    assert len(set(keys)) == len(keys), "entries that differ only by accents/punctuation"
    assert load_profile(lang).non_answers == tuple(entries)


def test_phrase_key_examples() -> None:
    assert phrase_key("N/A") == phrase_key("n.a.") == "n a"
    assert phrase_key("Don’t know!") == phrase_key("dont know") == "dont know"
    assert phrase_key("Weiß nicht") == "weiss nicht"
    assert phrase_key("  NO   SÉ ") == "no se"


@pytest.mark.parametrize(
    "text",
    ["asdf", "asdfghjkl", "qwertyuiop", "qwertz", "azerty", "jkjkjk", "lkjhgf", "aaaaaa", "sdfjkl", "xcvbnm",
     "йцукен", "asdf asdf", "hjkl;'"],
)  # fmt: skip
def test_common_keyboard_mash_is_caught(text: str) -> None:
    """Keyboard rows of QWERTY/QWERTZ/AZERTY/ЙЦУКЕН and key repeats (common practice examples)."""
    assert is_keyboard_mash(text)


@pytest.mark.parametrize(
    "text",
    ["The staff were very friendly", "Herbstschwimmen war toll", "čtvrt hodiny čekání", "Strč prst skrz krk",
     "rhythm", "Angstschweiß", "zmrzlina", "ok", "Sehr gut", "wow", "nice", "yes please"],
)  # fmt: skip
def test_real_words_are_not_mash(text: str) -> None:
    """Consonant-heavy real words (German compounds, Czech words without vowels) are not mash."""
    assert not is_keyboard_mash(text)


def _lookup_words(code: str, limit: int = 20_000) -> list[str]:
    import spacy_lookups_data

    folder = Path(spacy_lookups_data.__file__).parent / "data"
    words: set[str] = set()
    for path in sorted(folder.glob(f"{code}_lemma_lookup*.json.gz")):
        with gzip.open(path, "rt", encoding="utf-8") as handle:
            table = json.load(handle)
        words.update(w.lower() for w in table if isinstance(w, str) and w.isalpha())
    ordered = sorted(words)
    return random.Random(5).sample(ordered, min(limit, len(ordered)))


@pytest.mark.parametrize("code", ["en", "de", "cs", "hu"])
def test_mash_false_positive_rate_on_real_vocabulary(code: str) -> None:
    """Outside data: the word lists in spacy-lookups-data (lemma lookup tables). On a fixed sample
    of 20,000 words per language, at most 0.1 % may look like mash (measured: ≤ 0.02 %). The
    four languages (small tables; German for its compounds, Czech for vowel-less words) keep the test fast; the full check over all tables
    is in tests/bench/bench_clean.py."""
    words = _lookup_words(code)
    assert len(words) >= 1000
    hits = [w for w in words if is_keyboard_mash(w)]
    assert len(hits) <= 0.001 * len(words), hits[:20]


def test_rules_order_and_study_phrases() -> None:
    rules = NonAnswerRules(["Nothing", "n/a", "-"], min_chars=3)
    assert rules.classify("") == "empty"
    assert rules.classify("⟨email⟩") == "pii_only"
    assert rules.classify("🙂") == "emoji_only"
    assert rules.classify("?!") == "punctuation_only"
    assert rules.classify("NOTHING.") == "non_answer"
    assert rules.classify("qwerty") == "keyboard_mash"
    assert rules.classify("ab") == "too_short"
    assert rules.classify("Nothing to complain about") is None
