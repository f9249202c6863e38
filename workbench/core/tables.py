"""Writing tables for people and programs: CSV, XLSX and JSON.

CSV and XLSX are opened by spreadsheets, so text cells there are protected
against formula injection (OWASP, "CSV Injection"): a text cell that begins
with ``=``, ``+``, ``-``, ``@``, tab, carriage return or line feed gets a
leading single quote, so the spreadsheet shows it as text instead of running
it. Only *text* cells are touched: a number stays a number (``-0.5`` in a
numeric column is written as the number -0.5). CSV quotes every text cell and
doubles embedded double quotes (RFC 4180 §2.6–2.7), so a delimiter inside a
cell never starts a new, unprotected cell. JSON (and Parquet, elsewhere) keep
the exact text.

Spreadsheet limits (Microsoft, "Excel specifications and limits"
[recalled from memory]): 1,048,576 rows and 16,384 columns per sheet,
32,767 characters per cell. A table longer than a sheet continues on further
sheets (``name``, ``name (2)``...); a cell longer than the limit is cut and
ends with a visible marker pointing to the JSON/Parquet output, which keep the
full text; both produce a note for the manifest. A table wider than a sheet is
refused (write CSV or Parquet instead).
"""

from __future__ import annotations

import csv
import dataclasses
import datetime as _dt
import functools
import json
import math
import re
import unicodedata
from collections.abc import Callable, Collection, Iterable, Mapping
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from workbench.core.atomic import atomic_open, atomic_path
from workbench.core.errors import OutputError

#: Rows made spreadsheet-safe and written at a time by :func:`write_csv`.
CSV_SLICE_ROWS = 100_000
#: First characters that make a spreadsheet read a cell as a formula (OWASP, "CSV Injection").
FORMULA_TRIGGERS: tuple[str, ...] = ("=", "+", "-", "@", "\t", "\r", "\n")

#: Excel's per-sheet and per-cell limits [recalled from memory].
EXCEL_MAX_ROWS = 1_048_576
EXCEL_MAX_COLUMNS = 16_384
EXCEL_MAX_CELL_CHARS = 32_767
#: Sheet names: at most 31 characters, none of these (Excel's rule [recalled from memory]).
_SHEET_FORBIDDEN = re.compile(r"[\[\]:*?/\\]")
_SHEET_MAX = 31


def neutralise(text: str) -> str:
    """Prefix a single quote when ``text`` would start a spreadsheet formula.

    >>> neutralise("=1+1"), neutralise("plain"), neutralise("-2")
    ("'=1+1", 'plain', "'-2")
    """
    if text and text[0] in FORMULA_TRIGGERS:
        return "'" + text
    return text


def to_jsonable(value: Any) -> Any:
    """Turn numpy/pandas scalars and containers into plain JSON values (NaN -> ``None``).

    Floats keep every digit (``json`` writes the shortest repr that round-trips).
    """
    if value is None or isinstance(value, (bool, str)):
        return value
    if isinstance(value, (np.bool_,)):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        number = float(value)
        return number if math.isfinite(number) else (None if math.isnan(number) else ("inf" if number > 0 else "-inf"))
    if isinstance(value, Mapping):
        return {str(k): to_jsonable(v) for k, v in value.items()}
    if isinstance(value, (list, tuple, set, frozenset, np.ndarray)):
        items = sorted(value, key=str) if isinstance(value, (set, frozenset)) else value
        return [to_jsonable(v) for v in items]
    if isinstance(value, (pd.Timestamp, _dt.datetime, _dt.date)):
        return value.isoformat()
    if isinstance(value, Path):
        return value.as_posix()
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        return {f.name: to_jsonable(getattr(value, f.name)) for f in dataclasses.fields(value)}
    if value is pd.NA or value is pd.NaT:
        return None
    return str(value)


