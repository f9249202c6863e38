"""Lemmatiser backends: the persistent lookup-table cache, the lookup rule, simplemma, overrides, pipelines."""

from __future__ import annotations

import os
import sqlite3
from pathlib import Path

import pytest

from workbench.core.errors import SettingsError
from workbench.core.lemmas import (
    LookupLemmatiser,
    SimplemmaLemmatiser,
    build_table,
    cache_dir,
    load_pipeline,
    lookups_version,
    lowercase,
    open_table,
    read_source_table,
    resolve_overrides,
    table_path,
)


@pytest.fixture
def fresh_cache(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Path:
    folder = tmp_path / "cache"
    monkeypatch.setenv("TERMLOOM_CACHE_DIR", str(folder))
    return folder


def test_cache_dir_follows_the_environment(fresh_cache: Path) -> None:
    assert cache_dir() == fresh_cache


def test_table_is_built_once_then_opened(fresh_cache: Path) -> None:
    """First open builds the SQLite file (named by language and spacy-lookups-data version); the next reads it."""
    first = open_table("da", folder=fresh_cache)
    assert first.path is not None and first.path.is_file() and first.build_seconds > 0
    assert f"sld{lookups_version()}" in first.path.name and first.path.parent.parent == fresh_cache
    assert first.path.read_bytes()[:16] == b"SQLite format 3\x00"  # never a pickle
    from workbench.core import lemmas

    lemmas._open_table.cache_clear()
    second = open_table("da", folder=fresh_cache)
    assert second.build_seconds == 0.0 and second.entries == first.entries


def test_table_holds_every_source_entry(fresh_cache: Path) -> None:
    """The cached table equals spacy-lookups-data's table entry for entry (Czech: small enough to compare all)."""
    source = read_source_table("cs", ["lemma_lookup"])
    table = open_table("cs", folder=fresh_cache)
    assert table.entries == len(source)
    sample = list(source)[::97]
    assert table.get_many(sample) == {form: source[form] for form in sample}


def test_corrupt_cache_file_is_rebuilt(fresh_cache: Path) -> None:
    from workbench.core import lemmas

    path = table_path("hu", ["lemma_lookup"], fresh_cache)
    path.parent.mkdir(parents=True)
    path.write_bytes(b"not a database")
    lemmas._open_table.cache_clear()
    table = open_table("hu", folder=fresh_cache)
    assert table.entries > 30000 and table.build_seconds > 0


def test_unwritable_cache_keeps_table_in_memory(tmp_path: Path) -> None:
    from workbench.core import lemmas

    blocker = tmp_path / "file-not-folder"
    blocker.write_text("x")
    lemmas._open_table.cache_clear()
    table = open_table("hu", folder=blocker)
    assert table.path is None and table.get_many(["Aaronsonnak"]) == {"Aaronsonnak": "Aaronson"}


def test_unknown_table_is_a_settings_error() -> None:
    with pytest.raises(SettingsError, match=r"no table 'lemma_lookup_xyz' for 'de'.*fix lookup_tables"):
        read_source_table("de", ["lemma_lookup_xyz"])


@pytest.mark.parametrize("code", ["en", "de"])
def test_table_agrees_with_spacy_lookup_lemmatizer(code: str) -> None:
    """Reference library: spaCy's own ``Lemmatizer`` in ``lookup`` mode (spacy.pipeline.Lemmatizer,
    mode="lookup", tables from spacy-lookups-data) gives, for every token of real text, the same
    lemma as an exact lookup in our cached table. Text: chatterbot-corpus conversations (registry package)."""
    import spacy
    import yaml
    from importlib import resources

    folder = {"en": "english", "de": "german"}[code]
    texts = []
    for path in sorted(Path(str(resources.files("chatterbot_corpus") / "data" / folder)).glob("*.yml"))[:6]:
        for conversation in yaml.safe_load(path.read_text(encoding="utf-8")).get("conversations", []):
            texts.extend(str(x) for x in conversation)
    nlp = spacy.blank(code)
    nlp.add_pipe("lemmatizer", config={"mode": "lookup"})
    nlp.initialize()
    table = open_table(code)
    forms = {t.text: t.lemma_ for doc in nlp.pipe(texts[:400]) for t in doc}
    ours = table.get_many(forms)
    assert len(forms) > 300
    for form, lemma in forms.items():
        assert ours.get(form, form) == lemma, form


def test_lookup_rule_exact_then_lower_then_title() -> None:
    """German nouns are stored capitalised. "Häuser" is the plural of "Haus" (Duden) [recalled from memory]:
    the exact form hits; the lower-cased "häuser" (typed in lower case) is found through title case."""
    lemmatiser = LookupLemmatiser(open_table("de"))
    assert lemmatiser.lemmas(["Häuser", "häuser", "HÄUSER"]) == ["Haus", "Haus", "Haus"]
    # exact first: the verb "essen" and the noun "Essen" keep their own entries
    assert lemmatiser.lemmas(["aß"]) == ["essen"]
    # unknown forms come back unchanged without a fallback
    assert lemmatiser.lemmas(["Xyzzyquux"]) == ["Xyzzyquux"]


def test_fallback_fills_forms_the_table_lacks() -> None:
    """Dutch "kinderen" -> "kind" and "landen" -> "land" (UD_Dutch-Alpino, tests/data/lemma_gold.tsv) are
    missing from spaCy's Dutch table; simplemma supplies them, while table hits stay the table's."""
    table = open_table("nl")
    assert LookupLemmatiser(table).lemmas(["kinderen", "landen", "zegt"]) == ["kinderen", "landen", "zeggen"]
    with_fallback = LookupLemmatiser(table, SimplemmaLemmatiser("nl"))
    assert with_fallback.lemmas(["kinderen", "landen", "zegt"]) == ["kind", "land", "zeggen"]


def test_simplemma_tries_persist_in_the_cache(fresh_cache: Path) -> None:
    """simplemma's dictionary is written as a trie under the cache folder. Greek "σπίτια" is the plural
    of "σπίτι" (house) [recalled from memory]."""
    assert SimplemmaLemmatiser("el", fresh_cache).lemmas(["σπίτια"]) == ["σπίτι"]
    assert list(fresh_cache.glob("simplemma-*/el.dic"))


def test_simplemma_retries_capitalised_forms_in_lower_case() -> None:
    """simplemma returns Polish "Koty" unchanged; our rule retries it lower-cased: "koty" -> "kot"
    (plural of "kot", cat) [recalled from memory]."""
    assert SimplemmaLemmatiser("pl").lemmas(["Koty", "kotów"]) == ["kot", "kot"]


def test_turkish_lowercase_keeps_dotted_and_dotless_i() -> None:
    """Turkish orthography pairs İ/i and I/ı (Unicode SpecialCasing.txt, tr locale)."""
    assert lowercase("İSTANBUL", "tr") == "istanbul"
    assert lowercase("ILIK", "tr") == "ılık"
    assert lowercase("ILIK", "en") == "ilik"
    assert lowercase("Straße", "de") == "straße"  # no casefold: ß stays


def test_overrides_resolve_chains_and_later_layers_win() -> None:
    merged = resolve_overrides(
        [("profile", {"Colour": "color", "tyres": "tire"}), ("study", {"color": "hue", "tyres": "tyre"})], "en"
    )
    assert merged == {"colour": "hue", "color": "hue", "tyres": "tyre"}


def test_override_to_itself_is_an_error() -> None:
    with pytest.raises(SettingsError, match=r"study: lemma override 'Colour' -> 'colour' maps the word to itself"):
        resolve_overrides([("study", {"Colour": "colour"})], "en")


def test_override_cycle_is_an_error_naming_the_words() -> None:
    with pytest.raises(SettingsError, match=r"form a cycle \((a -> b -> c -> a|b -> c -> a -> b|c -> a -> b -> c)\)"):
        resolve_overrides([("profile", {"a": "b", "b": "c"}), ("decisions", {"c": "a"})], "en")


def test_pipeline_not_installed_is_a_settings_error() -> None:
    with pytest.raises(SettingsError, match=r"terms.pipelines.de names the spaCy pipeline 'de_core_news_sm', which is not installed"):
        load_pipeline("de_core_news_sm", "de")


def test_pipeline_from_a_folder_is_loaded(tmp_path: Path) -> None:
    """A pipeline saved with spaCy's ``Language.to_disk`` is loaded from its folder."""
    import spacy

    nlp = spacy.blank("en")
    nlp.add_pipe("lemmatizer", config={"mode": "lookup"})
    nlp.initialize()
    nlp.to_disk(tmp_path / "pipe")
    loaded = load_pipeline("pipe", "en", base_dir=tmp_path)
    assert [t.lemma_ for t in loaded("the cars were")] == ["the", "car", "be"]
    with pytest.raises(SettingsError, match="is for 'en', not 'de'"):
        load_pipeline(str(tmp_path / "pipe"), "de")


def test_build_is_atomic(tmp_path: Path) -> None:
    """A build writes beside the target and renames: no partial file is left under the final name."""
    target = tmp_path / "t.sqlite"
    n = build_table("hu", ["lemma_lookup"], target)
    assert n > 30000 and target.is_file()
    assert not [p for p in tmp_path.iterdir() if p.name.endswith(".partial")]
    with sqlite3.connect(target) as db:
        assert db.execute("SELECT value FROM meta WHERE key = 'language'").fetchone() == ("hu",)
    assert os.access(target, os.R_OK)
