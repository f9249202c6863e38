"""``termloom init``: guessing column roles from the first rows and writing a starter study.

The rules are rules of thumb (common practice); these tests check each rule on data built to
trigger or dodge it, and that the written study loads and ingests."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from openpyxl import Workbook

from workbench.core.errors import InputError, OutputError
from workbench.core.ingest import read_corpus
from workbench.core.ledger import Ledger
from workbench.core.progress import Reporter
from workbench.core.settings import load_study
from workbench.core.starter import PEEK_ROWS, guess_study, write_starter_study

WORDS = "the night train was late but staff were friendly and the bed was comfortable coffee cold quiet".split()


def survey(n: int = 400, seed: int = 3) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    return pd.DataFrame({
        "started": [f"2024-05-{1 + i % 28:02d} 10:{i % 60:02d}" for i in range(n)],
        "respondent_id": [f"R{i:05d}" for i in range(n)],
        "country": rng.choice(["DE", "FR", "IT", "ES", "PL", "NL"], n),
        "age_band": rng.choice(["18-29", "30-44", "45-64", "65+"], n),
        "interview_lang": [["de", "de", "de", "fr", "fr", "it"][i % 6] for i in range(n)],
        "design_weight": np.round(rng.uniform(0.4, 1.7, n), 4),
        "q_liked": [" ".join(rng.choice(WORDS, rng.integers(3, 15))) for _ in range(n)],
        "q_improve": [" ".join(rng.choice(WORDS, rng.integers(0, 12))) for _ in range(n)],
        "email": [f"p{i}@example.org" for i in range(n)],
        "age": rng.integers(18, 90, n),
    })


def test_guesses_every_role_on_a_typical_export(tmp_path):
    survey().to_csv(tmp_path / "survey.csv", sep=";", index=False)
    study, lines = guess_study(tmp_path / "survey.csv")
    columns = study["columns"]
    assert columns["id"] == "respondent_id"  # named like an id; 'email' is unique too but comes second
    assert columns["text"] == ["q_liked", "q_improve"]  # 'started' has spaces but is dates
    assert columns["weight"] == "design_weight"
    assert columns["language_hint"] == "interview_lang"
    assert columns["groups"] == ["country", "age_band"]  # 'age' has more than 30 values
    assert study["languages"] == {"expected": ["de", "fr", "it"], "fallback": "hint"}
    assert "id column: respondent_id (400 unique values)" in lines
    assert lines[0] == "read the first 400 rows of survey.csv (csv, encoding utf-8, delimiter ';')"
    assert any(line.startswith("text columns: q_liked (mean") for line in lines)
    assert "group columns: country (6 values), age_band (4 values)" in lines
    assert "expected languages: de, fr, it" in lines


def test_only_the_first_rows_are_read(tmp_path):
    survey(PEEK_ROWS + 500).to_csv(tmp_path / "big.csv", index=False)
    _study, lines = guess_study(tmp_path / "big.csv")
    assert lines[0].startswith(f"read the first {PEEK_ROWS:,} rows of big.csv")


def test_without_unique_column_rows_are_numbered(tmp_path):
    frame = survey(50).drop(columns=["respondent_id", "email", "started"])
    frame["design_weight"] = 1.0
    frame.to_csv(tmp_path / "s.csv", index=False)
    study, lines = guess_study(tmp_path / "s.csv")
    assert "id" not in study["columns"]
    assert any(line.startswith("id column: none found") for line in lines)


def test_weight_by_mean_near_one_and_country_codes_are_not_a_language_hint(tmp_path):
    rng = np.random.default_rng(1)
    frame = pd.DataFrame({
        "id": range(1, 201),
        "answer": [" ".join(rng.choice(WORDS, 8)) for _ in range(200)],
        "w": np.round(rng.normal(1.0, 0.1, 200).clip(0.5), 3),
        "land": rng.choice(["de", "fr", "it"], 200),
    })
    frame.to_csv(tmp_path / "s.csv", index=False)
    study, lines = guess_study(tmp_path / "s.csv")
    assert study["columns"]["weight"] == "w"
    assert "language_hint" not in study["columns"]
    assert study["columns"]["groups"] == ["land"]
    assert study["languages"] == {"expected": ["en"], "fallback": "und"}
    assert "language hint: none" in lines


def test_hint_values_without_a_profile_are_left_out(tmp_path):
    frame = pd.DataFrame({"id": range(6), "text": ["some words here please"] * 6, "lang": ["de", "xx", "de", "fr", "xx", "DE"]})
    frame.to_csv(tmp_path / "s.csv", index=False)
    study, lines = guess_study(tmp_path / "s.csv")
    assert study["languages"]["expected"] == ["de", "fr"]
    assert "hint values without a language profile, left out of expected languages: xx" in lines


def test_xlsx_jsonl_and_txt_folder(tmp_path):
    frame = survey(60)
    book = Workbook()
    sheet = book.active
    sheet.title = "Export"
    sheet.append(frame.columns.tolist())
    for row in frame.itertuples(index=False):
        sheet.append([v.item() if hasattr(v, "item") else v for v in row])
    book.save(tmp_path / "s.xlsx")
    study, lines = guess_study(tmp_path / "s.xlsx")
    assert study["columns"]["text"] == ["q_liked", "q_improve"]
    assert "sheet 'Export'" in lines[0]

    (tmp_path / "s.jsonl").write_text("\n".join(json.dumps(r) for r in frame.to_dict("records")), encoding="utf-8")
    study, _ = guess_study(tmp_path / "s.jsonl")
    assert study["columns"]["id"] == "respondent_id"

    folder = tmp_path / "letters"
    folder.mkdir()
    (folder / "a.txt").write_text("hello there", encoding="utf-8")
    study, lines = guess_study(folder)
    assert study["columns"] == {"id": "file", "text": ["text"]}
    assert study["study"]["name"] == "letters"


def test_written_study_loads_and_ingests(tmp_path):
    data = tmp_path / "data"
    data.mkdir()
    survey(120).to_csv(data / "survey.csv", index=False)
    out = tmp_path / "studies" / "night.study.toml"
    out.parent.mkdir()
    path, lines = write_starter_study(data / "survey.csv", out)
    assert path == out
    text = out.read_text(encoding="utf-8")
    assert text.startswith("# Starter study written by termloom init from survey.csv.")
    assert 'path = "../data/survey.csv"' in text and "[[sources]]" in text
    study = load_study(out)
    ledger = Ledger()
    corpus = read_corpus(study, ledger, Reporter())
    assert len(corpus.respondents) == 120
    assert set(corpus.answers["question"]) == {"q_liked", "q_improve"}
    assert lines


def test_default_path_is_beside_the_data_and_never_overwritten(tmp_path):
    survey(20).to_csv(tmp_path / "wave1.csv", index=False)
    path, _ = write_starter_study(tmp_path / "wave1.csv")
    assert path == (tmp_path / "wave1.study.toml").resolve()
    before = path.read_bytes()
    with pytest.raises(OutputError) as info:
        write_starter_study(tmp_path / "wave1.csv")
    assert "already exists; termloom init never overwrites a study" in str(info.value)
    assert path.read_bytes() == before


def test_missing_data_file(tmp_path):
    with pytest.raises(InputError) as info:
        guess_study(tmp_path / "absent.csv")
    assert "absent.csv does not exist; give init the exported answers" in str(info.value)
    assert not (tmp_path / "absent.study.toml").exists()


def test_header_only_file(tmp_path):
    (tmp_path / "h.csv").write_text("id,comment\n", encoding="utf-8")
    with pytest.raises(InputError) as info:
        write_starter_study(tmp_path / "h.csv")
    assert "h.csv has a header row but no data rows" in str(info.value)
    assert not (tmp_path / "h.study.toml").exists()


def test_file_without_free_text_says_so(tmp_path):
    pd.DataFrame({"id": range(30), "score": range(30)}).to_csv(tmp_path / "n.csv", index=False)
    study, lines = guess_study(tmp_path / "n.csv")
    assert study["columns"]["text"] == []
    assert any("text columns: none found" in line for line in lines)


def test_peek_does_not_hash_or_scan_the_whole_file(tmp_path):
    """init on a large export stays fast: only the first block is examined."""
    frame = survey(PEEK_ROWS + 100)
    frame.to_csv(tmp_path / "s.csv", index=False)
    # an invalid byte far beyond the first block would stop a full scan; peeking never gets there
    with (tmp_path / "s.csv").open("ab") as handle:
        handle.write(b"x" * (2 << 20) + b"\n\xff\n")
    study, _ = guess_study(tmp_path / "s.csv")
    assert study["columns"]["id"] == "respondent_id"
    assert Path(study["sources"][0]["path"]).name == "s.csv"


@pytest.mark.parametrize("data", ["lanternmoth_passenger_survey.csv", "lanternmoth_passenger_survey.xlsx", "lanternmoth_autumn_batch_cp1252.csv"])
def test_guesses_match_the_hand_written_demo_studies(data):
    """The demo studies in demo_texts/ were written by hand, independently of the guesser; init on
    their data must propose the same column roles and the same set of expected languages."""
    from workbench.core.settings import read_study_table

    demo = Path(__file__).resolve().parents[1] / "demo_texts"
    written = {
        study["sources"][0]["path"]: study
        for study in (read_study_table(p) for p in sorted(demo.glob("*.study.toml")))
    }[data]
    guessed, _lines = guess_study(demo / data)
    assert guessed["columns"] == written["columns"]
    # the guess lists the interview languages present; the authors may expect a few more
    guessed_languages = set(guessed["languages"]["expected"])
    assert guessed_languages <= set(written["languages"]["expected"])
    assert guessed_languages >= {"de", "fr", "nl", "en"}