#: One encoder for JSON cells that are not plain text (``json.dumps`` with options builds a new one per call).
_JSON = json.JSONEncoder(ensure_ascii=False, allow_nan=False)
#: JSON text of one string, exactly as ``json.dumps(..., ensure_ascii=False)`` writes it (the same C function).
_json_string: Callable[[str], str] = json.encoder.encode_basestring


def _cell_text(value: Any) -> Any:
    """Containers become JSON text so one cell holds one readable value."""
    if type(value) is list or type(value) is tuple:
        # The common list cell (terms, flags): plain strings, joined as json.dumps joins them.
        if not value:
            return "[]"
        try:
            return "[" + ", ".join(map(_json_string, value)) + "]"
        except TypeError:  # not all strings: the general path below
            pass
    if isinstance(value, (list, tuple)):
        # Lists of plain values (terms, flags, masks) need no conversion: json
        # writes them exactly as to_jsonable would. NaN or numpy values inside
        # take the general path.
        try:
            return _JSON.encode(value)
        except (TypeError, ValueError):
            return json.dumps(to_jsonable(value), ensure_ascii=False)
    if isinstance(value, (dict, set, frozenset, np.ndarray)):
        return json.dumps(to_jsonable(value), ensure_ascii=False)
    return value


def _safe_cell(value: Any) -> Any:
    if type(value) is str:  # the common case first
        return neutralise(value)
    text = _cell_text(value)
    return neutralise(text) if isinstance(text, str) else text


def _is_text_column(series: pd.Series) -> bool:
    return not (
        pd.api.types.is_numeric_dtype(series.dtype)
        or pd.api.types.is_bool_dtype(series.dtype)
        or pd.api.types.is_datetime64_any_dtype(series.dtype)
    )


def spreadsheet_frame(frame: pd.DataFrame) -> pd.DataFrame:
    """A copy safe to open in a spreadsheet: containers as JSON text, text cells neutralised.

    Numeric, boolean and date columns are returned unchanged; in mixed
    (object) columns only the ``str`` cells are neutralised, numbers stay numbers.
    Column names are neutralised too (they become the header row).
    """
    out = frame.copy()
    unique = out.columns.is_unique
    for position, column in enumerate(out.columns):
        series = out[column] if unique else out.iloc[:, position]
        if _is_text_column(series):
            out.isetitem(position, _safe_column(series))
    out.columns = [neutralise(str(c)) for c in out.columns]
    return out


def _safe_column(series: pd.Series) -> pd.Series:
    """One text column made spreadsheet-safe (see :func:`spreadsheet_frame`).

    A pandas string column stays one (no Python object per cell: a million-row
    ledger would need gigabytes); any other text column becomes an object column.
    """
    # Column-wise checks cost a few milliseconds of set-up: worth it from a few thousand cells.
    if len(series) >= 4096 and isinstance(series.dtype, pd.StringDtype):
        triggered = series.str.startswith(FORMULA_TRIGGERS).to_numpy(dtype=bool, na_value=False)
        return series.where(~triggered, "'" + series) if triggered.any() else series
    plain = len(series) >= 4096 and pd.api.types.infer_dtype(series, skipna=True) in ("string", "empty")
    if not plain:
        return series.astype(object).map(_safe_cell)
    # Only text and missing values: find the cells to protect column-wise
    # (a million-row ledger or corpus has a handful of them).
    values = series.to_numpy(dtype=object, copy=True)
    triggered = series.str.startswith(FORMULA_TRIGGERS).to_numpy(dtype=bool, na_value=False)
    if triggered.any():
        values[triggered] = [neutralise(v) for v in values[triggered]]
    return pd.Series(values, index=series.index, dtype=object, name=series.name)


# --------------------------------------------------------------------------- CSV


