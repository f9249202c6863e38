"""The clean stage: normalisation, masking into clean_text, flags, decisions, ledger, bad input."""

from __future__ import annotations

import unicodedata

import pandas as pd
import pytest

from workbench.core.clean import clean_answers, normalise_text
from workbench.core.decisions import Decisions
from workbench.core.errors import SettingsError
from workbench.core.ledger import Ledger
from workbench.core.pii import PLACEHOLDERS
from workbench.core.profiles import load_profiles
from workbench.core.progress import Reporter
from workbench.core.settings import study_from_dict


def _study(**clean: object):
    return study_from_dict(
        {"sources": [{"path": "answers.csv"}], "languages": {"expected": ["en", "de", "fr"]}, "clean": clean}
    )


def _frame(texts: list[object], respondents: list[str] | None = None, questions: list[str] | None = None) -> pd.DataFrame:
    n = len(texts)
    respondents = respondents or [f"r{i}" for i in range(n)]
    questions = questions or ["q1"] * n
    return pd.DataFrame(
        {
            "answer_id": [f"{r}|{q}" for r, q in zip(respondents, questions, strict=True)],
            "respondent_id": respondents,
            "question": questions,
            "source": ["answers.csv"] * n,
            "row": list(range(1, n + 1)),
            "raw_text": pd.Series(texts, dtype=object),
        }
    )


def _clean(texts: list[object], decisions: Decisions | None = None, study=None, **kw: object):
    ledger = Ledger()
    study = study or _study()
    out = clean_answers(_frame(texts, **kw), study, load_profiles(["en", "de", "fr"]), decisions or Decisions(), ledger, Reporter())
    return out, ledger


@pytest.mark.parametrize(
    ("raw", "expected"),
    [
        ("Cafe\u0301 ok", "Café ok"),  # NFD input -> NFC (Unicode Standard Annex #15)
        ("fish &amp; chips &lt;3", "fish & chips <3"),  # HTML entities (html.unescape)
        ("zero\u200bwidth\u2060joiner\ufeff", "zerowidthjoiner"),  # zero-width space, word joiner, BOM
        ("bell\x07 and\x00 nul", "bell and nul"),  # control characters
        ("  many\t\tspaces\n\nand\u00a0lines  ", "many spaces and lines"),
        ("soft\u00adhyphen", "softhyphen"),
        ("\u202eevil\u202c rtl override", "evil rtl override"),  # bidi embedding controls removed
        ("Ã©tÃ© trÃ¨s bien", "été très bien"),  # mojibake (UTF-8 read as cp1252) repaired by ftfy
        ("family 👨\u200d👩\u200d👧 kept", "family 👨\u200d👩\u200d👧 kept"),  # ZWJ inside emoji kept
    ],
)
def test_normalise_text(raw: str, expected: str) -> None:
    """Each normalisation step on a textbook case (NFC per Unicode UAX #15; ftfy's documented mojibake fix)."""
    assert normalise_text(raw)[0] == expected


def test_invalid_surrogates_never_crash_and_valid_pairs_are_joined() -> None:
    text, notes = normalise_text("bad\ud800 and good \ud83d\ude00")
    assert text == "bad and good 😀" and notes == ["surrogates"]
    assert unicodedata.is_normalized("NFC", text)


def test_mojibake_repair_can_be_switched_off() -> None:
    assert normalise_text("Ã©tÃ©", repair_mojibake=False)[0] == "Ã©tÃ©"


def test_raw_text_untouched_and_masks_point_into_clean_text() -> None:
    raws = ["Mail me: jo@example.org or +44 20 7946 0958", "  Cafe\u0301  "]
    out, _ = _clean(raws)
    assert out["raw_text"].tolist() == raws
    first = out.iloc[0]
    assert first["clean_text"] == "Mail me: ⟨email⟩ or ⟨phone⟩"
    for kind, start, end in first["masks"]:
        assert first["clean_text"][start:end] == PLACEHOLDERS[kind]
    assert out.iloc[1]["clean_text"] == "Café"


@pytest.mark.parametrize(
    ("text", "code"),
    [
        ("", "empty"),
        ("   \t ", "empty"),
        ("\u200b\u200b", "empty"),
        ("jo@example.org", "pii_only"),
        ("...", "punctuation_only"),
        ("- 5 -", "punctuation_only"),
        ("👍👍", "emoji_only"),
        ("N/A", "non_answer"),
        ("Weiß nicht!", "non_answer"),  # de profile
        ("Je ne sais pas", "non_answer"),  # fr profile
        ("don't know", "non_answer"),  # en profile
        ("asdfghjkl", "keyboard_mash"),
        ("x", "too_short"),
    ],
)
def test_content_flags(text: str, code: str) -> None:
    out, ledger = _clean([text])
    assert out.iloc[0]["flags"] == [code]
    assert (code in ("emoji_only",)) == bool(out.iloc[0]["enters_weighting"])
    events = ledger.frame()
    assert code in events["code"].tolist()


