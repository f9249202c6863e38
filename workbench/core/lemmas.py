"""Lemmatiser backends: spaCy's lookup tables (kept in a fast persistent cache), simplemma, none.

Why not spaCy's ``Lemmatizer`` pipe
-----------------------------------
spaCy's lookup lemmatiser reads its table from a compressed JSON file in
spacy-lookups-data on every ``nlp.initialize()``: 0.1–2.8 s and hundreds of MB
per language, before the first answer. It then looks up ``token.text`` only
(case-sensitive, no lower-case fallback) once per token. We read the same
tables once per (language, spacy-lookups-data version), write them into a
small SQLite file in the user cache (:func:`cache_dir`), and from then on
open that file in well under a millisecond and look up only the *distinct*
forms a run meets, in batches. spaCy's blank pipeline still tokenises; the
benchmark ``tests/bench/bench_terms.py`` measures both approaches side by side.
SQLite was chosen over a memory-mapped pair of sorted arrays (similar speed,
2.5x the size on disk) and over pickle (never: loading a pickle runs code).

The lookup rule
---------------
For a form *w* the table is consulted with, in this order,

1. *w* exactly as written,
2. ``lowercase(w)``,
3. ``lowercase(w)`` with its first letter upper-cased (title case).

The first hit wins; no hit leaves *w* unchanged (or asks the profile's
fallback lemmatiser, see ``lemma_fallback`` in ``lang_profiles/README.md``).
Exact-first matters for languages whose tables are keyed by the written
case: German nouns ("Preise" -> "Preis") are stored capitalised, and
lower-casing first would miss them or hit a different word. Title case
last recovers German nouns typed in lower case ("preise" -> "Preis"), which
survey answers often are. Terms are lower-cased *after* lemmatisation
(``terms.py``), so "Preis" becomes the term "preis".

For French and Catalan the tables list several lemmas for some forms; like
spaCy's lookup mode we take the first. For Polish spacy-lookups-data splits
the table by part of speech; with no tagger we merge the parts in the order
given by the profile's ``lookup_tables`` (first table wins on a clash).
"""

from __future__ import annotations

import functools
import gzip
import hashlib
import json
import os
import sqlite3
import time
import unicodedata
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from importlib import resources
from pathlib import Path
from typing import Any, Protocol

from workbench.core.errors import SettingsError
from workbench.core.profiles import LanguageProfile

#: Environment variable that moves the cache folder (tests point it at a temporary folder).
CACHE_ENV = "TERMLOOM_CACHE_DIR"
#: Bumped whenever the layout of the cached table files changes.
TABLE_FORMAT = 1
#: Forms per SQL query; well below SQLite's limit on bound parameters.
_BATCH = 500


def cache_dir() -> Path:
    """The user cache folder: ``$TERMLOOM_CACHE_DIR`` if set, else the platform's cache folder.

    On Linux that is ``$XDG_CACHE_HOME/termloom`` (``~/.cache/termloom``); on
    macOS ``~/Library/Caches/termloom``; on Windows the local app-data cache.
    """
    override = os.environ.get(CACHE_ENV)
    if override:
        return Path(override).expanduser()
    import platformdirs

    return Path(platformdirs.user_cache_dir("termloom", appauthor=False))


def lowercase(text: str, language: str) -> str:
    """Lower-case the way the language does; the result is NFC.

    Turkish and Azerbaijani pair dotted İ/i and dotless I/ı; Python's
    ``str.lower`` would turn "İ" into "i" plus a combining dot. ``casefold``
    is not used: it turns German "ß" into "ss" and merges words that differ.
    """
    if language in ("tr", "az"):
        text = text.replace("İ", "i").replace("I", "ı")
    return unicodedata.normalize("NFC", text.lower())


# --------------------------------------------------------------------------- lookup tables


def lookups_version() -> str:
    """Version of the installed spacy-lookups-data package (part of every cache file's name)."""
    from importlib.metadata import version

    return version("spacy-lookups-data")


def _table_file(code: str, table: str) -> Path | None:
    data = resources.files("spacy_lookups_data").joinpath("data")
    for suffix in (".json.gz", ".json"):
        candidate = data.joinpath(f"{code}_{table}{suffix}")
        if candidate.is_file():
            return Path(str(candidate))
    return None


def available_tables(code: str) -> list[str]:
    """Names of the lemma lookup tables spacy-lookups-data ships for ``code``."""
    data = Path(str(resources.files("spacy_lookups_data").joinpath("data")))
    names = set()
    for path in data.glob(f"{code}_lemma_lookup*.json*"):
        names.add(path.name.split(".", 1)[0].removeprefix(f"{code}_"))
    return sorted(names)


