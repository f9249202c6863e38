"""Language profiles: every shipped folder is well formed, and bad profiles fail with one clear line."""

from __future__ import annotations

import shutil
import unicodedata
from pathlib import Path

import pytest

from workbench.core.errors import SettingsError
from workbench.core.profiles import available_languages, load_profile, profiles_root, read_word_list
from workbench.core.stopwords import spacy_stop_words

LAUNCH = {"en", "de", "fr", "es", "it", "pt", "nl", "pl", "sv", "da", "nb", "ru", "cs", "ro", "ca", "tr", "hu", "el", "fi"}
LISTS = ("stop_add.txt", "stop_remove.txt", "connectors.txt")


def test_launch_languages_have_profiles() -> None:
    """The 19 launch languages of issue 11 each have a profile folder."""
    assert LAUNCH <= set(available_languages())


def test_profile_loads(lang: str) -> None:
    profile = load_profile(lang)
    assert profile.code == lang
    assert profile.lemmatizer in ("spacy-lookup", "simplemma", "none")
    assert profile.lookup_tables
    assert profile.name and profile.name != lang


@pytest.mark.parametrize("name", LISTS)
def test_word_lists_sorted_unique_nfc(lang: str, name: str) -> None:
    """Word lists are one entry per line, sorted, without duplicates, in NFC (STYLE.md: diffs read well)."""
    words = read_word_list(profiles_root() / lang / name)
    assert words == sorted(words), f"{lang}/{name} is not sorted"
    assert len(words) == len(set(words)), f"{lang}/{name} has duplicates"
    for word in words:
        assert unicodedata.normalize("NFC", word) == word, f"{lang}/{name}: {word!r} is not NFC"
        assert word == word.strip() and word


def test_every_stop_removal_is_explained_and_effective(lang: str) -> None:
    """Each word in stop_remove.txt carries a reason after '#', and spaCy's list really holds it
    (a removal of a word spaCy never listed would silently do nothing)."""
    path = profiles_root() / lang / "stop_remove.txt"
    spacy_list = spacy_stop_words(load_profile(lang).spacy_code)
    for line in path.read_text(encoding="utf-8").splitlines():
        word = line.split("#", 1)[0].strip()
        if not word:
            continue
        assert "#" in line and line.split("#", 1)[1].strip(), f"{lang}: no reason given for removing {word!r}"
        assert word in spacy_list, f"{lang}: {word!r} is not in spaCy's stop list, so removing it does nothing"


def test_negations_are_never_stop_words(lang: str) -> None:
    """Common practice for opinion text: the plain negation word of each language stays a term.
    Negation words per language [recalled from memory]."""
    negation = {
        "en": "not", "de": "nicht", "fr": "pas", "es": "no", "it": "non", "pt": "não", "nl": "niet",
        "pl": "nie", "sv": "inte", "da": "ikke", "nb": "ikke", "ru": "не", "cs": "ne", "ro": "nu",
        "ca": "no", "tr": "değil", "hu": "nem", "el": "δεν", "fi": "ei",
    }  # fmt: skip
    if lang not in negation:
        pytest.skip("no negation word recorded for this language")
    assert negation[lang] in load_profile(lang).stop_remove


# --------------------------------------------------------------------------- bad profiles


@pytest.fixture
def root(tmp_path: Path) -> Path:
    """A private copy of two shipped profiles to break."""
    for code in ("en", "de"):
        shutil.copytree(profiles_root() / code, tmp_path / code)
    return tmp_path


def test_unknown_language_names_the_available_ones(root: Path) -> None:
    with pytest.raises(SettingsError, match=r"no language profile for 'xx'.*supported languages: de, en"):
        load_profile("xx", root)


def test_toml_syntax_error_names_file_and_line(root: Path) -> None:
    path = root / "en" / "profile.toml"
    path.write_text('name = "English"\nlemmatizer = "spacy-lookup\n', encoding="utf-8")
    with pytest.raises(SettingsError) as err:
        load_profile("en", root)
    message = str(err.value)
    assert str(path) in message and "line 2" in message and "\n" not in message


def test_unknown_profile_key_suggests_the_nearest(root: Path) -> None:
    path = root / "de" / "profile.toml"
    path.write_text(path.read_text(encoding="utf-8") + 'lemma_fallbak = "none"\n', encoding="utf-8")
    with pytest.raises(SettingsError, match=r"unknown key 'lemma_fallbak' \(did you mean 'lemma_fallback'\?\)"):
        load_profile("de", root)


def test_bad_lemmatizer_and_fallback_values(root: Path) -> None:
    path = root / "en" / "profile.toml"
    original = path.read_text(encoding="utf-8")
    path.write_text(original.replace('lemma_fallback = "simplemma"', 'lemma_fallback = "spacy"'), encoding="utf-8")
    with pytest.raises(SettingsError, match="lemma_fallback = 'spacy' is not one of simplemma, none"):
        load_profile("en", root)
    path.write_text(original.replace('lemmatizer = "spacy-lookup"', 'lemmatizer = "magic"'), encoding="utf-8")
    with pytest.raises(SettingsError, match="lemmatizer = 'magic' is not one of"):
        load_profile("en", root)


def test_override_must_map_to_a_string(root: Path) -> None:
    (root / "en" / "lemma_overrides.toml").write_text("[overrides]\nfoo = 3\n", encoding="utf-8")
    with pytest.raises(SettingsError, match="lemma_overrides.toml: every override must map a form to a string"):
        load_profile("en", root)


def test_word_list_not_utf8_names_the_line(root: Path) -> None:
    (root / "de" / "stop_add.txt").write_bytes("alpha\nbeta\n".encode() + "grüße\n".encode("latin-1"))
    with pytest.raises(SettingsError, match=r"stop_add.txt: line 3 is not UTF-8"):
        load_profile("de", root)


def test_empty_word_list_is_an_empty_set(root: Path) -> None:
    (root / "de" / "stop_add.txt").write_text("", encoding="utf-8")
    (root / "de" / "connectors.txt").write_text("# only a comment\n\n", encoding="utf-8")
    profile = load_profile("de", root)
    assert profile.stop_add == frozenset() and profile.connectors == frozenset()
