"""What every reader hands to ingest: chunks of string tables plus per-row problems."""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
import pyarrow as pa

from workbench.core.ledger import Status

#: Rows per chunk: large enough for vectorised work to pay off, small enough
#: that a million-row file never sits in memory twice.
CHUNK_ROWS = 100_000


@dataclass(frozen=True)
class RowProblem:
    """Something a reader noticed about one input record.

    ``index`` is the record's position in its chunk's frame, or ``None`` when the
    record could not be read at all (then ``status`` is ``"dropped"``).
    """

    row: int
    status: Status
    code: str
    message: str
    index: int | None = None


@dataclass
class Chunk:
    """Consecutive records of one source as strings; ``rows`` holds their 1-based record numbers."""

    frame: pd.DataFrame
    rows: np.ndarray
    problems: list[RowProblem] = field(default_factory=list)


@dataclass
class Opened:
    """A source whose header (if it has one) has been read; ``chunks`` yields the records.

    ``columns`` is ``None`` when the format has no header and columns appear as
    they are met (JSON Lines). ``duplicated`` maps a column name that occurred
    more than once to its 1-based positions; the later copies were renamed.
    """

    columns: list[str] | None
    chunks: Iterator[Chunk]
    duplicated: dict[str, list[int]] = field(default_factory=dict)
    #: Rough number of records for progress bars; 0 when unknown.
    expected_rows: int = 0


def repair_header(raw: list[object]) -> tuple[list[str], dict[str, list[int]], list[str]]:
    """Make column names usable: trim spaces, name blank ones, rename repeats.

    Returns ``(names, duplicated, notes)``. A blank name becomes ``column_<k>``
    (k = 1-based position) — R writes a blank header over its row names, so this
    is common and harmless; a repeated name keeps its first occurrence and later
    copies become ``<name> (2)``, ``<name> (3)``; ingest refuses a repeated name
    only when the study uses it, because then it cannot know which copy is meant.
    """
    names: list[str] = []
    notes: list[str] = []
    trimmed = []
    blank = []
    for position, value in enumerate(raw, start=1):
        text = "" if value is None else str(value)
        name = text.strip()
        if name != text and name:
            trimmed.append(name)
        if not name:
            name = f"column_{position}"
            blank.append(position)
        names.append(name)
    positions: dict[str, list[int]] = {}
    for position, name in enumerate(names, start=1):
        positions.setdefault(name, []).append(position)
    duplicated = {name: where for name, where in positions.items() if len(where) > 1}
    taken = set(names)
    for name, where in duplicated.items():
        for copy, position in enumerate(where[1:], start=2):
            new = f"{name} ({copy})"
            while new in taken:
                new += "'"
            taken.add(new)
            names[position - 1] = new
    if trimmed:
        notes.append(f"spaces trimmed from column names: {', '.join(trimmed[:5])}{' ...' if len(trimmed) > 5 else ''}")
    if blank:
        notes.append(f"columns without a name at positions {', '.join(map(str, blank[:5]))} named column_<position>")
    for name, where in duplicated.items():
        notes.append(f"column name '{name}' appears {len(where)} times (positions {', '.join(map(str, where))}); later copies renamed '{name} (2)' ...")
    return names, duplicated, notes


def columns_frame(columns: dict[str, list[str]]) -> pd.DataFrame:
    """Equal-length lists of strings as a table of Arrow-backed strings."""
    return pd.DataFrame({name: pa.array(values, type=pa.large_string()).to_pandas() for name, values in columns.items()})


def string_frame(records: list[list[str]], names: list[str]) -> pd.DataFrame:
    """Records of equal width as a table of Arrow-backed strings (built columnwise)."""
    if not records:
        return columns_frame({name: [] for name in names})
    return columns_frame(dict(zip(names, map(list, zip(*records)))))


def preview(values: list[str], separator: str, limit: int = 80) -> str:
    """Values joined for a ledger message, cut to ``limit`` characters."""
    shown = separator.join(values)
    return shown if len(shown) <= limit else shown[: limit - 3] + "..."


class ChunkBuilder:
    """Collects equal-width records (lists of strings) and hands out a :class:`Chunk` every ``chunk_rows``."""

    def __init__(self, names: list[str], chunk_rows: int) -> None:
        self.names = names
        self.chunk_rows = chunk_rows
        self._records: list[list[str]] = []
        self._rows: list[int] = []
        self._problems: list[RowProblem] = []

    def flag(self, row: int, code: str, message: str) -> None:
        """Flag the record that the next :meth:`add` takes in."""
        self._problems.append(RowProblem(row, "flagged", code, message, len(self._records)))

    def add(self, record: list[str], row: int) -> Chunk | None:
        self._records.append(record)
        self._rows.append(row)
        return self.flush() if len(self._records) >= self.chunk_rows else None

    def flush(self) -> Chunk | None:
        if not self._records:
            return None
        chunk = Chunk(string_frame(self._records, self.names), np.asarray(self._rows, dtype=np.int64), self._problems)
        self._records, self._rows, self._problems = [], [], []
        return chunk