def read_source_table(code: str, tables: Sequence[str]) -> dict[str, str]:
    """Read and merge spacy-lookups-data tables for one language (first table wins on a clash)."""
    merged: dict[str, str] = {}
    for table in tables:
        path = _table_file(code, table)
        if path is None:
            known = ", ".join(available_tables(code)) or "none"
            raise SettingsError(
                f"spacy-lookups-data {lookups_version()} has no table '{table}' for '{code}' "
                f"(tables for '{code}': {known}); fix lookup_tables in lang_profiles/{code}/profile.toml "
                "or set lemmatizer = 'simplemma'"
            )
        opener = gzip.open if path.suffix == ".gz" else open
        with opener(path, "rb") as handle:
            data: dict[str, Any] = json.loads(handle.read())
        for form, lemma in data.items():
            if form in merged:
                continue
            if isinstance(lemma, list):
                if not lemma:
                    continue
                lemma = lemma[0]
            merged[form] = unicodedata.normalize("NFC", str(lemma))
    return merged


_SCHEMA = """
CREATE TABLE lemma (form TEXT PRIMARY KEY, lemma TEXT NOT NULL) WITHOUT ROWID;
CREATE TABLE meta (key TEXT PRIMARY KEY, value TEXT NOT NULL);
"""


def _write_table(db: sqlite3.Connection, code: str, tables: Sequence[str], data: dict[str, str]) -> None:
    db.executescript(_SCHEMA)
    # Sorted inserts build the B-tree in one pass.
    db.executemany("INSERT INTO lemma VALUES (?, ?)", sorted(data.items()))
    meta = {
        "format": str(TABLE_FORMAT),
        "language": code,
        "tables": "+".join(tables),
        "source": f"spacy-lookups-data {lookups_version()}",
        "entries": str(len(data)),
    }
    db.executemany("INSERT INTO meta VALUES (?, ?)", meta.items())
    db.commit()


@dataclass
class LemmaTable:
    """One language's lookup table in its persistent SQLite form.

    ``build_seconds`` is 0 when the table came from the cache; ``path`` is
    ``None`` when the cache folder could not be written and the table lives
    in memory for this process only.
    """

    language: str
    tables: tuple[str, ...]
    entries: int
    path: Path | None
    build_seconds: float
    open_seconds: float
    _db: sqlite3.Connection

    def get_many(self, forms: Iterable[str]) -> dict[str, str]:
        """Exact-match lookup of many forms at once; forms without an entry are absent from the result."""
        wanted = list(dict.fromkeys(forms))
        found: dict[str, str] = {}
        for start in range(0, len(wanted), _BATCH):
            chunk = wanted[start : start + _BATCH]
            query = f"SELECT form, lemma FROM lemma WHERE form IN ({','.join('?' * len(chunk))})"
            found.update(self._db.execute(query, chunk).fetchall())
        return found


def table_path(code: str, tables: Sequence[str], folder: Path | None = None) -> Path:
    """Where the cached table of ``code`` lives for the installed spacy-lookups-data version."""
    digest = hashlib.sha1("+".join(tables).encode()).hexdigest()[:8]
    name = f"{code}-{digest}-sld{lookups_version()}-f{TABLE_FORMAT}.sqlite"
    return (folder or cache_dir()) / "lemma-tables" / name


def _open_cached(path: Path, code: str, tables: Sequence[str]) -> tuple[sqlite3.Connection, int] | None:
    if not path.is_file():
        return None
    try:
        # immutable: the file is never changed in place (a rebuild replaces it), so no locking is needed.
        db = sqlite3.connect(f"{path.as_uri()}?mode=ro&immutable=1", uri=True, check_same_thread=False)
        meta = dict(db.execute("SELECT key, value FROM meta").fetchall())
    except sqlite3.DatabaseError:
        return None
    if meta.get("format") != str(TABLE_FORMAT) or meta.get("language") != code or meta.get("tables") != "+".join(tables):
        db.close()
        return None
    return db, int(meta.get("entries", "0"))


def build_table(code: str, tables: Sequence[str], path: Path) -> int:
    """Build the SQLite form of a table at ``path`` (atomically: written aside, then renamed)."""
    data = read_source_table(code, tables)
    path.parent.mkdir(parents=True, exist_ok=True)
    partial = path.with_name(f"{path.name}.{os.getpid()}.partial")
    partial.unlink(missing_ok=True)
    db = sqlite3.connect(partial)
    try:
        db.execute("PRAGMA journal_mode=OFF")
        db.execute("PRAGMA synchronous=OFF")
        _write_table(db, code, tables, data)
    finally:
        db.close()
    os.replace(partial, path)
    return len(data)


