"""Ingest of XLSX workbooks, JSON Lines, Parquet files and folders of .txt files."""

from __future__ import annotations

import datetime as dt
import hashlib
import json
from pathlib import Path

import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest
from openpyxl import Workbook

from workbench.core.corpus import ANSWER_ID, QUESTION, RAW_TEXT, RESPONDENT_ID, ROW
from workbench.core.ingest import read_corpus
from workbench.core.ledger import Ledger
from workbench.core.progress import Reporter
from workbench.core.settings import study_from_dict


def make_study(tmp_path: Path, sources: list[dict] | str, **columns):
    if isinstance(sources, str):
        sources = [{"path": sources}]
    return study_from_dict({"sources": sources, "columns": columns}, base_dir=tmp_path)


def run(study, chunk_rows: int = 100_000):
    ledger = Ledger()
    return read_corpus(study, ledger, Reporter(), chunk_rows=chunk_rows), ledger


def assert_accounted(corpus, ledger: Ledger) -> None:
    """Issue 2's invariant: rows in = rows accounted for; answers in = answers accounted for."""
    assert len(ledger.accounted("row")) == sum(r.rows for r in corpus.reports)
    assert ledger.accounted("answer") == set(corpus.answers[ANSWER_ID])


# --------------------------------------------------------------------------- XLSX


def write_workbook(path: Path, sheets: dict[str, list[list[object]]]) -> None:
    book = Workbook()
    book.remove(book.active)
    for title, rows in sheets.items():
        sheet = book.create_sheet(title)
        for row in rows:
            sheet.append(row)
    book.save(path)


def test_xlsx_sheet_by_name_and_by_index(tmp_path):
    write_workbook(tmp_path / "s.xlsx", {
        "Notes": [["read me"]],
        "Answers": [
            ["id", "comment", "score", "when", "weight"],
            [101, "Sehr bequem", 7, dt.datetime(2024, 5, 1, 9, 30), 1.5],
            [None, None, None, None, None],  # a formatted empty row: no record
            [102, "NA", 3.0, dt.date(2024, 5, 2), 0.75],
        ],
    })
    by_name = make_study(tmp_path, [{"path": "s.xlsx", "sheet": "Answers"}], id="id", text=["comment"], weight="weight")
    by_index = make_study(tmp_path, [{"path": "s.xlsx", "sheet": 1}], id="id", text=["comment"], weight="weight")
    corpus, ledger = run(by_name)
    again, _ = run(by_index)
    pd.testing.assert_frame_equal(corpus.answers, again.answers)
    assert corpus.reports[0].sheet == "Answers"
    assert corpus.respondents[RESPONDENT_ID].tolist() == ["101", "102"]
    assert corpus.respondents["score"].tolist() == ["7", "3"]  # whole numbers without ".0"
    assert corpus.respondents["when"].tolist() == ["2024-05-01T09:30:00", "2024-05-02T00:00:00"]
    assert corpus.answers[RAW_TEXT].tolist() == ["Sehr bequem", "NA"]
    assert corpus.answers["weight"].tolist() == [1.5, 0.75]
    assert len(corpus.reports[0].sha256) == 64
    assert_accounted(corpus, ledger)


def test_xlsx_values_right_of_the_header_are_flagged(tmp_path):
    write_workbook(tmp_path / "r.xlsx", {"S": [["id", "q"], [1, "a", "stray"], [2, "b"]]})
    corpus, ledger = run(make_study(tmp_path, "r.xlsx", id="id", text=["q"]))
    flagged = ledger.frame().query("code == 'ragged_row'")
    assert flagged.key.tolist() == ["1"] and "'stray'" in flagged.message.iloc[0]
    assert corpus.answers[RAW_TEXT].tolist() == ["a", "b"]


# --------------------------------------------------------------------------- JSON Lines


def test_jsonl_values_become_text_and_broken_lines_are_ledgered(tmp_path):
    """JSON Lines (jsonlines.org): one RFC 8259 value per line. A broken line is dropped with a
    ledger entry naming it; the rest is read."""
    lines = [
        json.dumps({"id": 1, "text": "Très bien", "ok": True, "score": 2.5, "tags": ["a", "b"]}, ensure_ascii=False),
        "",
        '{"id": 2, "text": "unterminated',
        json.dumps({"id": 3, "text": None, "extra": "later key"}),
        "[1, 2]",
        json.dumps({"id": 4, "text": "NA"}),
    ]
    (tmp_path / "a.jsonl").write_text("\n".join(lines) + "\n", encoding="utf-8")
    corpus, ledger = run(make_study(tmp_path, "a.jsonl", id="id", text=["text"]), chunk_rows=2)
    resp = corpus.respondents
    assert resp[RESPONDENT_ID].tolist() == ["1", "3", "4"]
    assert resp[ROW].tolist() == [1, 4, 6]  # line numbers
    assert resp["ok"].tolist()[0] == "true" and resp["score"].tolist()[0] == "2.5"
    assert resp["tags"].tolist()[0] == '["a","b"]'
    assert corpus.answers[RAW_TEXT].tolist() == ["Très bien", "NA"]
    dropped = ledger.frame().query("status == 'dropped'")
    assert dropped.code.tolist() == ["bad_json", "bad_json"]
    assert dropped.key.tolist() == ["a.jsonl:3", "a.jsonl:5"]
    assert dropped.message.iloc[0].startswith("line 3 is not valid JSON")
    assert "JSON list, not an object" in dropped.message.iloc[1]
    assert corpus.reports[0].rows == 5
    assert "extra" in corpus.reports[0].columns
    assert_accounted(corpus, ledger)