def write_csv(path: Path, frame: pd.DataFrame, *, prepared: bool = False) -> Path:
    """Write ``frame`` as CSV for spreadsheets: UTF-8 with BOM, CRLF, text quoted and neutralised.

    The BOM lets spreadsheet programs recognise UTF-8 (accents, Greek,
    Cyrillic); CRLF line ends and quoting follow RFC 4180. ``prepared``:
    ``frame`` is already the output of :func:`spreadsheet_frame` (a caller
    writing the same table to CSV and XLSX makes it safe once).
    """
    with atomic_open(path, "w", encoding="utf-8-sig", newline="") as handle:
        # In slices, so the spreadsheet-safe copy of a million-row table never exists whole.
        for start in range(0, max(len(frame), 1), CSV_SLICE_ROWS):
            part = frame.iloc[start : start + CSV_SLICE_ROWS]
            safe = part if prepared else spreadsheet_frame(part)
            safe.to_csv(handle, index=False, header=start == 0, quoting=csv.QUOTE_NONNUMERIC, lineterminator="\r\n")
    return path


# --------------------------------------------------------------------------- JSON


def json_records(frame: pd.DataFrame) -> list[dict[str, Any]]:
    """Rows of ``frame`` as plain dicts with exact text and full-precision numbers."""
    columns = [str(c) for c in frame.columns]
    if not columns:
        return [{} for _ in range(len(frame))]
    cells = [_json_column(frame.iloc[:, position]) for position in range(frame.shape[1])]
    return [dict(zip(columns, row, strict=True)) for row in zip(*cells, strict=True)]


def _json_column(series: pd.Series) -> list[Any]:
    """One column as JSON-ready values, converted column-wise where the dtype allows (same values as to_jsonable)."""
    dtype = series.dtype
    if isinstance(dtype, np.dtype) and dtype.kind in "biu":
        return series.tolist()
    if isinstance(dtype, np.dtype) and dtype.kind == "f":
        values = series.to_numpy()
        cells = values.tolist()
        for position in np.flatnonzero(~np.isfinite(values)).tolist():
            cells[position] = to_jsonable(values[position])
        return cells
    return [value if type(value) is str else to_jsonable(value) for value in series.tolist()]


def _json_texts(series: pd.Series) -> list[str]:
    """The JSON text of each cell of one column: what ``json.dumps`` writes for :func:`_json_column`'s values.

    Numbers are formatted column-wise by ``int``/``float`` repr (as the json
    module does) and strings by the json module's own C escaper; only other
    values go through an encoder one by one.
    """
    dtype = series.dtype
    if isinstance(dtype, np.dtype) and dtype.kind == "b":
        return ["true" if value else "false" for value in series.tolist()]
    if isinstance(dtype, np.dtype) and dtype.kind in "iu":
        return list(map(int.__repr__, series.tolist()))
    if isinstance(dtype, np.dtype) and dtype.kind == "f":
        values = series.to_numpy()
        texts = list(map(float.__repr__, values.tolist()))
        for position in np.flatnonzero(~np.isfinite(values)).tolist():
            texts[position] = _JSON.encode(to_jsonable(values[position]))
        return texts
    return [_json_string(v) if type(v) is str else _JSON.encode(to_jsonable(v)) for v in series.tolist()]


def write_json_table(path: Path, frame: pd.DataFrame) -> Path:
    """Write ``frame`` as a JSON array of records, one record per line, exact text.

    Each line is what ``json.dumps(record, ensure_ascii=False)`` writes for
    the row's record (see :func:`json_records`); the lines are assembled
    column-wise from each cell's JSON text, in slices of :data:`CSV_SLICE_ROWS` rows.
    """
    columns = [str(c) for c in frame.columns]
    with atomic_open(path, "w", encoding="utf-8", newline="\n") as handle:
        handle.write("[")
        if columns and len(set(columns)) == len(columns):
            # One %-template per table: '{"term": %s, "g2": %s}' filled with each row's cell texts.
            template = "{" + ", ".join(_json_string(c).replace("%", "%%") + ": %s" for c in columns) + "}"
            for start in range(0, len(frame), CSV_SLICE_ROWS):
                part = frame.iloc[start : start + CSV_SLICE_ROWS]
                texts = [_json_texts(part.iloc[:, position]) for position in range(part.shape[1])]
                handle.write(("\n" if start == 0 else ",\n") + ",\n".join([template % row for row in zip(*texts)]))
        else:  # no columns, or repeated names (a record keeps the last value under the first name's place)
            for number, record in enumerate(json_records(frame)):
                handle.write("\n" if number == 0 else ",\n")
                handle.write(json.dumps(record, ensure_ascii=False, allow_nan=False))
        handle.write("\n]\n")
    return path


