"""Every bad input a user can give ingest: a one-line error naming what, where and the fix — or,
where reading can go on, a ledger entry saying what was skipped."""

from __future__ import annotations

import json
import os
import zipfile
from pathlib import Path

import pyarrow as pa
import pyarrow.parquet as pq
import pytest
from openpyxl import Workbook

from workbench.core.errors import InputError, SettingsError, TermloomError
from workbench.core.ingest import read_corpus
from workbench.core.ledger import Ledger
from workbench.core.progress import Reporter
from workbench.core.readers import xlsx as xlsx_reader
from workbench.core.settings import load_study, study_from_dict


def make_study(tmp_path: Path, source: dict | str, **columns):
    columns = columns or {"id": "id", "text": ["q"]}
    source = {"path": source} if isinstance(source, str) else source
    return study_from_dict({"sources": [source], "columns": columns}, base_dir=tmp_path)


def failure(kind: type[TermloomError], study) -> str:
    with pytest.raises(kind) as info:
        read_corpus(study, Ledger(), Reporter())
    message = str(info.value)
    assert "\n" not in message and "Traceback" not in message
    return message


def test_missing_file(tmp_path):
    message = failure(InputError, make_study(tmp_path, "nowhere.csv"))
    assert "nowhere.csv does not exist" in message and "fix sources.path" in message


def test_empty_file(tmp_path):
    (tmp_path / "e.csv").write_bytes(b"")
    assert "e.csv is empty (0 bytes)" in failure(InputError, make_study(tmp_path, "e.csv"))


def test_file_of_blank_lines(tmp_path):
    (tmp_path / "b.csv").write_bytes(b"\r\n\r\n   \r\n")
    assert "holds only blank lines" in failure(InputError, make_study(tmp_path, "b.csv"))


def test_header_only(tmp_path):
    (tmp_path / "h.csv").write_text("id,q\n\n", encoding="utf-8")
    message = failure(InputError, make_study(tmp_path, "h.csv"))
    assert "h.csv has a header row but no data rows" in message


def test_missing_text_column_lists_columns_and_suggests_the_nearest(tmp_path):
    (tmp_path / "a.csv").write_text("id,comment,country\n1,a,DE\n", encoding="utf-8")
    message = failure(SettingsError, make_study(tmp_path, "a.csv", id="id", text=["coment"]))
    assert "has no column 'coment' (named in columns.text)" in message
    assert "(did you mean 'comment'?)" in message
    assert "columns found: id, comment, country" in message
    assert message.endswith("fix columns.text in the study")


def test_missing_id_column_suggests_a_case_variant(tmp_path):
    (tmp_path / "a.csv").write_text("RespID,q\n1,a\n", encoding="utf-8")
    message = failure(SettingsError, make_study(tmp_path, "a.csv", id="respid", text=["q"]))
    assert "has no column 'respid' (named in columns.id) (did you mean 'RespID'?)" in message


def test_file_without_header_row_is_named_as_such(tmp_path):
    (tmp_path / "a.csv").write_text("1,Sehr bequem und ruhig\n2,Zu laut\n", encoding="utf-8")
    message = failure(SettingsError, make_study(tmp_path, "a.csv"))
    assert "the first line looks like data, but the file needs a header row" in message


def test_study_without_text_column(tmp_path):
    (tmp_path / "a.csv").write_text("id,q\n1,a\n", encoding="utf-8")
    message = failure(SettingsError, make_study(tmp_path, "a.csv", id="id"))
    assert "names no text column" in message and "columns found: id, q" in message


def test_column_in_two_roles(tmp_path):
    (tmp_path / "a.csv").write_text("id,q\n1,a\n", encoding="utf-8")
    message = failure(SettingsError, make_study(tmp_path, "a.csv", id="id", text=["q"], groups=["q"]))
    assert "column 'q' is named in both columns.text and columns.groups" in message


