"""The UI's non-visual parts: answer filters, writing column roles, bars, the key list, the session.

These check behaviour against the project's own contracts (corpus columns in
``workbench/core/corpus.py``, the TOML 1.0 specification for the study file);
invented data only.
"""

from __future__ import annotations

import tomllib
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from workbench.core.errors import SettingsError
from workbench.core.settings import load_study
from workbench.ui.answer_filter import EXCLUDED, FALLBACK, SUSPECT, UNFLAGGED, AnswerIndex, AnswerQuery
from workbench.ui.bars import bar
from workbench.ui.session import STAGE_FOR_KIND, Session, earliest
from workbench.ui.study_file import columns_table, write_columns


def _answers() -> pd.DataFrame:
    return pd.DataFrame(
        {
            "answer_id": ["r1|q1", "r2|q1", "r3|q1", "r4|q1", "r5|q2"],
            "respondent_id": ["r1", "r2", "r3", "r4", "r5"],
            "question": ["q1", "q1", "q1", "q1", "q2"],
            "raw_text": ["Good Price", "schlechter Service", "n/a", "ok", "Delivery was late"],
            "clean_text": ["Good Price", "schlechter Service", "n/a", "ok", "Delivery was late"],
            "flags": [[], [], ["non_answer"], ["too_short"], []],
            "enters_weighting": [True, True, False, False, True],
            "language": ["en", "de", "und", "en", "en"],
            "confidence": [0.99, 0.95, 0.0, 0.5, 0.97],
            "language_source": ["detector", "detector", "default", "hint", "detector"],
            "mixed": [False, False, False, False, True],
            "hint": ["en", "en", "en", "en", "en"],
            "group:country": ["Norland", "Sudmark", "Norland", "Sudmark", "Norland"],
        }
    )


def test_filters_combine_language_group_question_and_text() -> None:
    """Each filter narrows the rows; text search is case-insensitive and literal (no regex)."""
    index = AnswerIndex(_answers(), min_confidence=0.8)
    ids = lambda q: list(index.ids[index.select(q)])  # noqa: E731
    assert ids(AnswerQuery()) == ["r1|q1", "r2|q1", "r3|q1", "r4|q1", "r5|q2"]
    assert ids(AnswerQuery(language="en")) == ["r1|q1", "r4|q1", "r5|q2"]
    assert ids(AnswerQuery(language="en", group="country=Norland")) == ["r1|q1", "r5|q2"]
    assert ids(AnswerQuery(question="q2")) == ["r5|q2"]
    assert ids(AnswerQuery(text="PRICE")) == ["r1|q1"]
    assert ids(AnswerQuery(text="n/a")) == ["r3|q1"]
    assert ids(AnswerQuery(text=".*")) == []
    assert ids(AnswerQuery(flag="non_answer")) == ["r3|q1"]
    assert ids(AnswerQuery(flag=UNFLAGGED)) == ["r1|q1", "r2|q1", "r5|q2"]


def test_suspect_languages_and_order_by_confidence() -> None:
    """Suspect = detected near the bar or against the hint, mixed, or und; never junk, never decided."""
    answers = _answers()
    extra = answers.iloc[[0, 0]].copy()
    extra["answer_id"] = ["r6|q1", "r7|q1"]
    extra["clean_text"] = ["Dinner", "the wifi keeps dropping out"]
    extra["language"] = ["de", "en"]
    extra["language_source"] = ["hint", "detector"]
    extra["confidence"] = [0.0, 0.85]
    answers = pd.concat([answers, extra], ignore_index=True)
    index = AnswerIndex(answers, min_confidence=0.8)
    suspects = AnswerQuery(flag=SUSPECT, order="confidence")
    # r2 disagrees with its hint (de vs en); r5 is mixed; r7 (0.85) is below 0.9, halfway from the 0.8 bar to 1.
    # r3 (und, a non-answer) and r4 (too short) are junk: their language never counts.
    assert list(index.ids[index.select(suspects)]) == ["r7|q1", "r2|q1", "r5|q2"]
    assert list(index.ids[index.select(AnswerQuery(flag=FALLBACK))]) == ["r6|q1"]
    answers.loc[1, "language_source"] = "decision"
    index = AnswerIndex(answers, min_confidence=0.8)
    assert "r2|q1" not in set(index.ids[index.select(suspects)])


def test_excluded_filter_and_choices() -> None:
    index = AnswerIndex(_answers(), excluded={"r2|q1"})
    assert list(index.ids[index.select(AnswerQuery(flag=EXCLUDED))]) == ["r2|q1"]
    assert index.languages() == ["de", "en", "und"]
    assert index.flag_codes() == ["non_answer", "too_short"]
    assert index.groups() == ["country=Norland", "country=Sudmark"]
    assert index.position("r4|q1") == 3


def test_filter_over_100k_rows_is_vectorised() -> None:
    """A text filter over 100,000 rows returns exactly the rows holding the needle (correctness, not time)."""
    n = 100_000
    words = np.array(["price", "service", "delivery", "quality"])
    frame = pd.DataFrame(
        {
            "answer_id": [f"r{i}|q1" for i in range(n)],
            "question": "q1",
            "raw_text": words[np.arange(n) % 4],
            "clean_text": words[np.arange(n) % 4],
        }
    )
    index = AnswerIndex(frame)
    assert len(index.select(AnswerQuery(text="deliv"))) == n // 4


STUDY = """\
# my survey, wave 3 — keep this comment
[study]
name = "wave3"  # short name

[[sources]]
path = "answers.csv"

[columns]
id = "rid"
text = ["q1"]

# languages we fielded
[languages]
expected = ["en", "de"]

[weigh]
tf = "log"
"""