def write_json(path: Path, data: Any) -> Path:
    """Write any JSON-ready value (after :func:`to_jsonable`), indented, exact text."""
    text = json.dumps(to_jsonable(data), ensure_ascii=False, allow_nan=False, indent=2)
    with atomic_open(path, "w", encoding="utf-8", newline="\n") as handle:
        handle.write(text + "\n")
    return path


# --------------------------------------------------------------------------- XLSX


def sheet_name(name: str, used: set[str]) -> str:
    """A valid, unique Excel sheet name derived from ``name``.

    Forbidden characters ``[ ] : * ? / \\`` become ``_``, leading/trailing
    apostrophes are dropped, the name is cut to 31 characters and made unique
    (case-insensitively, as Excel compares them) with a `` (2)`` suffix.
    """
    base = _SHEET_FORBIDDEN.sub("_", "".join(ch if ch.isprintable() else "_" for ch in str(name)))
    base = base.strip("'").strip() or "table"
    if base.lower() == "history":  # reserved by Excel
        base = "history_"
    candidate = base[:_SHEET_MAX]
    number = 2
    while candidate.lower() in used:
        suffix = f" ({number})"
        candidate = base[: _SHEET_MAX - len(suffix)] + suffix
        number += 1
    used.add(candidate.lower())
    return candidate


def _utf16_len(text: str) -> int:
    return len(text.encode("utf-16-le")) // 2


def fit_cell(text: str, limit: int = EXCEL_MAX_CELL_CHARS) -> tuple[str, bool]:
    """Cut ``text`` to Excel's cell limit (counted in UTF-16 units, as Excel counts).

    Returns the text and whether it was cut. A cut cell ends with a visible
    marker saying how long the full text is and where to find it.
    """
    if len(text) <= limit // 2 or _utf16_len(text) <= limit:
        return text, False
    marker = f" …[cut: {len(text):,} characters in full; see the JSON or Parquet output]"
    room = limit - _utf16_len(marker)
    kept, used = [], 0
    for ch in text:
        width = 2 if ord(ch) > 0xFFFF else 1
        if used + width > room:
            break
        kept.append(ch)
        used += width
    return "".join(kept) + marker, True


def _width(values: Iterable[Any], header: str) -> float:
    """Column width in characters: the longest first line among ``values`` and the header, plus 2, within 8..62."""
    lengths = [
        len(text.partition("\n")[0])
        for text in (
            value if type(value) is str else str(value)
            for value in values
            if value is not None and not (isinstance(value, float) and math.isnan(value))
        )
    ]
    longest = max(len(header), max(lengths, default=0))
    return float(min(max(longest + 2, 8), 62))


