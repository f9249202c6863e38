"""The terms stage: token rules, lemmas, phrases, overrides, vocabularies, ledger, bad input."""

from __future__ import annotations

import threading

import numpy as np
import pandas as pd
import pytest

from workbench.core.decisions import Decision, Decisions
from workbench.core.errors import Cancelled, InputError, SettingsError
from workbench.core.ledger import Ledger
from workbench.core.profiles import load_profile
from workbench.core.progress import Reporter
from workbench.core.settings import study_from_dict
from workbench.core.terms import emoji_name, extract_terms, make_termer


def _study(**terms: object):
    return study_from_dict({"sources": [{"path": "x.csv"}], "languages": {"expected": ["en", "de"]}, "terms": terms})


def _answers(rows: list[tuple[str, str]], enters: list[bool] | None = None) -> pd.DataFrame:
    n = len(rows)
    return pd.DataFrame(
        {
            "answer_id": [f"r{i}|q" for i in range(n)],
            "source": "survey.csv",
            "row": np.arange(1, n + 1),
            "clean_text": [t for _, t in rows],
            "language": [lang for lang, _ in rows],
            "enters_weighting": enters if enters is not None else [True] * n,
        }
    )


def _run(rows, study=None, decisions=None, enters=None, ledger=None):
    study = study or _study()
    profiles = {code: load_profile(code) for code in ("en", "de")}
    return extract_terms(
        _answers(rows, enters),
        study,
        profiles,
        decisions if decisions is not None else Decisions(),
        ledger if ledger is not None else Ledger(),
        Reporter(),
    )


def _en(text: str, **terms: object) -> list[str]:
    return make_termer("en", load_profile("en"), _study(**terms), Decisions()).terms(text)


# --------------------------------------------------------------------------- token rules


def test_terms_are_lemmas_lower_case_in_text_order() -> None:
    """English plural/past forms -> lemma (spaCy lookup table); stop words and punctuation dropped."""
    assert _en("The Trains were LATE, and the seats dirty!") == ["train", "late", "seat", "dirty"]


def test_german_nouns_lemmatised_then_lower_cased() -> None:
    """Duden: "Preise" is the plural of "Preis" [recalled from memory]; exact-case lookup, then lower case."""
    result = _run([("de", "Die Preise sind zu hoch"), ("de", "die preise")])
    assert result.answers["terms"].tolist() == [["preis", "zu", "hoch"], ["preis"]]


def test_accents_are_never_stripped() -> None:
    termer = make_termer("de", load_profile("de"), _study(), Decisions())
    assert termer.terms("Bürger Qualität Straße") == ["bürger", "qualität", "straße"]


def test_placeholders_and_punctuation_never_become_terms() -> None:
    """Placeholders from the clean stage (pii.PLACEHOLDERS) are dropped, even glued to punctuation."""
    assert _en("write to ⟨email⟩ or call ⟨phone⟩. (⟨url⟩) ... !!! -- service") == ["write", "service"]


def test_placeholders_break_phrases() -> None:
    assert _en("contact ⟨email⟩ support", ngrams=2) == ["contact", "support"]


def test_numbers_dropped_or_kept() -> None:
    """A number is a token with a digit and no letter; "covid-19" or "mp3" are words."""
    assert _en("5 stars mp3 covid-19 10/10") == ["star", "mp3", "covid-19"]
    assert _en("5 stars 10/10", keep_numbers=True) == ["5", "star", "10/10"]


def test_emoji_kept_whole_with_skin_tone_removed() -> None:
    """Emoji sequences (Unicode TR51: modifiers, ZWJ sequences) are one term; skin tones are folded."""
    assert _en("great👍🏽 service 👨‍👩‍👧 ❤️") == ["great", "👍", "service", "👨\u200d👩\u200d👧", "❤"]
    assert _en("great 👍", keep_emoji=False) == ["great"]
    assert emoji_name("👍") == "thumbs up" and emoji_name("❤") == "red heart" and emoji_name("train") is None


def test_min_length_drops_short_words() -> None:
    assert _en("tv is x", min_length=2) == ["tv"]
    assert _en("tv seat", min_length=3) == ["seat"]