# --------------------------------------------------------------------------- Parquet


def test_parquet_text_and_other_columns(tmp_path):
    table = pa.table({
        "id": pa.array([1, 2, 3], type=pa.int64()),
        "comment": pa.array(["gut", None, "  "]),
        "coded": pa.array(["x", "y", "x"]).dictionary_encode(),
        "weight": pa.array([1.0, 0.5, None]),
        "flag": pa.array([True, False, None]),
    })
    pq.write_table(table, tmp_path / "a.parquet")
    corpus, ledger = run(make_study(tmp_path, "a.parquet", id="id", text=["comment", "coded"], weight="weight"), chunk_rows=2)
    assert corpus.respondents[RESPONDENT_ID].tolist() == ["1", "2", "3"]
    assert corpus.respondents["flag"].tolist() == ["true", "false", ""]
    assert corpus.answers[ANSWER_ID].tolist() == ["1|comment", "1|coded", "2|coded", "3|coded"]
    assert corpus.answers["weight"].tolist()[:3] == [1.0, 1.0, 0.5]
    assert_accounted(corpus, ledger)


# --------------------------------------------------------------------------- .txt folders


def test_txt_folder_one_answer_per_file(tmp_path):
    folder = tmp_path / "letters"
    folder.mkdir()
    (folder / "b-002.txt").write_text("Second letter\nwith two lines", encoding="utf-8")
    (folder / "a-001.txt").write_bytes(b"\xef\xbb\xbfFirst letter")
    (folder / "c-003.TXT").write_bytes("Caf\u00e9 tr\u00e8s bon, mais le th\u00e9 \u00e9tait froid".encode("cp1252"))
    (folder / "d-004.txt").write_text("   \n", encoding="utf-8")
    (folder / "notes.md").write_text("not an answer", encoding="utf-8")
    corpus, ledger = run(make_study(tmp_path, "letters"))
    assert corpus.reports[0].format == "txt"
    assert corpus.respondents[RESPONDENT_ID].tolist() == ["a-001", "b-002", "c-003", "d-004"]
    assert corpus.answers[ANSWER_ID].tolist() == ["a-001|text", "b-002|text", "c-003|text"]
    assert set(corpus.answers[QUESTION]) == {"text"}
    assert corpus.answers[RAW_TEXT].tolist()[0] == "First letter"
    assert corpus.answers[RAW_TEXT].tolist()[2] == "Café très bon, mais le thé était froid"
    notes = " ".join(corpus.reports[0].notes)
    assert "1 entries that are not .txt files were ignored" in notes and "not UTF-8" in notes
    assert ledger.frame().query("code == 'no_text'").key.tolist() == ["d-004"]
    assert_accounted(corpus, ledger)


def test_txt_folder_checksum_covers_names_and_contents(tmp_path):
    """The folder checksum is SHA-256 (FIPS 180-4) of '<name> <sha256(file)>' lines in name order."""
    folder = tmp_path / "f"
    folder.mkdir()
    (folder / "x.txt").write_bytes(b"abc")
    corpus, _ = run(make_study(tmp_path, "f"))
    # sha256("abc") is the FIPS 180-2 appendix B.1 example digest [recalled from memory]
    abc = "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
    assert hashlib.sha256(b"abc").hexdigest() == abc
    assert corpus.reports[0].sha256 == hashlib.sha256(f"x.txt {abc}\n".encode()).hexdigest()


def test_binary_file_in_txt_folder_is_dropped_with_a_reason(tmp_path):
    folder = tmp_path / "f"
    folder.mkdir()
    (folder / "ok.txt").write_text("fine", encoding="utf-8")
    (folder / "pic.txt").write_bytes(b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR")
    corpus, ledger = run(make_study(tmp_path, "f"))
    dropped = ledger.frame().query("status == 'dropped'")
    assert dropped.code.tolist() == ["undecodable"]
    assert "pic.txt looks like a PNG image" in dropped.message.iloc[0]
    assert corpus.respondents[RESPONDENT_ID].tolist() == ["ok"]
    assert_accounted(corpus, ledger)


@pytest.mark.parametrize("fmt", ["csv", "xlsx", "jsonl", "parquet"])
def test_every_format_gives_the_same_tables(tmp_path, fmt):
    frame = pd.DataFrame({"id": ["a1", "a2", "a3"], "q1": ["yes, good", "", "NA"], "q2": ["x", "y", ""], "g": ["DE", "FR", "DE"]})
    path = tmp_path / f"data.{fmt}"
    if fmt == "csv":
        frame.to_csv(path, index=False)
    elif fmt == "xlsx":
        write_workbook(path, {"S": [frame.columns.tolist(), *frame.values.tolist()]})
    elif fmt == "jsonl":
        path.write_text("\n".join(json.dumps(r) for r in frame.to_dict("records")), encoding="utf-8")
    else:
        pq.write_table(pa.Table.from_pandas(frame, preserve_index=False), path)
    corpus, _ = run(make_study(tmp_path, f"data.{fmt}", id="id", text=["q1", "q2"], groups=["g"]))
    assert corpus.answers[ANSWER_ID].tolist() == ["a1|q1", "a1|q2", "a2|q2", "a3|q1"]
    assert corpus.answers[RAW_TEXT].tolist() == ["yes, good", "x", "y", "NA"]
    assert corpus.answers["group:g"].tolist() == ["DE", "DE", "FR", "DE"]