def write_xlsx(
    path: Path,
    tables: Mapping[str, pd.DataFrame],
    max_rows: int = EXCEL_MAX_ROWS,
    descriptions: Mapping[str, str] | None = None,
    progress: Callable[[str], None] | None = None,
    *,
    prepared: Collection[str] = (),
) -> tuple[Path, list[str]]:
    """Write one workbook with one sheet per table; returns the path and notes.

    Every sheet has a bold, frozen header row with an autofilter and column
    widths fitted to the first rows. Text cells are neutralised (see module
    docstring) and always written as strings, never as formulas or links;
    numbers as numbers, NaN as an empty cell, infinities as the text ``inf`` /
    ``−inf``. ``max_rows`` counts the header; tables longer than a sheet
    continue on further sheets.

    With ``descriptions`` (table name -> a sentence), a first sheet
    ``contents`` lists every table: its first sheet, full name, rows and
    description (sheet names are cut to 31 characters; the full names are here).
    ``progress`` is called with a short message before each table.
    ``prepared`` names the tables that are already the output of
    :func:`spreadsheet_frame` (a caller writing them to CSV too made them safe once).
    """
    import xlsxwriter

    if max_rows < 2:
        raise ValueError("max_rows must leave room for a header and one row")
    for name, frame in tables.items():
        if frame.shape[1] > EXCEL_MAX_COLUMNS:
            raise OutputError(
                f"table '{name}' has {frame.shape[1]:,} columns; a spreadsheet sheet holds "
                f"{EXCEL_MAX_COLUMNS:,}; drop 'xlsx' from export.formats or use the CSV/Parquet output"
            )
    used: set[str] = {"contents"} if descriptions is not None else set()
    per_sheet = max_rows - 1
    layout = {}
    for name, frame in tables.items():
        chunks = max(1, math.ceil(len(frame) / per_sheet))
        layout[name] = [sheet_name(name if k == 0 else f"{name} ({k + 1})", used) for k in range(chunks)]
    notes: list[str] = [
        f"table '{name}' has {len(tables[name]):,} rows; a sheet holds {per_sheet:,} below its header, "
        f"so it continues on {len(sheets)} sheets"
        for name, sheets in layout.items()
        if len(sheets) > 1
    ]
    with atomic_path(path) as tmp:
        workbook = xlsxwriter.Workbook(
            str(tmp),
            {
                "strings_to_formulas": False,
                "strings_to_urls": False,
                "strings_to_numbers": False,
                "constant_memory": True,
                "use_zip64": True,
            },
        )
        # A fixed creation date keeps the file's bytes the same for the same data.
        workbook.set_properties({"created": _dt.datetime(2000, 1, 1)})
        bold = workbook.add_format({"bold": True})
        try:
            if descriptions is not None:
                contents = pd.DataFrame(
                    {
                        "sheet": [sheets[0] for sheets in layout.values()],
                        "table": list(tables),
                        "rows": [len(frame) for frame in tables.values()],
                        "description": [descriptions.get(name, "") for name in tables],
                    }
                )
                contents = spreadsheet_frame(contents)
                notes.extend(_write_sheets(workbook, bold, "contents", contents, ["contents"], per_sheet))
            for number, (name, frame) in enumerate(tables.items()):
                if progress is not None:
                    progress(f"{path.name}: sheet {number + 1:,} of {len(tables):,}")
                safe = frame if name in prepared else spreadsheet_frame(frame)
                notes.extend(_write_sheets(workbook, bold, name, safe, layout[name], per_sheet))
        finally:
            try:
                workbook.close()
            except xlsxwriter.exceptions.FileCreateError as exc:
                # XlsxWriter wraps the OSError (disk full, permission) that atomic_path turns into a one-line message
                cause = exc.args[0] if exc.args else None
                raise cause if isinstance(cause, OSError) else OSError(str(exc)) from None
    return path, notes


def _fit_strings(cells: list[Any]) -> int:
    """Cut over-long strings in place (see :func:`fit_cell`); returns how many were cut."""
    cut = 0
    for position, value in enumerate(cells):
        if isinstance(value, str) and len(value) > EXCEL_MAX_CELL_CHARS // 2:
            cells[position], was_cut = fit_cell(value)
            cut += was_cut
    return cut