def test_repeated_column_name_the_study_uses(tmp_path):
    (tmp_path / "a.csv").write_text("id,q,q\n1,a,b\n", encoding="utf-8")
    message = failure(InputError, make_study(tmp_path, "a.csv"))
    assert "column 'q' (named in columns.text) appears 2 times (positions 2, 3)" in message


def test_duplicate_ids_do_not_stop_the_read(tmp_path):
    (tmp_path / "a.csv").write_text("id,q\n1,a\n1,b\n", encoding="utf-8")
    ledger = Ledger()
    corpus = read_corpus(make_study(tmp_path, "a.csv"), ledger, Reporter())
    assert corpus.respondents["respondent_id"].tolist() == ["1", "1#2"]
    assert ledger.frame().query("code == 'duplicate_id'").shape[0] == 1


@pytest.mark.parametrize(
    ("data", "expected"),
    [
        (b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR\x00\x00\x01\x00", "looks like a PNG image, not a CSV file"),  # PNG spec §5.2
        (b"%PDF-1.7\n%\xe2\xe3\xcf\xd3\n", "looks like a PDF document"),  # ISO 32000-1 §7.5.2
        (b"PK\x03\x04\x14\x00\x00\x00", "looks like a ZIP archive"),  # APPNOTE.TXT §4.3.7
        (b"id,q\n1,a\x00\x00\x00b\n", "looks like a binary file, not a CSV file (NUL byte at offset 8)"),
    ],
)
def test_binary_file_given_as_csv(tmp_path, data, expected):
    """File signatures from the cited format specifications [recalled from memory]."""
    (tmp_path / "b.csv").write_bytes(data)
    assert expected in failure(InputError, make_study(tmp_path, "b.csv"))


def test_undecodable_bytes_with_the_study_encoding(tmp_path):
    """0xC3 starts a two-byte UTF-8 sequence (RFC 3629 §4); a newline cannot continue it."""
    (tmp_path / "u.csv").write_bytes(b"id,q\n1,ok\n2,caf\xc3\n")
    message = failure(InputError, make_study(tmp_path, {"path": "u.csv", "encoding": "utf-8"}))
    assert "byte 0xC3 on line 3 (byte offset 15) is not valid utf-8 as set in sources.encoding" in message


def test_undecodable_bytes_when_guessing(tmp_path):
    """0x81 is unassigned in windows-1252 (WHATWG index maps it to U+0081 only as a C1 control;
    Python's cp1252 refuses it) and no charset-normalizer candidate reads random high bytes cleanly."""
    (tmp_path / "u.csv").write_bytes(b"id,q\n1," + bytes(range(0x80, 0x100)) * 3 + b"\n")
    message = failure(InputError, make_study(tmp_path, "u.csv"))
    assert "cannot tell the text encoding: byte 0x80 on line 2" in message and "set sources.encoding" in message


def test_unknown_encoding_name(tmp_path):
    (tmp_path / "a.csv").write_text("id,q\n1,a\n", encoding="utf-8")
    message = failure(SettingsError, make_study(tmp_path, {"path": "a.csv", "encoding": "latin-9000"}))
    assert "sources.encoding = 'latin-9000' is not an encoding Python knows" in message


def test_folder_given_as_csv(tmp_path):
    (tmp_path / "answers.csv").mkdir()
    message = failure(InputError, make_study(tmp_path, {"path": "answers.csv", "format": "csv"}))
    assert "answers.csv is a folder, not a CSV file" in message and "format = 'txt'" in message


def test_file_given_as_txt_folder(tmp_path):
    (tmp_path / "a.csv").write_text("id,q\n1,a\n", encoding="utf-8")
    message = failure(InputError, make_study(tmp_path, {"path": "a.csv", "format": "txt"}))
    assert "format = 'txt' reads a folder of .txt files" in message


def test_txt_folder_without_files(tmp_path):
    (tmp_path / "letters").mkdir()
    (tmp_path / "letters" / "readme.md").write_text("x", encoding="utf-8")
    message = failure(InputError, make_study(tmp_path, "letters", text=["text"]))
    assert "letters holds no .txt files (1 other entries)" in message


@pytest.mark.skipif(os.name != "posix" or os.geteuid() == 0, reason="root reads every file regardless of permissions")
def test_unreadable_file(tmp_path):
    path = tmp_path / "locked.csv"
    path.write_text("id,q\n1,a\n", encoding="utf-8")
    path.chmod(0)
    try:
        message = failure(InputError, make_study(tmp_path, "locked.csv"))
    finally:
        path.chmod(0o600)
    assert "locked.csv cannot be read (Permission denied)" in message


def test_unreadable_file_message_also_under_root(tmp_path, monkeypatch):
    """Root reads anything, so the permission failure is simulated where the file is opened."""
    path = tmp_path / "locked.csv"
    path.write_text("id,q\n1,a\n", encoding="utf-8")
    real_open = Path.open

    def deny(self, *args, **kwargs):
        if self.name == "locked.csv":
            raise PermissionError(13, "Permission denied", str(self))
        return real_open(self, *args, **kwargs)

    monkeypatch.setattr(Path, "open", deny)
    message = failure(InputError, make_study(tmp_path, "locked.csv"))
    assert "locked.csv cannot be read (Permission denied); check the file's permissions" in message


def test_study_pointing_at_itself(tmp_path):
    study_file = tmp_path / "self.study.toml"
    study_file.write_text('[[sources]]\npath = "self.study.toml"\n[columns]\nid = "id"\ntext = ["q"]\n', encoding="utf-8")
    message = failure(SettingsError, load_study(study_file))
    assert "sources[1].path points at the study file itself" in message


def test_two_sources_with_one_label(tmp_path):
    for name in ("a", "b"):
        (tmp_path / name).mkdir()
        (tmp_path / name / "data.csv").write_text("id,q\n1,a\n", encoding="utf-8")
    study = study_from_dict(
        {"sources": [{"path": "a/data.csv"}, {"path": "b/data.csv"}], "columns": {"id": "id", "text": ["q"]}},
        base_dir=tmp_path,
    )
    assert "sources 1 and 2 are both labelled 'data.csv'" in failure(SettingsError, study)


# --------------------------------------------------------------------------- XLSX


def _workbook(path: Path, sheets: dict[str, list[list[object]]]) -> None:
    book = Workbook()
    book.remove(book.active)
    for title, rows in sheets.items():
        sheet = book.create_sheet(title)
        for row in rows:
            sheet.append(row)
    book.save(path)


def test_xlsx_empty_sheet(tmp_path):
    _workbook(tmp_path / "w.xlsx", {"Blank": [], "Data": [["id", "q"], [1, "a"]]})
    message = failure(InputError, make_study(tmp_path, "w.xlsx"))
    assert "sheet 'Blank' of" in message and "is empty" in message and "(other sheets: Data)" in message


def test_xlsx_header_only(tmp_path):
    _workbook(tmp_path / "w.xlsx", {"Data": [["id", "q"]]})
    assert "sheet 'Data' of" in failure(InputError, make_study(tmp_path, "w.xlsx"))


def test_xlsx_unknown_sheet_name_and_index(tmp_path):
    _workbook(tmp_path / "w.xlsx", {"Answers": [["id", "q"], [1, "a"]]})
    message = failure(InputError, make_study(tmp_path, {"path": "w.xlsx", "sheet": "Answer"}))
    assert "has no sheet 'Answer' (did you mean 'Answers'?); sheets: Answers" in message
    message = failure(InputError, make_study(tmp_path, {"path": "w.xlsx", "sheet": 3}))
    assert "sources.sheet = 3 is out of range (0 is the first sheet)" in message


def test_xlsx_truncated(tmp_path):
    _workbook(tmp_path / "w.xlsx", {"Answers": [["id", "q"], [1, "a"]]})
    data = (tmp_path / "w.xlsx").read_bytes()
    (tmp_path / "cut.xlsx").write_bytes(data[: len(data) // 2])
    message = failure(InputError, make_study(tmp_path, "cut.xlsx"))
    assert "cut.xlsx is not a readable XLSX workbook" in message and "save it again as .xlsx" in message


def test_xlsx_decompression_bomb_is_refused(tmp_path, monkeypatch):
    """A ZIP member declares its unpacked size in the central directory (APPNOTE.TXT §4.4.11);
    the check reads those sizes before anything is inflated. Limits are lowered to keep the test small."""
    monkeypatch.setattr(xlsx_reader, "MAX_UNPACKED", 1_000_000)
    with zipfile.ZipFile(tmp_path / "bomb.xlsx", "w", zipfile.ZIP_DEFLATED) as archive:
        archive.writestr("xl/worksheets/sheet1.xml", b"\x00" * 3_000_000)
    message = failure(InputError, make_study(tmp_path, "bomb.xlsx"))
    assert "would unpack to" in message and "possible decompression bomb" in message

    monkeypatch.setattr(xlsx_reader, "MAX_UNPACKED", 10**12)
    monkeypatch.setattr(xlsx_reader, "_RATIO_MIN_BYTES", 1_000)
    message = failure(InputError, make_study(tmp_path, "bomb.xlsx"))
    assert "part xl/worksheets/sheet1.xml unpacks" in message and "times its packed size" in message


def test_old_xls_workbook(tmp_path):
    (tmp_path / "old.xls").write_bytes(b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + bytes(504))
    assert "old Excel 97-2003 workbook; save it as .xlsx or CSV" in failure(InputError, make_study(tmp_path, "old.xls"))


# --------------------------------------------------------------------------- JSON Lines, Parquet


def test_jsonl_with_one_broken_line_reads_the_rest(tmp_path):
    lines = [json.dumps({"id": i, "q": f"answer {i}"}) for i in range(1, 6)]
    lines[2] = '{"id": 3, "q": "no closing brace"'
    (tmp_path / "a.jsonl").write_text("\n".join(lines), encoding="utf-8")
    ledger = Ledger()
    corpus = read_corpus(make_study(tmp_path, "a.jsonl"), ledger, Reporter())
    assert corpus.respondents["respondent_id"].tolist() == ["1", "2", "4", "5"]
    dropped = ledger.frame().query("status == 'dropped'")
    assert dropped.code.tolist() == ["bad_json"]
    assert dropped.message.iloc[0].startswith("line 3 is not valid JSON")
    assert "the rest read" in dropped.message.iloc[0]


def test_jsonl_where_no_line_is_an_object(tmp_path):
    (tmp_path / "a.jsonl").write_text("[1]\n{broken\n", encoding="utf-8")
    message = failure(InputError, make_study(tmp_path, "a.jsonl"))
    assert "none of its 2 records could be read (first problem: line 1 holds a JSON list" in message


def test_jsonl_without_the_id_key(tmp_path):
    (tmp_path / "a.jsonl").write_text('{"ident": 1, "q": "a"}\n', encoding="utf-8")
    message = failure(SettingsError, make_study(tmp_path, "a.jsonl"))
    assert "has no column 'id' (named in columns.id)" in message and "columns found: ident, q" in message


def test_parquet_text_column_that_is_not_text(tmp_path):
    pq.write_table(pa.table({"id": ["a", "b"], "q": pa.array([1, 2], type=pa.int32())}), tmp_path / "p.parquet")
    message = failure(InputError, make_study(tmp_path, "p.parquet"))
    assert "text column 'q' holds int32 values, not text" in message


def test_damaged_parquet(tmp_path):
    pq.write_table(pa.table({"id": ["a"], "q": ["x"]}), tmp_path / "p.parquet")
    data = (tmp_path / "p.parquet").read_bytes()
    (tmp_path / "cut.parquet").write_bytes(data[:-20])
    assert "cut.parquet is not a readable Parquet file" in failure(InputError, make_study(tmp_path, "cut.parquet"))
