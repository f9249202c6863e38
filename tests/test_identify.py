"""The identify stage: restriction, fallbacks, decisions, mixed languages, errors, determinism."""

from __future__ import annotations

import os
import subprocess
import sys
import textwrap

import pandas as pd
import pytest

from workbench.core.clean import clean_answers
from workbench.core.decisions import Decisions
from workbench.core.detectors import EnsembleDetector, LangdetectDetector, Py3LangidDetector
from workbench.core.errors import SettingsError
from workbench.core.identify import detection_text, identify_answers
from workbench.core.ledger import Ledger
from workbench.core.profiles import load_profiles
from workbench.core.progress import Reporter
from workbench.core.settings import study_from_dict

# Utterances quoted from chatterbot-corpus 1.3.3 (data/german/*.yml, data/english/conversations.yml,
# data/french/*.yml, data/russian/*.yml): outside text used as test input.
GERMAN = "Schwer zu sagen, ich habe nichts anderes als Strom probiert"
GERMAN_2 = "Das kommt darauf an, wie du Leben definierst"
ENGLISH = "In the face of ambiguity, refuse the temptation to guess"
FRENCH = "Je suis interesse par une grande variete de sujets, et lit plutot beaucoup"
RUSSIAN = "Да, у меня есть вопрос"


def _study(expected=("en", "de", "fr"), fallback="und", default=None, **identify):
    languages = {"expected": list(expected), "fallback": fallback}
    if default:
        languages["default"] = default
    return study_from_dict({"sources": [{"path": "a.csv"}], "languages": languages, "identify": identify})


def _run(texts, study=None, hints=None, decisions=None):
    study = study or _study()
    n = len(texts)
    frame = pd.DataFrame(
        {
            "answer_id": [f"r{i}|q" for i in range(n)],
            "respondent_id": [f"r{i}" for i in range(n)],
            "question": ["q"] * n,
            "source": ["a.csv"] * n,
            "row": list(range(1, n + 1)),
            "raw_text": texts,
        }
    )
    if hints is not None:
        frame["hint"] = hints
    ledger, decisions = Ledger(), decisions or Decisions()
    profiles = load_profiles(list(study.languages.expected))
    cleaned = clean_answers(frame, study, profiles, decisions, ledger, Reporter())
    return identify_answers(cleaned, study, decisions, ledger, Reporter()), ledger


def test_confident_labels_come_from_the_detector() -> None:
    out, _ = _run([GERMAN, ENGLISH, FRENCH])
    assert out["language"].tolist() == ["de", "en", "fr"]
    assert out["language_source"].tolist() == ["detector"] * 3
    assert all(0.6 <= c <= 1.0 for c in out["confidence"])
    assert not out["mixed"].any()


def test_labels_stay_within_expected_languages() -> None:
    """Spanish text in an en/de study cannot be labelled es; at most a weak guess, else und."""
    spanish = "Entonces, ¿cuál es tu color favorito?"  # chatterbot-corpus data/spanish
    out, _ = _run([spanish, GERMAN], study=_study(("en", "de")))
    assert set(out["language"]) <= {"en", "de", "und"}
    assert out["language"].iloc[1] == "de"


@pytest.mark.parametrize(
    ("hint", "expected"), [("de", "de"), ("DE", "de"), ("de-AT", "de"), ("German", "de"), ("xx", "und"), (None, "und")]
)
def test_short_answers_fall_back_to_the_hint(hint, expected) -> None:
    out, ledger = _run(["Gut"], study=_study(fallback="hint"), hints=[hint])  # "Gut": chatterbot-corpus data/german
    assert out["language"].iloc[0] == expected
    assert out["language_source"].iloc[0] == ("hint" if expected != "und" else "detector")
    assert ledger.frame()["code"].iloc[-1] == ("language_from_hint" if expected != "und" else "language_und")


def test_confident_detector_beats_the_hint() -> None:
    """A German answer in the English questionnaire is labelled German (mis-languaged answers are caught)."""
    out, _ = _run([GERMAN], study=_study(fallback="hint"), hints=["en"])
    assert out["language"].iloc[0] == "de" and out["language_source"].iloc[0] == "detector"


def test_default_and_und_fallbacks() -> None:
    out, _ = _run(["ok then", "n/a"], study=_study(fallback="default", default="fr"))
    assert out["language"].tolist() == ["fr", "fr"]
    assert out["language_source"].tolist() == ["default", "default"]
    out, _ = _run(["ok then", "n/a"])
    assert out["language"].tolist() == ["und", "und"]


def test_decisions_override_and_bad_decisions_are_ignored_with_a_ledger_entry() -> None:
    decisions = Decisions(language={"r0|q": "fr", "r1|q": "es"})
    out, ledger = _run([GERMAN, ENGLISH], decisions=decisions)
    assert out["language"].tolist() == ["fr", "en"]
    assert out["language_source"].tolist() == ["decision", "detector"]
    assert out["confidence"].iloc[0] == 1.0
    assert "decision_ignored" in ledger.frame()["code"].tolist()


def test_placeholders_emoji_and_digits_do_not_influence_detection() -> None:
    assert detection_text("⟨email⟩ ⟨url⟩ 12345 😀 Das Essen war gut") == "Das Essen war gut"
    out, _ = _run(["mail bob@example.org or see https://example.org/x 😀 " + GERMAN])
    assert out["language"].iloc[0] == "de"


