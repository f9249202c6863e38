"""XLSX workbooks through openpyxl in read-only mode, one sheet by name or 0-based index.

An .xlsx file is a ZIP archive of XML parts (ECMA-376 Part 2, Open Packaging
Conventions). Before openpyxl sees it, the archive directory is checked: a
small file that would unpack to gigabytes (a "decompression bomb") is refused.
Python's zipfile never inflates a member beyond the size its directory entry
declares, so checking the declared sizes is enough.

Cells become strings: whole numbers without a decimal point, dates in ISO
8601, empty cells as ``""``. Formulas give their last computed value. Rows
with no value at all are not records (spreadsheets keep formatted empty rows).
"""

from __future__ import annotations

import datetime as dt
import itertools
import warnings
import zipfile
from collections.abc import Iterator
from pathlib import Path
from typing import Any


from workbench.core.corpus import ImportReport
from workbench.core.errors import InputError, did_you_mean
from workbench.core.readers.base import Chunk, ChunkBuilder, Opened, preview, repair_header
from workbench.core.readers.files import check_readable_file, describe_magic, read_head, sha256_of
from workbench.core.settings import Source

#: Largest total unpacked size accepted (bytes). A million answers in ten
#: columns unpack to well under this.
MAX_UNPACKED = 2 * 1024**3
#: Largest unpacked/packed ratio accepted for any sizeable member; sheet XML
#: compresses about 10-100x, bombs by a thousand or more.
MAX_RATIO = 1000
_RATIO_MIN_BYTES = 10 * 1024**2


def _check_archive(path: Path) -> None:
    head = read_head(path, 8)
    if not head.startswith(b"PK"):
        kind = describe_magic(head)
        if kind and "ZIP" not in kind:
            raise InputError(f"{path} looks like {kind}, not an XLSX workbook; save it as .xlsx or CSV")
    try:
        with zipfile.ZipFile(path) as archive:
            members = archive.infolist()
    except zipfile.BadZipFile as exc:
        raise InputError(
            f"{path} is not a readable XLSX workbook ({exc}); it may be truncated or another format — save it again as .xlsx"
        ) from None
    total = sum(m.file_size for m in members)
    if total > MAX_UNPACKED:
        raise InputError(
            f"{path} would unpack to {total / 1024**3:.1f} GiB (limit {MAX_UNPACKED / 1024**3:.1f} GiB); refusing a possible "
            "decompression bomb — if the workbook is genuine, save the sheet as CSV"
        )
    for member in members:
        if member.file_size > _RATIO_MIN_BYTES and member.file_size > MAX_RATIO * max(member.compress_size, 1):
            raise InputError(
                f"{path}: part {member.filename} unpacks {member.file_size // max(member.compress_size, 1):,} times its "
                "packed size; refusing a possible decompression bomb — if the workbook is genuine, save the sheet as CSV"
            )


def _text(value: Any) -> str:
    if value is None:
        return ""
    if isinstance(value, str):
        return value
    if isinstance(value, bool):
        return "TRUE" if value else "FALSE"
    if isinstance(value, float) and value.is_integer() and abs(value) < 2**53:
        return str(int(value))
    if isinstance(value, dt.datetime | dt.date | dt.time):
        return value.isoformat()
    return str(value)


def open_xlsx(source: Source, report: ImportReport, *, chunk_rows: int, full: bool = True) -> Opened:
    """Open one sheet of a workbook; fill ``report``."""
    import openpyxl  # imported here: only XLSX sources pay for it

    path = Path(source.path)
    check_readable_file(path, "XLSX workbook")
    _check_archive(path)
    report.sha256 = sha256_of(path) if full else ""
    caught: list[warnings.WarningMessage] = []
    try:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            book = openpyxl.load_workbook(path, read_only=True, data_only=True)
    except Exception as exc:  # openpyxl raises many kinds on damaged parts; all mean the same to the user
        raise InputError(
            f"{path} is not a readable XLSX workbook ({type(exc).__name__}: {exc}); save it again as .xlsx"
        ) from None
    report.notes.extend(f"openpyxl: {w.message}" for w in caught)
    sheets = book.sheetnames
    sheet = source.sheet
    if isinstance(sheet, int):
        if not 0 <= sheet < len(sheets):
            book.close()
            raise InputError(
                f"{path} has {len(sheets)} sheet(s) ({', '.join(sheets)}); sources.sheet = {sheet} is out of range "
                f"(0 is the first sheet)"
            )
        title = sheets[sheet]
    else:
        if sheet not in sheets:
            book.close()
            raise InputError(
                f"{path} has no sheet '{sheet}'{did_you_mean(sheet, sheets)}; sheets: {', '.join(sheets)}"
            )
        title = sheet
    report.sheet = title
    rows = book[title].iter_rows(values_only=True)

    block: list[tuple[Any, ...]] = []

    def next_values() -> tuple[Any, ...] | None:
        # rows are pulled a block at a time: entering catch_warnings per row would cost more than the parsing
        if not block:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                try:
                    block.extend(itertools.islice(rows, 2000))
                except Exception as exc:  # damaged sheet XML surfaces mid-read
                    book.close()
                    raise InputError(f"{path}: sheet '{title}' cannot be read ({type(exc).__name__}: {exc}); save it again") from None
            block.reverse()
        return block.pop() if block else None

    header: tuple[Any, ...] | None = None
    while (values := next_values()) is not None:
        if any(v is not None and str(v).strip() for v in values):
            header = values
            break
    if header is None:
        book.close()
        others = [n for n in sheets if n != title]
        raise InputError(
            f"sheet '{title}' of {path} is empty; choose the sheet that holds the answers with sources.sheet"
            + (f" (other sheets: {', '.join(others)})" if others else "")
        )
    # read-only mode pads rows to the sheet's used range; unnamed trailing header cells are padding.
    cells = list(header)
    while cells and (cells[-1] is None or not str(cells[-1]).strip()):
        cells.pop()
    columns, duplicated, notes = repair_header(cells)
    report.columns = columns
    report.notes.extend(notes)
    return Opened(columns=columns, chunks=_chunks(book, next_values, columns, chunk_rows), duplicated=duplicated)


def _chunks(book: Any, next_values: Any, names: list[str], chunk_rows: int) -> Iterator[Chunk]:
    width = len(names)
    number = 0
    builder = ChunkBuilder(names, chunk_rows)
    try:
        while (values := next_values()) is not None:
            cells = [_text(v) for v in values]
            if not any(c.strip() for c in cells):
                continue
            number += 1
            if len(cells) > width:
                extra = [c for c in cells[width:] if c.strip()]
                if extra:
                    builder.flag(number, "ragged_row",
                                 f"record {number} has values right of the last named column; dropped {preview(extra, ' | ')!r}")
                del cells[width:]
            elif len(cells) < width:
                cells.extend([""] * (width - len(cells)))
            if chunk := builder.add(cells, number):
                yield chunk
        if chunk := builder.flush():
            yield chunk
    finally:
        book.close()