def _column_cells(series: pd.Series) -> tuple[str, list[Any], int]:
    """One column ready to write: its kind, its cells (``None`` = empty) and how many were cut.

    Preparing whole columns keeps the per-cell loop to one call into XlsxWriter.
    """
    dtype = series.dtype
    if pd.api.types.is_bool_dtype(dtype):
        return "bool", series.astype(object).where(series.notna(), None).tolist(), 0
    if pd.api.types.is_numeric_dtype(dtype):
        values = series.to_numpy(dtype=np.float64, na_value=np.nan)
        cells: list[Any] = values.tolist()
        for position in np.flatnonzero(np.isnan(values)):
            cells[position] = None
        # Infinities are written as text by the mixed-cell writer.
        return ("number" if not np.isinf(values).any() else "mixed"), cells, 0
    cells = series.tolist()
    # Missing text (None, NaN of a pandas string column, NA, NaT) is an empty cell: None marks it.
    for position in np.flatnonzero(series.isna().to_numpy(dtype=bool)).tolist():
        cells[position] = None
    cut = _fit_strings(cells)
    kind = "text" if all(v is None or isinstance(v, str) for v in cells) else "mixed"
    return kind, cells, cut


def _write_sheets(
    workbook: Any, bold: Any, name: str, safe: pd.DataFrame, sheets: list[str], per_sheet: int
) -> list[str]:
    """Write one spreadsheet-safe table (see :func:`spreadsheet_frame`) on ``sheets``; returns notes."""
    headers = [str(c) for c in safe.columns]
    columns = [_column_cells(safe.iloc[:, col]) for col in range(safe.shape[1])]
    cut = sum(c[2] for c in columns)
    for chunk, title in enumerate(sheets):
        start, stop = chunk * per_sheet, min((chunk + 1) * per_sheet, len(safe))
        sheet = workbook.add_worksheet(title)
        # The cells are typed and in bounds already: XlsxWriter's undecorated writers skip its
        # A1-notation check (a fifth of the time per cell); the public ones where a version lacks them.
        writers = {
            "bool": getattr(sheet, "_write_boolean", sheet.write_boolean),
            "number": getattr(sheet, "_write_number", sheet.write_number),
            "text": getattr(sheet, "_write_string", sheet.write_string),
            "mixed": functools.partial(_write_cell, sheet),
        }
        for col, header in enumerate(headers):
            sheet.set_column(col, col, _width(columns[col][1][start : start + 200], header))
            sheet.write_string(0, col, header, bold)
        if _rows_fast_apply(sheet, columns):
            _write_rows_fast(sheet, columns, start, stop)
        else:
            plan = [(col, writers[kind], cells) for col, (kind, cells, _cut) in enumerate(columns)]
            for r in range(start, stop):
                row = r - start + 1
                for col, write, cells in plan:
                    value = cells[r]
                    if value is not None:
                        write(row, col, value)
        sheet.freeze_panes(1, 0)
        if headers:
            sheet.autofilter(0, 0, max(stop - start, 1), len(headers) - 1)
    if cut:
        return [
            f"table '{name}': {cut} cell(s) longer than {EXCEL_MAX_CELL_CHARS:,} characters were cut in the "
            "XLSX file; the CSV, JSON and Parquet outputs keep the full text"
        ]
    return []


#: Rows whose XML :func:`_write_rows_fast` builds at a time.
_FAST_BLOCK_ROWS = 10_000


def _xlsx_plain(text: str) -> bool:
    """Whether XlsxWriter writes ``text`` as is: nothing to escape and no ``xml:space``.

    Printable (no control character, no U+FFFE/U+FFFF), no ``_x`` (its
    ``_xHHHH_`` escape), no ``& < >`` (XML markup; ``<r>`` starts its rich
    text) and no white space at either end. Conservative: anything else takes
    XlsxWriter's own escaping.
    """
    return (
        text.isprintable()
        and not (text[:1].isspace() or text[-1:].isspace())
        and "&" not in text
        and "<" not in text
        and ">" not in text
        and "_x" not in text
    )


