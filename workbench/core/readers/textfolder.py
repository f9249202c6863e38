"""A folder of ``.txt`` files: one answer per file, the file name (without ``.txt``) as id.

Files are taken in name order, non-recursively; other files are ignored (and
counted in the report). Each file is decoded with the same rules as a CSV
file. A file that cannot be decoded, or is binary, is dropped with a ledger
entry and the others are read. The folder's checksum is the SHA-256 of the
lines ``<name> <sha256 of file>`` in name order.
"""

from __future__ import annotations

import hashlib
from collections.abc import Iterator
from pathlib import Path

import numpy as np
import pandas as pd

from workbench.core.corpus import ImportReport
from workbench.core.errors import InputError
from workbench.core.readers.base import Chunk, Opened, RowProblem
from workbench.core.readers.encoding import decode_bytes
from workbench.core.settings import Source

ID_COLUMN = "file"
TEXT_COLUMN = "text"


def list_text_files(folder: Path) -> tuple[list[Path], int]:
    """``.txt`` files in name order, and the number of other entries ignored."""
    if not folder.exists():
        raise InputError(
            f"{folder} does not exist; fix sources.path in the study (relative paths start at the study file's folder)"
        )
    if not folder.is_dir():
        raise InputError(
            f"{folder} is a file, but format = 'txt' reads a folder of .txt files; set format = 'auto' or 'csv' for a single file"
        )
    try:
        entries = sorted(folder.iterdir(), key=lambda p: p.name)
    except OSError as exc:
        raise InputError(f"{folder} cannot be listed ({exc.strerror or exc}); check the folder's permissions") from None
    files = [p for p in entries if p.suffix.lower() == ".txt" and p.is_file()]
    if not files:
        raise InputError(
            f"{folder} holds no .txt files ({len(entries)} other entries); put one answer per .txt file there, "
            "or point sources.path at a data file"
        )
    return files, len(entries) - len(files)


def open_text_folder(source: Source, report: ImportReport, *, chunk_rows: int, full: bool = True) -> Opened:
    folder = Path(source.path)
    files, ignored = list_text_files(folder)
    report.columns = [ID_COLUMN, TEXT_COLUMN]
    if ignored:
        report.notes.append(f"{ignored} entries that are not .txt files were ignored")
    return Opened(
        columns=[ID_COLUMN, TEXT_COLUMN],
        chunks=_chunks(files, source.encoding, report, chunk_rows, full),
        expected_rows=len(files),
    )


def _chunks(files: list[Path], forced: str, report: ImportReport, chunk_rows: int, full: bool) -> Iterator[Chunk]:
    digest = hashlib.sha256()
    ids: list[str] = []
    texts: list[str] = []
    rows: list[int] = []
    problems: list[RowProblem] = []
    guessed: list[str] = []
    for number, path in enumerate(files, start=1):
        try:
            data = path.read_bytes()
        except OSError as exc:
            problems.append(RowProblem(number, "dropped", "unreadable", f"{path.name} cannot be read ({exc.strerror or exc})"))
            continue
        if full:
            digest.update(f"{path.name} {hashlib.sha256(data).hexdigest()}\n".encode())
        try:
            text, _codec, note = decode_bytes(data, forced, where=path.name)
        except InputError as exc:
            problems.append(RowProblem(number, "dropped", "undecodable", f"{exc}; the file was skipped"))
            continue
        if note:
            guessed.append(note)
        ids.append(path.stem)
        texts.append(text)
        rows.append(number)
        if len(ids) >= chunk_rows:
            yield Chunk(pd.DataFrame({ID_COLUMN: ids, TEXT_COLUMN: texts}, dtype=str), np.asarray(rows, dtype=np.int64), problems)
            ids, texts, rows, problems = [], [], [], []
    if ids or problems:
        yield Chunk(pd.DataFrame({ID_COLUMN: ids, TEXT_COLUMN: texts}, dtype=str), np.asarray(rows, dtype=np.int64), problems)
    report.sha256 = digest.hexdigest() if full else ""
    report.encoding = "per file"
    if guessed:
        report.notes.append(
            f"warning: {len(guessed)} files are not UTF-8 and were decoded by guess (e.g. {guessed[0]}); "
            "set sources.encoding if accented letters look wrong"
        )