def test_non_answers_of_unexpected_languages_are_not_used() -> None:
    """Only the expected languages' lists (en, de, fr here) are matched: Spanish "nada" is left alone."""
    out, _ = _clean(["nada", "nichts"])
    assert out["flags"].tolist() == [[], ["non_answer"]]


def test_study_phrases_and_min_chars() -> None:
    out, _ = _clean(["see attachment", "ok"], study=_study(non_answers=["See attachment"], min_chars=3))
    assert out["flags"].tolist() == [["non_answer"], ["too_short"]]


def test_flagged_enter_weighting_option() -> None:
    out, ledger = _clean(["n/a"], study=_study(flagged_enter_weighting=True))
    assert out.iloc[0]["flags"] == ["non_answer"] and bool(out.iloc[0]["enters_weighting"])
    assert "flagged_enters_weighting" in ledger.frame()["code"].tolist()


def test_decisions_override_non_answer_and_exclude() -> None:
    decisions = Decisions(non_answer={"r0|q1": False, "r1|q1": True}, exclude={"r2|q1": True})
    out, ledger = _clean(["nothing", "the room was cold", "great breakfast"], decisions=decisions)
    assert out["flags"].tolist() == [[], ["non_answer"], []]
    assert out["enters_weighting"].tolist() == [True, False, False]
    codes = ledger.frame().set_index("key")["code"]
    assert codes["r2|q1"] == "excluded_by_decision"
    assert "answer_by_decision" in ledger.frame()["code"].tolist()


def test_every_answer_is_in_the_ledger_including_bad_input() -> None:
    """Empty, whitespace-only, emoji-only, 100k-character, surrogate and right-to-left answers
    all come out with cleaned text and at least one ledger event."""
    long_text = "word " * 20_000
    texts = ["", "   ", "😀😀", long_text, "bad \ud800 text", "مرحبا بكم في الفندق", "שלום, החדר היה נקי", None, 42]
    out, ledger = _clean(texts)
    assert len(out) == len(texts)
    assert ledger.accounted("answer") == set(out["answer_id"])
    assert out.iloc[3]["clean_text"] == long_text.strip()
    assert out.iloc[4]["clean_text"] == "bad text"
    assert out.iloc[5]["clean_text"] == "مرحبا بكم في الفندق" and out.iloc[5]["flags"] == []
    assert out.iloc[7]["flags"] == ["empty"] and out.iloc[8]["flags"] == ["punctuation_only"]


def test_unknown_phone_region_is_a_settings_error() -> None:
    with pytest.raises(SettingsError, match=r"clean.phone_regions.*XX.*ISO 3166"):
        _clean(["hello"], study=_study(phone_regions=["DE", "XX"]))


def test_empty_table_gets_the_columns() -> None:
    out, _ = _clean([])
    assert {"clean_text", "masks", "flags", "duplicate_of", "enters_weighting"} <= set(out.columns)
    assert len(out) == 0


def test_mask_kinds_follow_the_study() -> None:
    out, _ = _clean(["jo@example.org 4111 1111 1111 1111"], study=_study(mask=["card"]))
    assert out.iloc[0]["clean_text"] == "jo@example.org ⟨card⟩"


def test_windowed_mojibake_check_agrees_with_ftfy_is_bad() -> None:
    """Reference library: ftfy ``badness.is_bad``. Clean searches ftfy's pattern only near
    non-ASCII characters (``clean._is_bad``); the verdict must be ftfy's own on mojibake made
    by decoding UTF-8 bytes as cp1252, Latin-1, cp1251, cp1253, cp1257 and MacRoman (ftfy's
    own categories of mojibake), on every letter of Latin-1 to Cyrillic in ASCII context, and on
    seeded random strings drawn from ftfy's ``MOJIBAKE_CATEGORIES`` (data shipped with ftfy)."""
    import random

    from ftfy.badness import MOJIBAKE_CATEGORIES, is_bad

    from workbench.core import clean

    assert clean._BADNESS_WIDTH > 0, "ftfy's pattern no longer passes the window check"
    letters = [chr(cp) for cp in range(0xA0, 0x500) if unicodedata.category(chr(cp)).startswith("L")]
    texts = [f"ab {ch}{ch.upper()} cd" for ch in letters] + [f"{ch} x" for ch in letters]
    for encoding in ("cp1252", "latin-1", "cp1251", "cp1253", "cp1257", "mac_roman"):
        for text in list(texts[: len(letters)]):
            texts.append(text.encode("utf-8").decode(encoding, errors="replace"))
    pool = [c for c in "".join(MOJIBAKE_CATEGORIES.values()) + "abc XYZ.,!?'()0123 \t" if c != "-"]
    rng = random.Random(20240601)
    texts += ["".join(rng.choice(pool) for _ in range(rng.randint(0, 14))) for _ in range(20_000)]
    verdicts = [is_bad(t) for t in texts]
    assert 0 < sum(verdicts) < len(texts)
    assert [clean._is_bad(t) for t in texts] == verdicts