@functools.lru_cache(maxsize=64)
def _open_table(code: str, tables: tuple[str, ...], folder: Path) -> LemmaTable:
    path = table_path(code, tables, folder)
    begin = time.perf_counter()
    opened = _open_cached(path, code, tables)
    if opened is not None:
        db, entries = opened
        return LemmaTable(code, tables, entries, path, 0.0, time.perf_counter() - begin, db)
    try:
        build_table(code, tables, path)
    except OSError:
        # A read-only or full cache folder must not stop the run: keep the table in memory.
        db = sqlite3.connect(":memory:", check_same_thread=False)
        _write_table(db, code, tables, read_source_table(code, tables))
        entries = db.execute("SELECT COUNT(*) FROM lemma").fetchone()[0]
        return LemmaTable(code, tables, entries, None, time.perf_counter() - begin, 0.0, db)
    built = time.perf_counter() - begin
    begin = time.perf_counter()
    opened = _open_cached(path, code, tables)
    if opened is None:
        raise SettingsError(f"lemma table cache {path} cannot be read after building it; delete the folder {path.parent}")
    db, entries = opened
    return LemmaTable(code, tables, entries, path, built, time.perf_counter() - begin, db)


def open_table(code: str, tables: Sequence[str] = ("lemma_lookup",), folder: Path | None = None) -> LemmaTable:
    """Open the cached table of ``code``, building it first if this version has none yet.

    Opened tables are kept for the life of the process (the terminal UI re-runs
    stages often).
    """
    return _open_table(code, tuple(tables), (folder or cache_dir()).resolve())


# --------------------------------------------------------------------------- lemmatisers


class Lemmatiser(Protocol):
    """Context-free lemmatiser: one lemma per form, in the order given."""

    name: str

    def lemmas(self, forms: Sequence[str]) -> list[str]: ...


class IdentityLemmatiser:
    """``lemmatizer = "none"``: every form is its own lemma (terms are still lower-cased)."""

    name = "none"

    def lemmas(self, forms: Sequence[str]) -> list[str]:
        return list(forms)


@functools.lru_cache(maxsize=8)
def _simplemma_lemmatizer(folder: Path) -> Any:
    """One simplemma lemmatiser per cache folder, its dictionaries kept as tries on disk.

    simplemma ships its dictionaries compressed and decodes them in pure
    Python on first use (15–25 s for Polish or Finnish); its
    ``TrieDictionaryFactory`` turns each into a memory-mapped MARISA trie
    once, which then opens in about 0.05 s. The tries live in our cache folder
    so ``TERMLOOM_CACHE_DIR`` moves them too.
    """
    from simplemma import Lemmatizer
    from simplemma.strategies import DefaultStrategy
    from simplemma.strategies.dictionaries import TrieDictionaryFactory

    trie_dir = folder / f"simplemma-{_version('simplemma')}"
    factory = TrieDictionaryFactory(cache_max_size=32, disk_cache_dir=str(trie_dir))
    return Lemmatizer(lemmatization_strategy=DefaultStrategy(dictionary_factory=factory))


class SimplemmaLemmatiser:
    """simplemma (dictionary plus affix rules), with the same exact-then-lower-case rule as the tables.

    simplemma handles case itself, but returns some capitalised forms unchanged
    (Polish "Koty"); when the exact form comes back unchanged, its lower-cased
    form is tried. Callers cache per distinct form and group by language.
    """

    def __init__(self, language: str, folder: Path | None = None) -> None:
        self.language = language
        self.name = f"simplemma {_version('simplemma')}"
        self._lemmatizer = _simplemma_lemmatizer((folder or cache_dir()).resolve())
        try:
            self._lemmatizer.lemmatize("test", language)
        except ValueError:
            raise SettingsError(
                f"simplemma has no dictionary for '{language}'; set lemmatizer = 'none' in "
                f"lang_profiles/{language}/profile.toml"
            ) from None

    def lemmas(self, forms: Sequence[str]) -> list[str]:
        lemmatize, language = self._lemmatizer.lemmatize, self.language
        out = []
        for form in forms:
            lemma = lemmatize(form, language)
            if lemma == form:
                lower = lowercase(form, language)
                if lower != form:
                    lemma = lemmatize(lower, language)
            out.append(unicodedata.normalize("NFC", lemma))
        return out