def _rows_fast_apply(sheet: Any, columns: list[tuple[str, list[Any], int]]) -> bool:
    """Whether :func:`_write_rows_fast` can write this sheet's rows (else the per-cell writers do).

    It needs XlsxWriter's constant-memory mode with the row state it keeps
    (checked by name, so another version falls back to the per-cell path), no
    row formats, and plain kinds of column (text, number, bool).
    """
    needed = ("_write_single_row", "_check_dimensions", "_escape_control_characters", "_escape_data", "fh", "previous_row")
    return (
        getattr(sheet, "constant_memory", False) is True
        and all(hasattr(sheet, name) for name in needed)
        and getattr(sheet, "excel_version", None) == 2007
        and not getattr(sheet, "row_info", True)
        and getattr(sheet, "default_row_height", None) == getattr(sheet, "original_row_height", 0)
        and sheet.previous_row == 0
        and all(kind in ("text", "number", "bool") for kind, _cells, _cut in columns)
    )


def _write_rows_fast(sheet: Any, columns: list[tuple[str, list[Any], int]], start: int, stop: int) -> None:
    """Write rows ``start..stop-1`` of ``columns`` below the header: the XML XlsxWriter writes, built column-wise.

    XlsxWriter spends about ten microseconds per cell (a call, a stored tuple,
    then the cell's XML from a generic writer). Here each column's cells are
    formatted in one comprehension and each row joined once; the text is
    exactly what its per-cell writers produce in constant-memory mode (a test
    compares the files byte for byte): numbers as ``{:.16G}``, booleans as
    ``t="b"`` 1/0, text as an in-line string, escaped by XlsxWriter's own
    functions unless plain. Empty cells (``None``) are left out, and a row
    without cells is not written, as XlsxWriter does. One difference: text
    shaped like XlsxWriter's rich-string XML (``<r>...</r>``) is escaped as
    text instead of copied raw (raw, it can make the workbook unreadable).
    """
    import xlsxwriter.utility

    escape_control, escape_data = sheet._escape_control_characters, sheet._escape_data
    preserve = xlsxwriter.utility.RE_LEADING_WHITESPACE, xlsxwriter.utility.RE_TRAILING_WHITESPACE

    def text_cell(text: str) -> str:
        if _xlsx_plain(text):
            return f' t="inlineStr"><is><t>{text}</t></is></c>'
        text = escape_control(text)
        # XlsxWriter's per-cell writer copies text that starts with "<r>" and ends with "</r>" into
        # the XML unescaped (its rich-string form), which breaks the workbook for a cell such as
        # "<r><b>x</r>"; here it is escaped like any other text, so the cell holds the text as is.
        space = ' xml:space="preserve"' if preserve[0].search(text) or preserve[1].search(text) else ""
        return f' t="inlineStr"><is><t{space}>{escape_data(text)}</t></is></c>'

    letters = [xlsxwriter.utility.xl_col_to_name(col) for col in range(len(columns))]
    sheet._write_single_row(1)  # the header row (row 0) goes out; row 1 is next
    last = 0
    for block in range(start, stop, _FAST_BLOCK_ROWS):
        end = min(block + _FAST_BLOCK_ROWS, stop)
        numbers = range(block - start + 2, end - start + 2)  # row numbers as written (1-based)
        texts = []
        for letter, (kind, cells, _cut) in zip(letters, columns, strict=True):
            part = cells[block:end]
            if kind == "number":
                texts.append(["" if v is None else f'<c r="{letter}{n}"><v>{v:.16G}</v></c>' for n, v in zip(numbers, part)])
            elif kind == "bool":
                texts.append(["" if v is None else f'<c r="{letter}{n}" t="b"><v>{1 if v else 0}</v></c>' for n, v in zip(numbers, part)])
            else:
                texts.append(["" if v is None else f'<c r="{letter}{n}"' + text_cell(v) for n, v in zip(numbers, part)])
        rows = []
        for n, cells in zip(numbers, zip(*texts)):
            body = "".join(cells)
            if body:
                rows.append(f'<row r="{n}">{body}</row>')
                last = n
        sheet.fh.write("".join(rows))
    if last:
        sheet._check_dimensions(last - 1, 0)  # the sheet's dimension ends at the last row written
    sheet.previous_row = max(last - 1, 1)


