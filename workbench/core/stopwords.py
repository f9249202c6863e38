"""The effective stop list of one language, normalised exactly like the tokens.

Layers, applied in this order (a later layer wins over an earlier one):

1. spaCy's list (``spacy.lang.<code>.stop_words.STOP_WORDS``),
2. the language profile: ``stop_remove.txt`` then ``stop_add.txt``,
3. the study: ``terms.stop_words_remove`` then ``terms.stop_words_add``,
4. the decisions made in the UI: ``stop_remove`` then ``stop_add``.

Every word of every layer is *normalised like a token*: the key set of a word
*w* is ``{lowercase(w), term(w)}`` where ``term(w)`` is what the terms stage
makes of *w* as a token (lemma, lemma override, lower case, NFC). Adding *w*
adds both keys; removing *w* removes both. So a stop word also removes its
lemma ("was" -> "be"), and removing "keine" from the German list also keeps
"keinen", "keinem" (all lemmatised to "kein") as terms. A token is a stop word
when its term is in the resulting set.
"""

from __future__ import annotations

import functools
import importlib
import unicodedata
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, field

from workbench.core.decisions import Decisions
from workbench.core.lemmas import lowercase
from workbench.core.profiles import LanguageProfile
from workbench.core.settings import Terms

#: ``normalise(words) -> terms``: the terms stage's token normalisation, one term per word.
Normaliser = Callable[[Sequence[str]], list[str]]


@functools.lru_cache(maxsize=64)
def spacy_stop_words(spacy_code: str) -> frozenset[str]:
    """spaCy's stop list for a language code (empty when spaCy has none)."""
    try:
        module = importlib.import_module(f"spacy.lang.{spacy_code}.stop_words")
    except ModuleNotFoundError:
        return frozenset()
    return frozenset(unicodedata.normalize("NFC", w) for w in getattr(module, "STOP_WORDS", ()))


@dataclass(frozen=True)
class StopList:
    """The effective stop list of one language.

    ``terms`` is the set a token's term is checked against. ``layers`` counts
    the words each layer added or removed (for the UI and the manifest);
    ``conflicts`` lists words a layer asked to add whose term a later
    removal took out again (e.g. spaCy's "n't" -> "not" after "not" was removed).
    """

    language: str
    terms: frozenset[str]
    layers: dict[str, int] = field(default_factory=dict)
    conflicts: tuple[str, ...] = ()


def _keys(words: Iterable[str], language: str, normalise: Normaliser) -> dict[str, set[str]]:
    words = [w.strip() for w in words if w and w.strip()]
    if not words:
        return {}
    terms = normalise(words)
    return {w: {lowercase(w, language), t} for w, t in zip(words, terms, strict=True)}


def effective_stop_list(
    language: str,
    profile: LanguageProfile | None,
    settings: Terms,
    decisions: Decisions,
    normalise: Normaliser,
    base: Iterable[str] | None = None,
) -> StopList:
    """Build the effective stop list of ``language`` (see the module docstring for the layers).

    ``base`` replaces spaCy's list (the ``und`` pseudo-language uses the union
    of the study's languages).
    """
    if base is None:
        base = spacy_stop_words(profile.spacy_code) if profile is not None else frozenset()
    layers: list[tuple[str, str, Iterable[str]]] = [("add", "spacy", base)]
    if profile is not None:
        layers += [("remove", "profile_remove", profile.stop_remove), ("add", "profile_add", profile.stop_add)]
    layers += [
        ("remove", "study_remove", settings.stop_words_remove.get(language, ())),
        ("add", "study_add", settings.stop_words_add.get(language, ())),
        ("remove", "decision_remove", decisions.stop_remove.get(language, ())),
        ("add", "decision_add", decisions.stop_add.get(language, ())),
    ]
    current: set[str] = set()
    counts: dict[str, int] = {}
    # word -> (its term, index of the layer that added it); removals seen after it
    added: dict[str, tuple[str, int]] = {}
    removed_words: dict[str, int] = {}
    for index, (action, name, words) in enumerate(layers):
        keyed = _keys(sorted(words), language, normalise)
        counts[name] = len(keyed)
        for word, keys in keyed.items():
            lower = lowercase(word, language)
            if action == "add":
                current |= keys
                added[word] = (max(keys - {lower}, default=lower), index)
            else:
                current -= keys
                removed_words[lower] = index
    # A word added by one layer whose normalised form a later layer removed
    # while removing a *different* word ("besten" -> "gut" after "gut" was removed).
    conflicts = tuple(
        sorted(
            w
            for w, (term, index) in added.items()
            if term not in current and removed_words.get(lowercase(w, language), -1) < index
        )
    )
    return StopList(language, frozenset(current), counts, conflicts)
