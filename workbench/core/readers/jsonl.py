"""JSON Lines: one JSON object per line (RFC 8259 for each line; blank lines are skipped).

Record numbers are line numbers, so the ledger points straight at the line.
A line that is not valid JSON, or not an object, is dropped with a ledger
entry (``bad_json``) and the rest of the file is read. Values become strings:
``null`` and missing keys as ``""``, ``true``/``false`` as written, numbers as
written, nested arrays and objects as compact JSON.
"""

from __future__ import annotations

import json
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import numpy as np

from workbench.core.corpus import ImportReport
from workbench.core.readers.base import Chunk, Opened, RowProblem, string_frame
from workbench.core.readers.encoding import scan_file
from workbench.core.readers.files import check_readable_file
from workbench.core.settings import Source


def _text(value: Any) -> str:
    if isinstance(value, str):
        return value
    if value is None:
        return ""
    if value is True:
        return "true"
    if value is False:
        return "false"
    if isinstance(value, int | float):
        return json.dumps(value)
    return json.dumps(value, ensure_ascii=False, separators=(",", ":"))


def open_jsonl(source: Source, report: ImportReport, *, chunk_rows: int, full: bool = True) -> Opened:
    path = Path(source.path)
    check_readable_file(path, "JSON Lines file")
    scan = scan_file(path, source.encoding, what="JSON Lines file", full=full)
    report.encoding = scan.encoding
    report.sha256 = scan.sha256
    report.notes.extend(scan.notes)
    return Opened(columns=None, chunks=_chunks(path, scan.encoding, chunk_rows), expected_rows=scan.newlines)


def _chunks(path: Path, codec: str, chunk_rows: int) -> Iterator[Chunk]:
    records: list[dict[str, str]] = []
    rows: list[int] = []
    problems: list[RowProblem] = []
    seen: dict[str, None] = {}
    with path.open(encoding=codec, newline="") as handle:
        for number, line in enumerate(handle, start=1):
            if not line.strip():
                continue
            try:
                value = json.loads(line)
            except json.JSONDecodeError as exc:
                problems.append(RowProblem(
                    number, "dropped", "bad_json",
                    f"line {number} is not valid JSON ({exc.msg} at column {exc.colno}); the line was skipped, the rest read",
                ))
                continue
            if not isinstance(value, dict):
                problems.append(RowProblem(
                    number, "dropped", "bad_json",
                    f"line {number} holds a JSON {type(value).__name__}, not an object; the line was skipped, the rest read",
                ))
                continue
            record = {str(key): _text(item) for key, item in value.items()}
            for key in record:
                if key not in seen:
                    seen[key] = None
            records.append(record)
            rows.append(number)
            if len(records) >= chunk_rows:
                yield _chunk(records, rows, problems, list(seen))
                records, rows, problems = [], [], []
    if records or problems:
        yield _chunk(records, rows, problems, list(seen))


def _chunk(records: list[dict[str, str]], rows: list[int], problems: list[RowProblem], columns: list[str]) -> Chunk:
    table = [[record.get(name, "") for name in columns] for record in records]
    return Chunk(string_frame(table, columns), np.asarray(rows, dtype=np.int64), problems)
