"""JSON Lines: one JSON object per line (RFC 8259 for each line; blank lines are skipped).

Record numbers are line numbers, so the ledger points straight at the line.
A line that is not valid JSON, or not an object, is dropped with a ledger
entry (``bad_json``) and the rest of the file is read. Values become strings:
``null`` and missing keys as ``""``, ``true``/``false`` as written, numbers as
written, nested arrays and objects as compact JSON.
"""

from __future__ import annotations

import json
import re
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import numpy as np

from workbench.core.corpus import ImportReport
from workbench.core.readers.base import Chunk, Opened, RowProblem, columns_frame
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


#: A JSON escape of a UTF-16 surrogate (RFC 8259 §7); ``json`` pairs valid ones and
#: leaves a lone half in the string, which Arrow (UTF-8 only) refuses.
_SURROGATE = re.compile(r"\\u[dD][89a-fA-F]")
_LONE = re.compile("[\ud800-\udfff]")


def _without_lone_surrogates(value: dict[str, Any]) -> tuple[dict[str, str], int]:
    """The record's keys and values as text, each lone surrogate replaced by U+FFFD; and how many there were."""
    found = 0
    clean: dict[str, str] = {}
    for key, item in value.items():
        pair = []
        for text in (str(key), _text(item)):
            hits = len(_LONE.findall(text))
            found += hits
            pair.append(_LONE.sub("\ufffd", text) if hits else text)
        clean[pair[0]] = pair[1]
    return clean, found


def open_jsonl(source: Source, report: ImportReport, *, chunk_rows: int, full: bool = True) -> Opened:
    path = Path(source.path)
    check_readable_file(path, "JSON Lines file")
    scan = scan_file(path, source.encoding, what="JSON Lines file", full=full)
    report.encoding = scan.encoding
    report.sha256 = scan.sha256
    report.notes.extend(scan.notes)
    return Opened(columns=None, chunks=_chunks(path, scan.encoding, chunk_rows), expected_rows=scan.newlines)


def _chunks(path: Path, codec: str, chunk_rows: int) -> Iterator[Chunk]:
    # Values go straight into per-column lists (one pass, no per-record dicts kept);
    # a column first met late is padded with "" for the records before it.
    columns: dict[str, list[str]] = {}
    rows: list[int] = []
    problems: list[RowProblem] = []
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
            except (RecursionError, ValueError) as exc:  # nesting past the stack; a number past int()'s digit limit
                what = "nests arrays or objects too deeply" if isinstance(exc, RecursionError) else "holds a number with thousands of digits"
                problems.append(RowProblem(
                    number, "dropped", "bad_json", f"line {number} {what} to read; the line was skipped, the rest read",
                ))
                continue
            if not isinstance(value, dict):
                problems.append(RowProblem(
                    number, "dropped", "bad_json",
                    f"line {number} holds a JSON {type(value).__name__}, not an object; the line was skipped, the rest read",
                ))
                continue
            count = len(rows)
            if "\\u" in line and _SURROGATE.search(line):
                value, found = _without_lone_surrogates(value)
                if found:
                    problems.append(RowProblem(
                        number, "flagged", "lone_surrogate",
                        f"line {number} holds {found} \\u escape(s) of half a UTF-16 pair, which no text can store; "
                        "each became U+FFFD (\ufffd), the rest of the line was read", count,
                    ))
            for key, item in value.items():
                column = columns.get(key)
                if column is None:
                    column = columns[key] = [""] * count
                column.append(item if isinstance(item, str) else _text(item))
            rows.append(number)
            if len(value) != len(columns):
                for column in columns.values():
                    if len(column) == count:
                        column.append("")
            if len(rows) >= chunk_rows:
                yield _chunk(columns, rows, problems)
                columns = {name: [] for name in columns}
                rows, problems = [], []
    if rows or problems:
        yield _chunk(columns, rows, problems)


def _chunk(columns: dict[str, list[str]], rows: list[int], problems: list[RowProblem]) -> Chunk:
    return Chunk(columns_frame(columns), np.asarray(rows, dtype=np.int64), problems)
