"""Language profiles: plain data files in ``lang_profiles/<code>/`` turned into a typed object.

Files in a profile folder (all optional but ``profile.toml``; formats are
described in ``lang_profiles/README.md``):

``profile.toml``          ``name``, ``lemmatizer`` (``spacy-lookup`` /
                          ``simplemma`` / ``none``), optional ``spacy_code``,
                          ``lookup_tables`` (spacy-lookups-data tables, merged
                          in order) and ``lemma_fallback`` (``simplemma`` /
                          ``none``, for forms the table lacks)
``stop_add.txt``          stop words added to spaCy's list
``stop_remove.txt``       words removed from spaCy's list (negations, intensifiers)
``non_answers.txt``       phrases that mean "no answer" in this language
``connectors.txt``        words allowed inside phrases (n-grams)
``lemma_overrides.toml``  ``[overrides]`` table: form = "lemma"

Word lists hold one entry per line, UTF-8; ``#`` starts a comment.
"""

from __future__ import annotations

import functools
import tomllib
from dataclasses import dataclass, field
import importlib.util
from pathlib import Path
from typing import Literal

from workbench.core.errors import SettingsError, did_you_mean
from workbench.core.settings import check_key_depth

Lemmatizer = Literal["spacy-lookup", "simplemma", "none"]
#: Keys ``profile.toml`` may hold; anything else is a typo worth reporting.
PROFILE_KEYS = ("name", "lemmatizer", "spacy_code", "lookup_tables", "lemma_fallback")


@dataclass(frozen=True)
class LanguageProfile:
    code: str
    name: str
    lemmatizer: Lemmatizer
    spacy_code: str
    stop_add: frozenset[str] = field(default_factory=frozenset)
    stop_remove: frozenset[str] = field(default_factory=frozenset)
    non_answers: tuple[str, ...] = ()
    connectors: frozenset[str] = field(default_factory=frozenset)
    lemma_overrides: dict[str, str] = field(default_factory=dict)
    lookup_tables: tuple[str, ...] = ("lemma_lookup",)
    lemma_fallback: Literal["simplemma", "none"] = "none"
    #: The folder the profile was read from (for messages).
    folder: Path | None = field(default=None, compare=False)


def profiles_root() -> Path:
    """The ``lang_profiles`` folder: beside the package in a checkout, inside it when installed."""
    checkout = Path(__file__).resolve().parents[2] / "lang_profiles"
    if checkout.is_dir():
        return checkout
    # Installed, the folder is a namespace package (no __init__.py), whose
    # resources.files() is a MultiplexedPath; its search location is the folder.
    spec = importlib.util.find_spec("workbench.lang_profiles")
    if spec is None or not spec.submodule_search_locations:
        raise SettingsError("the language profiles are missing from this installation; reinstall termloom")
    return Path(next(iter(spec.submodule_search_locations)))


def available_languages(root: Path | None = None) -> list[str]:
    """Codes of every profile folder that holds a ``profile.toml``."""
    root = root or profiles_root()
    return sorted(p.name for p in root.iterdir() if (p / "profile.toml").is_file())


def read_word_list(path: Path) -> list[str]:
    """One entry per line; blank lines and ``#`` comments ignored; errors name file and line."""
    if not path.is_file():
        return []
    words = []
    try:
        text = path.read_text(encoding="utf-8")
    except UnicodeDecodeError as exc:
        line = path.read_bytes()[: exc.start].count(b"\n") + 1
        raise SettingsError(f"{path}: line {line} is not UTF-8; save the word list as UTF-8") from None
    for line in text.splitlines():
        entry = line.split("#", 1)[0].strip()
        if entry:
            words.append(entry)
    return words


def _read_toml(path: Path) -> dict:
    try:
        text = path.read_text(encoding="utf-8")
        check_key_depth(text, str(path))
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise SettingsError(f"{path}: TOML syntax error: {exc}; fix the file at that place") from None
    except UnicodeDecodeError:
        raise SettingsError(f"{path}: not UTF-8; save it as UTF-8") from None
    except RecursionError:
        raise SettingsError(f"{path}: tables or lists nest too deeply; a profile needs one or two levels") from None
    except ValueError:  # tomllib lets int()'s 4,300-digit limit through as a ValueError
        raise SettingsError(f"{path}: an integer has thousands of digits; fix the value") from None


@functools.lru_cache(maxsize=64)
def _load(code: str, root: Path) -> LanguageProfile:
    folder = root / code
    meta_path = folder / "profile.toml"
    if not meta_path.is_file():
        known = ", ".join(available_languages(root))
        raise SettingsError(
            f"no language profile for '{code}' (looked in {folder}); supported languages: {known}; "
            "add a profile folder as described in lang_profiles/README.md"
        )
    meta = _read_toml(meta_path)
    for key in meta:
        if key not in PROFILE_KEYS:
            raise SettingsError(
                f"{meta_path}: unknown key '{key}'{did_you_mean(key, PROFILE_KEYS)}; "
                f"valid keys: {', '.join(PROFILE_KEYS)}"
            )
    lemmatizer = meta.get("lemmatizer", "none")
    if lemmatizer not in ("spacy-lookup", "simplemma", "none"):
        raise SettingsError(
            f"{meta_path}: lemmatizer = '{lemmatizer}' is not one of spacy-lookup, simplemma, none"
        )
    overrides_path = folder / "lemma_overrides.toml"
    overrides = _read_toml(overrides_path).get("overrides", {}) if overrides_path.is_file() else {}
    if not isinstance(overrides, dict) or not all(isinstance(v, str) for v in overrides.values()):
        raise SettingsError(f"{overrides_path}: every override must map a form to a string lemma")
    tables = meta.get("lookup_tables", ["lemma_lookup"])
    if not isinstance(tables, list) or not tables or not all(isinstance(t, str) and t for t in tables):
        raise SettingsError(f"{meta_path}: lookup_tables must be a non-empty list of table names, e.g. [\"lemma_lookup\"]")
    fallback = meta.get("lemma_fallback", "none")
    if fallback not in ("simplemma", "none"):
        raise SettingsError(f"{meta_path}: lemma_fallback = '{fallback}' is not one of simplemma, none")
    return LanguageProfile(
        code=code,
        name=str(meta.get("name", code)),
        lemmatizer=lemmatizer,
        spacy_code=str(meta.get("spacy_code", code)),
        stop_add=frozenset(read_word_list(folder / "stop_add.txt")),
        stop_remove=frozenset(read_word_list(folder / "stop_remove.txt")),
        non_answers=tuple(read_word_list(folder / "non_answers.txt")),
        connectors=frozenset(read_word_list(folder / "connectors.txt")),
        lemma_overrides=dict(overrides),
        lookup_tables=tuple(tables),
        lemma_fallback=fallback,
        folder=folder,
    )


def load_profile(code: str, root: Path | None = None) -> LanguageProfile:
    """Load one language's profile; a missing one is a :class:`SettingsError` listing the supported codes."""
    return _load(code, (root or profiles_root()).resolve())


def load_profiles(codes: list[str], root: Path | None = None) -> dict[str, LanguageProfile]:
    return {code: load_profile(code, root) for code in codes}