def test_identical_answers_processed_once_but_counted_each() -> None:
    result = _run([("en", "late trains")] * 3 + [("en", "late buses")])
    vocab = result.vocabularies["en"].set_index("term")
    assert vocab.loc["late", "tf"] == 4 and vocab.loc["late", "df"] == 4 and vocab.loc["train", "df"] == 3


# --------------------------------------------------------------------------- phrases


def test_ngrams_formed_before_stop_word_removal() -> None:
    """ "car of the year": "of the" are stop words between "car" and "year", so no "car year" bigram."""
    assert _en("car of the year", ngrams=2) == ["car", "year"]
    assert _en("sleeping cars very clean", ngrams=3) == [
        "sleep", "sleep car", "sleep car very", "car", "car very", "car very clean",
        "very", "very clean", "clean",
    ]  # fmt: skip


def test_connectors_inside_phrases_never_at_the_edge() -> None:
    """ "of" is an English connector (lang_profiles/en/connectors.txt)."""
    assert _en("cups of tea", ngrams=3) == ["cup", "cup of tea", "tea"]
    assert _en("of tea", ngrams=3) == ["tea"]
    assert _en("cups of", ngrams=3) == ["cup"]


def test_expressions_always_joined_even_with_stop_words() -> None:
    terms = _en("Out of stock again. The Customer Services were slow", expressions={"en": ["out of stock", "customer service"]}, ngrams=2)
    assert terms == ["out of stock", "customer service", "slow"]


# --------------------------------------------------------------------------- overrides


def test_overrides_from_study_and_decisions_are_applied_and_counted() -> None:
    study = _study(lemma_overrides={"en": {"colour": "color"}})
    decisions = Decisions.fold([Decision(1, 0.0, "lemma", "Tyres", "tire", "en", "active")])
    result = _run([("en", "nice colour, bad tyres"), ("en", "nice colour")] * 2, study, decisions)
    assert result.answers["terms"].iloc[0] == ["nice", "color", "bad", "tire"]
    assert result.overrides_applied == {"en:colour->color": 4, "en:tyres->tire": 2}


def test_override_by_lemma_catches_every_form() -> None:
    study = _study(lemma_overrides={"en": {"train": "railway"}})
    result = _run([("en", "trains and train")], study)
    assert result.answers["terms"].iloc[0] == ["railway", "railway"]
    assert result.overrides_applied == {"en:train->railway": 2}


def test_override_cycle_is_a_settings_error() -> None:
    study = _study(lemma_overrides={"en": {"bus": "coach", "coach": "bus"}})
    with pytest.raises(SettingsError, match="form a cycle"):
        _run([("en", "bus")], study)


# --------------------------------------------------------------------------- vocabularies and ledger


def test_vocabulary_counts_match_scikit_learn() -> None:
    """Reference library: scikit-learn ``CountVectorizer`` over the same term lists gives tf = column
    sums and df = column counts of non-zeros."""
    from sklearn.feature_extraction.text import CountVectorizer

    rows = [("en", t) for t in ["late trains late", "clean seats", "late staff, clean trains", "nothing"]]
    result = _run(rows)
    lists = result.answers["terms"].tolist()
    cv = CountVectorizer(analyzer=lambda x: x)
    matrix = cv.fit_transform(lists)
    expected = pd.DataFrame(
        {"tf": np.asarray(matrix.sum(axis=0)).ravel(), "df": np.asarray((matrix > 0).sum(axis=0)).ravel()},
        index=cv.get_feature_names_out(),
    ).sort_index()
    ours = result.vocabularies["en"].set_index("term")[["tf", "df"]].sort_index()
    pd.testing.assert_frame_equal(ours, expected, check_dtype=False, check_names=False)


def test_answers_out_of_weighting_get_terms_but_no_counts() -> None:
    decisions = Decisions.fold([Decision(1, 0.0, "exclude", "r2|q", "1", "", "active")])
    result = _run([("en", "late trains"), ("en", "dirty seats"), ("en", "rude staff")], decisions=decisions, enters=[True, False, True])
    assert result.answers["terms"].tolist() == [["late", "train"], ["dirty", "seat"], ["rude", "staff"]]
    assert set(result.vocabularies["en"]["term"]) == {"late", "train"}