def test_write_columns_keeps_comments_and_other_settings(tmp_path: Path) -> None:
    """Only [columns] changes; comments elsewhere and every other value survive (TOML 1.0 parse compared)."""
    path = tmp_path / "wave3.study.toml"
    path.write_text(STUDY, encoding="utf-8")
    before = tomllib.loads(STUDY)
    write_columns(path, columns_table("rid", ["q1", "q2"], ["country"], None, "lang"))
    text = path.read_text(encoding="utf-8")
    after = tomllib.loads(text)
    assert after["columns"] == {"id": "rid", "text": ["q1", "q2"], "groups": ["country"], "language_hint": "lang"}
    assert {k: v for k, v in after.items() if k != "columns"} == {k: v for k, v in before.items() if k != "columns"}
    assert "# my survey, wave 3 — keep this comment" in text
    assert "# languages we fielded" in text
    assert 'name = "wave3"  # short name' in text
    assert load_study(path).columns.groups == ["country"]


def test_write_columns_rejects_invalid_roles_and_leaves_file(tmp_path: Path) -> None:
    path = tmp_path / "wave3.study.toml"
    path.write_text(STUDY, encoding="utf-8")
    with pytest.raises(SettingsError):
        write_columns(path, {"text": ["q1"], "colour": "blue"})
    assert path.read_text(encoding="utf-8") == STUDY


def test_write_columns_with_inline_table_rewrites_whole_file(tmp_path: Path) -> None:
    path = tmp_path / "inline.study.toml"
    path.write_text('columns = { text = ["q1"] }\n[[sources]]\npath = "a.csv"\n', encoding="utf-8")
    write_columns(path, columns_table(None, ["q1"], ["wave"], None, None))
    data = tomllib.loads(path.read_text(encoding="utf-8"))
    assert data["columns"] == {"text": ["q1"], "groups": ["wave"]}
    assert data["sources"] == [{"path": "a.csv"}]


def test_bar_lengths() -> None:
    """Eight steps per cell: half of 12 cells is 6 full blocks; zero, negatives and NaN draw nothing."""
    assert bar(5, 10, 12) == "█" * 6 + " " * 6
    assert bar(10, 10, 4) == "████"
    assert bar(1, 8, 1) == "▏"
    assert bar(0, 10, 3) == "   "
    assert bar(float("nan"), 10, 3) == "   "
    assert bar(3, 0, 3) == "   "


def test_stage_of_each_decision_kind() -> None:
    """Language decisions re-run identify; flags and exclusions re-run clean; stop words and lemmas re-run terms."""
    assert STAGE_FOR_KIND == {
        "language": "identify",
        "non_answer": "clean",
        "exclude": "clean",
        "stop_add": "terms",
        "stop_remove": "terms",
        "lemma": "terms",
    }
    assert earliest("terms", "identify") == "identify"
    assert earliest(None, "terms") == "terms"
    assert earliest("clean", None) == "clean"


def test_session_records_and_marks_the_earliest_stage(tmp_path: Path) -> None:
    path = tmp_path / "wave3.study.toml"
    path.write_text(STUDY, encoding="utf-8")
    session = Session.open(path)
    try:
        session.stale_from = None
        session.record("stop_add", "basically", "1", "en")
        assert session.stale_from == "terms"
        session.record("language", "r1|q1", "de")
        assert session.stale_from == "identify"
        assert session.take_stale() == "ingest"  # nothing has run yet, so everything runs
        assert session.stale_from is None
        undone = session.undo()
        assert undone is not None and undone.kind == "language"
        assert session.stale_from == "identify"
        assert session.active().stop_add == {"en": {"basically"}}
        assert session.active().language == {}
        assert session.redo() is not None
        assert session.active().language == {"r1|q1": "de"}
    finally:
        session.close()
    assert (tmp_path / "wave3.decisions.sqlite").exists()


def test_open_a_data_file_writes_a_starter_study_once(tmp_path: Path) -> None:
    """``termloom open DATAFILE`` writes a starter study beside the data, then reuses it; both open on Sources."""
    from workbench.ui import prepare

    data = tmp_path / "wave4.csv"
    data.write_text("rid,country,comment\nr1,Norland,the trains are late again\nr2,Sudmark,friendly staff\n", encoding="utf-8")
    first = prepare(None, data)
    assert first.study_path == tmp_path / "wave4.study.toml"
    assert first.first_view == "sources"
    assert first.notes and "wave4.study.toml" in first.notes[0]
    written = first.study_path.read_text(encoding="utf-8")
    again = prepare(None, data)
    assert again.study_path == first.study_path
    assert again.first_view == "sources"
    assert first.study_path.read_text(encoding="utf-8") == written


def test_open_a_missing_study_is_one_line_error(tmp_path: Path) -> None:
    from workbench.ui import prepare

    with pytest.raises(SettingsError, match="does not exist"):
        prepare(tmp_path / "nowhere.study.toml", None)


def test_answers_of_groups_keeps_only_the_named_groups_respondents() -> None:
    """KWIC while comparing two groups reads only their answers; a third group's answers stay out."""
    from types import SimpleNamespace

    from workbench.ui.keyword_tables import answers_of_groups

    answers = _answers()
    answers.loc[4, "group:country"] = "Westmark"
    outputs = SimpleNamespace(answers=answers)
    chosen = answers_of_groups(outputs, "country", ["Sudmark", "Westmark"])  # type: ignore[arg-type]
    assert chosen["respondent_id"].tolist() == ["r2", "r4", "r5"]
    assert answers_of_groups(outputs, "country", ["Eastmark"]).empty  # type: ignore[arg-type]
    assert answers_of_groups(outputs, "region", ["Norland"]).empty  # type: ignore[arg-type]