class LookupLemmatiser:
    """A spacy-lookups-data table with the exact -> lower -> title-case rule, and an optional fallback."""

    def __init__(self, table: LemmaTable, fallback: Lemmatiser | None = None) -> None:
        self.table = table
        self.fallback = fallback
        self.language = table.language
        self.name = f"spacy-lookups-data {lookups_version()} ({'+'.join(table.tables)}, {table.entries:,} forms)" + (
            f" then {fallback.name}" if fallback else ""
        )

    def lemmas(self, forms: Sequence[str]) -> list[str]:
        language = self.language
        candidates: dict[str, tuple[str, str, str]] = {}
        for form in dict.fromkeys(forms):
            lower = lowercase(form, language)
            candidates[form] = (form, lower, lower[:1].upper() + lower[1:])
        found = self.table.get_many(c for trio in candidates.values() for c in trio)
        result: dict[str, str] = {}
        missing = []
        for form, trio in candidates.items():
            lemma = next((found[c] for c in trio if c in found), None)
            if lemma is None:
                missing.append(form)
            else:
                result[form] = lemma
        if missing:
            for form, lemma in zip(missing, self.fallback.lemmas(missing) if self.fallback else missing, strict=True):
                result[form] = lemma
        return [result[form] for form in forms]


class PipelineLemmatiser:
    """A trained spaCy pipeline the user installed; used context-free only for word lists."""

    def __init__(self, nlp: Any, label: str) -> None:
        self.nlp = nlp
        self.name = f"trained pipeline {label}"

    def lemmas(self, forms: Sequence[str]) -> list[str]:
        out = []
        for doc in self.nlp.pipe(forms, batch_size=256):
            out.append(" ".join(t.lemma_ or t.text for t in doc if not t.is_space) or doc.text)
        return out


def _version(package: str) -> str:
    from importlib.metadata import PackageNotFoundError, version

    try:
        return version(package)
    except PackageNotFoundError:
        return "?"


def make_lemmatiser(profile: LanguageProfile, folder: Path | None = None) -> Lemmatiser:
    """The context-free lemmatiser a language profile asks for."""
    if profile.lemmatizer == "none":
        return IdentityLemmatiser()
    if profile.lemmatizer == "simplemma":
        return SimplemmaLemmatiser(profile.code, folder)
    fallback = SimplemmaLemmatiser(profile.code, folder) if profile.lemma_fallback == "simplemma" else None
    return LookupLemmatiser(open_table(profile.spacy_code, profile.lookup_tables, folder), fallback)


def load_pipeline(name: str, language: str, base_dir: Path | None = None) -> Any:
    """Load a trained spaCy pipeline named in ``terms.pipelines``: an installed package or a folder.

    Nothing is downloaded: a pipeline that is not installed is a settings error.
    """
    import spacy

    candidate = Path(name).expanduser()
    if not candidate.is_absolute() and base_dir is not None:
        candidate = base_dir / candidate
    target: str | Path = candidate if candidate.is_dir() else name
    if not isinstance(target, Path) and not spacy.util.is_package(name):
        raise SettingsError(
            f"terms.pipelines.{language} names the spaCy pipeline '{name}', which is not installed "
            "(termloom never downloads models); install it with pip from a file you trust, "
            f"or remove terms.pipelines.{language} to use the lookup tables"
        )
    try:
        nlp = spacy.load(target)
    except (OSError, ValueError) as exc:
        raise SettingsError(f"terms.pipelines.{language}: the spaCy pipeline '{name}' cannot be loaded ({exc})") from None
    if nlp.lang != language:
        raise SettingsError(
            f"terms.pipelines.{language}: the pipeline '{name}' is for '{nlp.lang}', not '{language}'; "
            "name a pipeline of that language"
        )
    return nlp


# --------------------------------------------------------------------------- overrides


def resolve_overrides(layers: Sequence[tuple[str, dict[str, str]]], language: str) -> dict[str, str]:
    """Merge lemma override layers (later layers win) and resolve chains.

    Each key (a form or a lemma) and each target is lower-cased and NFC. A
    chain ``a -> b``, ``b -> c`` resolves to ``a -> c``. An override that maps
    a word to itself, or a cycle (``a -> b``, ``b -> a``), is a
    :class:`SettingsError` naming the layer and the words.
    """
    merged: dict[str, str] = {}
    origin: dict[str, str] = {}
    for where, table in layers:
        for key, target in table.items():
            if not isinstance(target, str) or not target.strip():
                raise SettingsError(f"{where}: lemma override '{key}' must map to a non-empty word")
            k, t = lowercase(key.strip(), language), " ".join(lowercase(target, language).split())
            if k == t:
                raise SettingsError(
                    f"{where}: lemma override '{key}' -> '{target}' maps the word to itself; remove it"
                )
            merged[k] = t
            origin[k] = where
    resolved: dict[str, str] = {}
    for key in merged:
        seen = [key]
        target = merged[key]
        while target in merged:
            if target in seen:
                cycle = " -> ".join([*seen[seen.index(target) :], target])
                raise SettingsError(
                    f"{origin[key]}: lemma overrides of '{language}' form a cycle ({cycle}); "
                    "remove one of them"
                )
            seen.append(target)
            target = merged[target]
        resolved[key] = target
    return resolved
