"""One reader per input format; :func:`open_source` picks the right one.

Every reader returns an :class:`~workbench.core.readers.base.Opened` source
whose chunks are tables of strings (``"NA"`` typed by a respondent stays the
text "NA"), with 1-based record numbers and any per-record problems.
"""

from __future__ import annotations

from pathlib import Path

from workbench.core.corpus import ImportReport
from workbench.core.errors import InputError
from workbench.core.readers.base import CHUNK_ROWS, Chunk, Opened, RowProblem
from workbench.core.readers.delimited import open_delimited
from workbench.core.readers.files import describe_magic, read_head
from workbench.core.readers.jsonl import open_jsonl
from workbench.core.readers.parquet import open_parquet
from workbench.core.readers.textfolder import open_text_folder
from workbench.core.readers.xlsx import open_xlsx
from workbench.core.settings import Source

__all__ = ["CHUNK_ROWS", "Chunk", "Opened", "RowProblem", "detect_format", "open_source"]

#: File name endings and the format they mean.
EXTENSIONS = {
    ".csv": "csv",
    ".txt": "csv",
    ".tsv": "tsv",
    ".tab": "tsv",
    ".xlsx": "xlsx",
    ".xlsm": "xlsx",
    ".jsonl": "jsonl",
    ".ndjson": "jsonl",
    ".json": "jsonl",
    ".parquet": "parquet",
    ".pq": "parquet",
}


def detect_format(source: Source) -> str:
    """The format to read ``source`` as: the study's choice, else by name ending, else by content."""
    path = Path(source.path)
    if source.format != "auto":
        return source.format
    if path.is_dir():
        return "txt"
    suffix = path.suffix.lower()
    if suffix == ".xls":
        raise InputError(f"{path} is an old Excel 97-2003 workbook; save it as .xlsx or CSV and point sources.path at that")
    if suffix in EXTENSIONS:
        return EXTENSIONS[suffix]
    if path.is_file():
        try:
            head = read_head(path, 8)
        except OSError:
            return "csv"  # the reader reports the permission problem
        if head.startswith(b"PK\x03\x04"):
            return "xlsx"
        if head.startswith(b"PAR1"):
            return "parquet"
        if head.lstrip()[:1] == b"{":
            return "jsonl"
        if describe_magic(head):
            return "csv"  # the CSV reader names the binary format in its error
    return "csv"


def open_source(
    source: Source,
    report: ImportReport,
    *,
    text_columns: list[str] | None = None,
    chunk_rows: int = CHUNK_ROWS,
    full: bool = True,
) -> Opened:
    """Open ``source`` with the reader its format needs and record decisions in ``report``.

    ``full=False`` skips whole-file passes (checksums, full encoding check); it
    is for peeking at the first rows, never for a run.
    """
    kind = report.format
    if kind in ("csv", "tsv"):
        return open_delimited(source, report, tab=kind == "tsv", chunk_rows=chunk_rows, full=full)
    if kind == "xlsx":
        return open_xlsx(source, report, chunk_rows=chunk_rows, full=full)
    if kind == "jsonl":
        return open_jsonl(source, report, chunk_rows=chunk_rows, full=full)
    if kind == "parquet":
        return open_parquet(source, report, text_columns=text_columns or [], chunk_rows=chunk_rows, full=full)
    if kind == "txt":
        return open_text_folder(source, report, chunk_rows=chunk_rows, full=full)
    raise InputError(f"unknown format '{kind}' for {source.path}; use csv, tsv, xlsx, jsonl, parquet or txt")