def test_und_answers_have_no_lemmas_and_no_vocabulary_by_default() -> None:
    rows = [("und", "Trains were late"), ("en", "trains")]
    result = _run(rows)
    assert result.answers["terms"].iloc[0] == ["trains", "late"]  # no lemma; English stop words gone
    assert "und" not in result.vocabularies
    included = _run(rows, _study(include_und=True))
    assert set(included.vocabularies["und"]["term"]) == {"trains", "late"}


def test_empty_term_lists_get_a_ledger_event() -> None:
    ledger = Ledger()
    result = _run([("en", "the and of"), ("en", "fine"), ("en", "")], ledger=ledger)
    assert result.answers["terms"].tolist() == [[], ["fine"], []]
    events = ledger.frame()
    assert events["key"].tolist() == ["r0|q", "r2|q"]
    assert set(events["stage"]) == {"terms"} and set(events["status"]) == {"flagged"} and set(events["code"]) == {"no_terms"}
    assert events["row"].tolist() == [1, 3] and set(events["source"]) == {"survey.csv"}


def test_result_reports_stop_words_backends_and_stop_hits() -> None:
    result = _run([("en", "the trains are late"), ("de", "der Zug")])
    assert "the" in result.stop_words["en"] and "der" in result.stop_words["de"]
    assert result.backends["en"].startswith("spacy-lookups-data") and "simplemma" in result.backends["en"]
    assert result.stop_hits["en"].set_index("term").loc["the", "tf"] == 1


def test_empty_stop_list_is_noted() -> None:
    words = sorted(load_profile("en").stop_remove)
    study = _study(stop_words_remove={"en": sorted(__import__("workbench.core.stopwords", fromlist=["x"]).spacy_stop_words("en"))})
    result = _run([("en", "the late trains")], study)
    assert "the stop list of 'en' is empty: every word counts as a term" in result.notes
    assert result.answers["terms"].iloc[0] == ["the", "late", "train"] and words


# --------------------------------------------------------------------------- bad input


def test_language_without_profile_names_the_available_ones() -> None:
    with pytest.raises(SettingsError, match=r"no language profile for 'xq'.*supported languages: .*de, el, en"):
        _run([("xq", "bonjour")])


def test_missing_columns_say_which_stage_to_run() -> None:
    answers = _answers([("en", "x")]).drop(columns=["language"])
    with pytest.raises(InputError, match="no column 'language'; run the clean and identify stages before terms"):
        extract_terms(answers, _study(), {}, Decisions(), Ledger(), Reporter())


def test_pipeline_named_but_not_installed() -> None:
    with pytest.raises(SettingsError, match="not installed"):
        _run([("en", "trains")], _study(pipelines={"en": "en_core_web_sm"}))


def test_trained_pipeline_folder_gives_lemmas(tmp_path) -> None:
    """A pipeline the user saved (here spaCy's own lookup lemmatiser, ``Language.to_disk``) replaces the tables."""
    import spacy

    nlp = spacy.blank("en")
    nlp.add_pipe("lemmatizer", config={"mode": "lookup"})
    nlp.initialize()
    nlp.to_disk(tmp_path / "mine")
    result = _run([("en", "The trains were late ⟨url⟩ 👍")], _study(pipelines={"en": str(tmp_path / "mine")}))
    assert result.answers["terms"].iloc[0] == ["train", "late", "👍"]
    assert result.backends["en"].startswith("trained pipeline")


def test_cancel_stops_the_stage() -> None:
    event = threading.Event()
    event.set()
    with pytest.raises(Cancelled):
        extract_terms(_answers([("en", "x")]), _study(), {}, Decisions(), Ledger(), Reporter(cancel=event))


def test_progress_is_reported() -> None:
    calls = []
    reporter = Reporter(callback=lambda stage, done, total, msg: calls.append((stage, done, total)))
    extract_terms(_answers([("en", "late trains"), ("de", "Zug")]), _study(), {}, Decisions(), Ledger(), reporter)
    assert calls[-1] == ("terms", 2, 2) and all(c[0] == "terms" for c in calls)