def _write_cell(sheet: Any, row: int, col: int, value: Any) -> None:
    """One cell of a mixed column: by the value's own type."""
    if value is None or value is pd.NA or value is pd.NaT:
        return
    if isinstance(value, (bool, np.bool_)):
        sheet.write_boolean(row, col, bool(value))
    elif isinstance(value, (int, float, np.integer, np.floating)):
        number = float(value)
        if math.isinf(number):
            sheet.write_string(row, col, "inf" if number > 0 else "\u2212inf")
        elif not math.isnan(number):
            sheet.write_number(row, col, number)
    elif isinstance(value, (pd.Timestamp, _dt.datetime, _dt.date)):
        sheet.write_string(row, col, value.isoformat())
    else:
        sheet.write_string(row, col, fit_cell(str(value))[0])  # strings were fitted already; others now


# --------------------------------------------------------------------------- Stata

#: Stata's reserved names (Stata 18 manual, [U] 11.3 "Naming conventions") [recalled from memory].
_STATA_RESERVED = frozenset(
    "_all _b byte _coef _cons double float if in int long _n _N _pi _pred _rc _skip strL using with".split()
)


def stata_names(names: Iterable[str]) -> list[str]:
    """Valid, unique Stata variable names for ``names``, in order.

    Accents are dropped (NFKD), other characters become ``_``; a name must
    start with a letter or ``_``, is at most 32 characters and is not one of
    Stata's reserved words; clashes (compared case-insensitively) get ``_2``,
    ``_3``...
    """
    out: list[str] = []
    taken: set[str] = set()
    for original in names:
        ascii_name = unicodedata.normalize("NFKD", str(original)).encode("ascii", "ignore").decode("ascii")
        name = re.sub(r"[^A-Za-z0-9_]+", "_", ascii_name).strip("_") or "v"
        if not (name[0].isalpha() or name[0] == "_"):
            name = "v_" + name
        if name in _STATA_RESERVED or re.fullmatch(r"str\d+", name):
            name = name + "_"
        name = name[:32]
        candidate, number = name, 2
        while candidate.lower() in taken:
            suffix = f"_{number}"
            candidate = name[: 32 - len(suffix)] + suffix
            number += 1
        taken.add(candidate.lower())
        out.append(candidate)
    return out


def write_stata(path: Path, table: pd.DataFrame, label: str = "", time_stamp: _dt.datetime | None = None) -> Path:
    """Write ``table`` as Stata format 118 (UTF-8) with valid names and the originals as labels.

    Strings longer than 2,045 bytes (Stata's ``str#`` limit) are stored as ``strL``.
    Missing text is written as an empty string (Stata has no missing string).
    ``label`` (at most 80 characters) and ``time_stamp`` go into the file header.
    """
    frame = table.copy()
    originals = [str(c) for c in frame.columns]
    names = stata_names(originals)
    frame.columns = names
    strl = []
    for name in names:
        column = frame[name]
        if pd.api.types.is_bool_dtype(column.dtype):
            frame[name] = column.astype(np.int8)
        elif not (pd.api.types.is_numeric_dtype(column.dtype)):
            text = column.astype(object).map(lambda v: "" if v is None or (isinstance(v, float) and np.isnan(v)) else str(v))
            text = text.map(lambda s: s.replace("\x00", ""))
            frame[name] = text.astype(object)
            if len(text) and text.map(lambda s: len(s.encode("utf-8"))).max() > 2045:
                strl.append(name)
    labels = {name: original[:80] for name, original in zip(names, originals, strict=True) if name != original}
    stamp = (time_stamp or _dt.datetime.now(_dt.UTC)).replace(tzinfo=None)
    with atomic_path(path) as tmp:
        frame.to_stata(
            str(tmp),
            write_index=False,
            version=118,
            convert_strl=strl,
            variable_labels=labels,
            data_label=label[:80],
            time_stamp=stamp,
        )
    return path
