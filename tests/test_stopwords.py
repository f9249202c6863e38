"""Stop lists: spaCy's list ± profile ± study ± decisions, normalised exactly like the tokens."""

from __future__ import annotations

import pytest

from workbench.core.decisions import Decision, Decisions
from workbench.core.profiles import load_profile
from workbench.core.settings import study_from_dict
from workbench.core.stopwords import spacy_stop_words
from workbench.core.terms import make_termer


def _study(**terms: object):
    return study_from_dict({"sources": [{"path": "x.csv"}], "terms": terms})


@pytest.mark.slow
def test_every_stop_word_survives_the_token_normalisation(lang: str) -> None:
    """Each stop word, run through the same normalisation as a token (lemma, overrides, lower case,
    NFC), lands in the effective stop set — unless the profile removed it, or removed the word its
    lemma belongs to (reported as a conflict). Typed alone, such a word yields no term — checked for
    words the tokenizer keeps whole (Finnish "ellei" is split into "ell" + the negation "ei", which
    stays a term on purpose)."""
    profile = load_profile(lang)
    termer = make_termer(lang, profile, _study(), Decisions())
    words = sorted((spacy_stop_words(profile.spacy_code) | profile.stop_add) - profile.stop_remove)
    allowed = set(termer.stop_list.conflicts)
    terms = termer.normalise(words)
    missing = [w for w, t in zip(words, terms, strict=True) if t not in termer.stop_terms and w not in allowed]
    assert not missing, f"{lang}: stop words that normalise to a non-stop term: {missing[:10]}"
    tokenizer = termer.tokenizer
    single = [w for w in words if w not in allowed and w.isalpha() and len(tokenizer(w)) == 1][:200]
    leaking = [w for w in single if termer.terms(w)]
    assert not leaking, f"{lang}: stop words that still give a term as a whole answer: {leaking[:10]}"


@pytest.mark.slow
def test_removed_words_stay_terms(lang: str) -> None:
    """Words of stop_remove.txt are terms after normalisation (negations, intensifiers...)."""
    profile = load_profile(lang)
    termer = make_termer(lang, profile, _study(), Decisions())
    removed = sorted(profile.stop_remove)
    stopped = [w for w, t in zip(removed, termer.normalise(removed), strict=True) if t in termer.stop_terms]
    assert not stopped, f"{lang}: removed from the stop list but still stopped: {stopped}"


def test_a_stop_word_also_removes_its_lemma() -> None:
    """English "was" is a stop word; its lemma "be" (spaCy lookup table) is removed with it, and so is
    "were", an inflection of the same lemma, even if spaCy's list did not name it."""
    termer = make_termer("en", load_profile("en"), _study(), Decisions())
    assert "be" in termer.stop_terms
    assert termer.terms("the rooms were clean") == ["room", "clean"]


def test_removal_takes_out_every_form_of_the_lemma() -> None:
    """German "keine/keinen/keinem" lemmatise to "kein" (spaCy lookup table); removing the negation keeps all of them."""
    termer = make_termer("de", load_profile("de"), _study(), Decisions())
    assert termer.terms("keinen Sitzplatz") == ["kein", "sitzplatz"]


def test_layers_apply_in_order_study_then_decisions() -> None:
    """defaults < profile < study < decisions: a later layer wins over an earlier one."""
    study = _study(stop_words_add={"en": ["room", "Staff"]}, stop_words_remove={"en": ["the", "very"]})
    decisions = Decisions.fold([
        Decision(1, 0.0, "stop_remove", "room", "1", "en", "active"),
        Decision(2, 0.0, "stop_add", "clean", "1", "en", "active"),
    ])  # fmt: skip
    termer = make_termer("en", load_profile("en"), study, decisions)
    assert "staff" in termer.stop_terms and "the" not in termer.stop_terms
    assert "room" not in termer.stop_terms and "clean" in termer.stop_terms
    assert termer.terms("The staff cleaned the rooms") == ["the", "the", "room"]
    assert termer.stop_list.layers["study_add"] == 2 and termer.stop_list.layers["decision_add"] == 1


def test_added_stop_word_is_normalised_like_tokens() -> None:
    """A study stop word given as an inflected, capitalised form stops every inflection of its lemma."""
    termer = make_termer("en", load_profile("en"), _study(stop_words_add={"en": ["Trains"]}), Decisions())
    assert termer.terms("train trains TRAIN late") == ["late"]


@pytest.mark.parametrize("word", ["not", "very", "too", "never", "without"])
def test_english_meaningful_words_kept(word: str) -> None:
    termer = make_termer("en", load_profile("en"), _study(), Decisions())
    assert termer.terms(f"{word} clean") == [word, "clean"]