def test_letters_of_scripts_no_expected_language_uses_are_ignored() -> None:
    """Arabic and Hebrew (right-to-left) text in a Latin-script study is und, never 'English'."""
    out, _ = _run(["مرحبا بكم في الفندق الجميل جدا", "שלום, החדר היה נקי מאוד ונעים"])
    assert out["language"].tolist() == ["und", "und"]
    out, _ = _run([RUSSIAN], study=_study(("en", "ru")))
    assert out["language"].iloc[0] == "ru"


def test_mixed_language_answer_is_flagged_with_majority_label() -> None:
    text = f"{GERMAN}. {GERMAN_2}. {ENGLISH}."
    out, ledger = _run([text])
    row = out.iloc[0]
    assert bool(row["mixed"]) and row["language"] == "de" and row["second_language"] == "en"
    assert "mixed_language" in row["flags"]
    assert "mixed_language" in ledger.frame()["code"].tolist()


def test_monolingual_long_answer_is_not_mixed() -> None:
    out, _ = _run([f"{ENGLISH}. You're entirely bonkers. But I'll tell you a secret. All the best people are."])
    assert not out["mixed"].iloc[0] and out["second_language"].iloc[0] is None


def test_unsupported_language_code_lists_supported_codes() -> None:
    study = _study(("en", "xx"))
    with pytest.raises(SettingsError, match=r"'xx' not supported.*supported codes: ca, cs, da, de, el, en"):
        identify_answers(pd.DataFrame(), study, Decisions(), Ledger(), Reporter())


def test_default_outside_expected_is_a_settings_error() -> None:
    study = _study(("en", "de"), fallback="default", default="fr")
    with pytest.raises(SettingsError, match="languages.default = 'fr' is not in languages.expected"):
        identify_answers(pd.DataFrame(), study, Decisions(), Ledger(), Reporter())


def test_every_answer_gets_a_language_even_bad_input() -> None:
    texts = ["", "   ", "😀😀😀", "x" * 100_000, "bad \ud800 text", (ENGLISH + ". ") * 1_800]
    out, ledger = _run(pd.Series(texts, dtype=object))
    assert len(out) == len(texts) and len(texts[5]) > 100_000
    assert out["language"].tolist() == ["und", "und", "und", "und", "und", "en"]
    assert ledger.accounted("answer") == set(out["answer_id"])


def test_py3langid_batch_scores_equal_the_library_rank() -> None:
    """Reference: py3langid's own ``LanguageIdentifier.rank`` with ``norm_probs=True`` after
    ``set_languages``; our batched scoring must give the same label and probability."""
    from py3langid.langid import MODEL_FILE, LanguageIdentifier

    expected = ["de", "en", "fr", "nb"]
    reference = LanguageIdentifier.from_model_file(MODEL_FILE, norm_probs=True)
    reference.set_languages(["de", "en", "fr", "no"])
    texts = [GERMAN, ENGLISH, FRENCH, RUSSIAN, "Hallo", "Takk for maten", "ok?"]
    ours = Py3LangidDetector().detect(texts, expected)
    for text, (code, prob) in zip(texts, ours, strict=True):
        if code == "und":  # no n-gram of the model in the text: the library ranks a uniform tie
            assert len({score for _, score in reference.rank(text)}) == 1
            continue
        label, score = reference.rank(text)[0]
        assert code == {"no": "nb"}.get(label, label)
        assert prob == pytest.approx(score, abs=1e-4)


def test_langdetect_is_seeded_and_ensemble_needs_agreement() -> None:
    texts = [GERMAN, ENGLISH, FRENCH, "ok"]
    first = LangdetectDetector().detect(texts, ["en", "de", "fr"])
    assert first == LangdetectDetector().detect(texts, ["en", "de", "fr"])
    assert [c for c, _ in first[:3]] == ["de", "en", "fr"]
    ensemble = EnsembleDetector().detect(texts, ["en", "de", "fr"])
    assert [c for c, _ in ensemble[:3]] == ["de", "en", "fr"]
    single = Py3LangidDetector().detect(texts, ["en", "de", "fr"])
    for (code, prob), (a, pa), (b, pb) in zip(ensemble, single, first, strict=True):
        assert code == (a if a == b else "und")
        assert prob == (min(pa, pb) if a == b else 0.0)


def test_same_labels_in_a_fresh_process_with_another_hash_seed() -> None:
    """Deterministic across runs: a new interpreter with a different PYTHONHASHSEED agrees."""
    texts = [GERMAN, ENGLISH, FRENCH, GERMAN_2, "bien sûr", "Hallo"]
    out, _ = _run(texts)
    script = textwrap.dedent(
        f"""
        import pandas as pd
        from workbench.core.detectors import Py3LangidDetector
        print([(c, round(p, 6)) for c, p in Py3LangidDetector().detect({texts!r}, ["en", "de", "fr"])])
        """
    )
    env = {**os.environ, "PYTHONHASHSEED": "12345"}
    result = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, env=env, check=True)
    here = [(c, round(p, 6)) for c, p in Py3LangidDetector().detect(texts, ["en", "de", "fr"])]
    assert result.stdout.strip() == str(here)
    again, _ = _run(texts)
    assert again["language"].tolist() == out["language"].tolist()
    assert again["confidence"].tolist() == out["confidence"].tolist()
