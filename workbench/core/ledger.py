"""The ledger: a row-by-row account of what happened to every input row and answer.

Each event says which entity (an input row or an answer), which stage, a status
(``kept``, ``flagged`` or ``dropped``), a reason code and a human message. An
entity may collect several events (an answer can be flagged by clean and kept
by identify); its final status is the most severe one. The invariant the tests
hold the pipeline to: every input row and every answer has at least one event.

Events are stored column-wise in blocks: a stage that accounts for a million
answers hands over arrays (:meth:`Ledger.bulk`) rather than a million tuples,
which keeps the ledger of a 1M-row run to tens of megabytes. Single events
(:meth:`Ledger.row`, :meth:`Ledger.answer`, :meth:`Ledger.extend`) are
gathered into a block when the next bulk block or a read arrives, or as soon
as :data:`LOOSE_LIMIT` of them wait, so the order of events is kept.

Memory: a bulk block keeps its keys as one Arrow string column instead of a
Python ``str`` per event (a million answer ids are ~75 MB as objects, ~35 MB
in Arrow), and loose events (an 8-tuple plus a key string each, ~200 bytes)
become a block when a stage hands over a stage's worth of them. A block of
loose events is typed by pandas (its text columns are ``str``); the combined
:meth:`Ledger.frame` has exactly the column types it had before either
change: ``str`` text columns once any loose events were gathered (pandas
combines ``str`` and object columns into ``str``), object columns otherwise.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from typing import Any, Literal

import numpy as np
import pandas as pd

Status = Literal["kept", "flagged", "dropped"]
Level = Literal["row", "answer"]
Event = tuple[str, str, str, int, str, str, str, str]
_SEVERITY = {"kept": 0, "flagged": 1, "dropped": 2}
_STATUS_BY_SEVERITY = np.array(["kept", "flagged", "dropped"], dtype=object)

LEDGER_COLUMNS = ["level", "key", "source", "row", "stage", "status", "code", "message"]
#: Loose events gathered into a block once this many wait (a stage's tuples are freed with it).
LOOSE_LIMIT = 50_000
#: Bulk blocks of at least this many events keep their keys as Arrow strings.
_ARROW_KEYS_FROM = 1_000


def _key_column(keys: Any, length: int) -> Any:
    """Keys of a bulk block: an Arrow-backed ``str`` array for large blocks, else an object array."""
    if isinstance(keys, pd.Series | pd.api.extensions.ExtensionArray) and isinstance(keys.dtype, pd.StringDtype):
        if len(keys) != length:
            raise ValueError(f"ledger column has {len(keys)} values for {length} keys")
        if not keys.isna().any():
            # Shares the caller's Arrow buffers (e.g. the answers table's id column): no copy at all.
            return pd.array(keys, dtype="str")
        return _column(keys, length)
    if length >= _ARROW_KEYS_FROM and all(isinstance(k, str) for k in keys):
        return pd.array(keys, dtype="str")
    return _column(keys, length)


def _column(value: Any, length: int) -> np.ndarray:
    if isinstance(value, str) or np.isscalar(value):
        out = np.empty(length, dtype=object)
        out[:] = value
        return out
    array = np.asarray(value, dtype=object)
    if len(array) != length:
        raise ValueError(f"ledger column has {len(array)} values for {length} keys")
    return array


class Ledger:
    """Append-only account of events, stored in column blocks."""

    def __init__(self, events: Iterable[Event] | None = None) -> None:
        self._blocks: list[pd.DataFrame] = []
        self._loose: list[Event] = list(events or [])
        #: Whether a block of loose events (``str`` text columns) was ever made; see the module docstring.
        self._typed = False

    # ------------------------------------------------------------------ writing

    def row(self, key: str, source: str, row: int, stage: str, status: Status, code: str, message: str) -> None:
        """Record an event for one input row (``row`` is the 1-based line or record number)."""
        self._loose.append(("row", key, source, row, stage, status, code, message))

    def answer(self, key: str, source: str, row: int, stage: str, status: Status, code: str, message: str) -> None:
        """Record an event for one answer (``key`` is its answer id)."""
        self._loose.append(("answer", key, source, row, stage, status, code, message))

    def extend(self, events: Iterable[Event]) -> None:
        """Record events given as ``(level, key, source, row, stage, status, code, message)`` tuples."""
        self._loose.extend(events)
        if len(self._loose) >= LOOSE_LIMIT:
            self._flush()

    def bulk(
        self,
        level: Level,
        keys: Sequence[str] | np.ndarray,
        source: str | Sequence[str] | np.ndarray,
        row: int | Sequence[int] | np.ndarray,
        stage: str,
        status: Status | Sequence[str] | np.ndarray,
        code: str | Sequence[str] | np.ndarray,
        message: str | Sequence[str] | np.ndarray,
    ) -> None:
        """Record one event per key; every other argument is one value for all or one per key."""
        n = len(keys)
        if n == 0:
            return
        self._flush()
        rows = np.full(n, row, dtype=np.int64) if np.isscalar(row) else np.asarray(row, dtype=np.int64)
        self._blocks.append(
            pd.DataFrame(
                {
                    "level": _column(level, n),
                    "key": _key_column(keys, n),
                    "source": _column(source, n),
                    "row": rows,
                    "stage": _column(stage, n),
                    "status": _column(status, n),
                    "code": _column(code, n),
                    "message": _column(message, n),
                },
                copy=False,
            )
        )

    def _flush(self) -> None:
        if self._loose:
            block = pd.DataFrame(self._loose, columns=LEDGER_COLUMNS)
            block["row"] = block["row"].astype(np.int64)
            self._blocks.append(block)
            self._loose = []
            self._typed = True

    # ------------------------------------------------------------------ positions

    def __len__(self) -> int:
        return sum(len(b) for b in self._blocks) + len(self._loose)

    def mark(self) -> int:
        """A position to come back to with :meth:`truncated`: the number of events so far."""
        return len(self)

    def truncated(self, mark: int) -> Ledger:
        """A new ledger holding the first ``mark`` events."""
        copy = Ledger()
        frame = self.frame()
        if mark:
            copy._blocks = [frame.iloc[:mark]]
            copy._typed = self._typed
        return copy

    # ------------------------------------------------------------------ reading

    @property
    def events(self) -> list[Event]:
        """Every event as a tuple (convenient for small ledgers and tests)."""
        frame = self.frame()
        return [tuple(r) for r in frame.itertuples(index=False, name=None)]  # type: ignore[misc]

    def frame(self) -> pd.DataFrame:
        """All events as a table with :data:`LEDGER_COLUMNS`."""
        self._flush()
        if not self._blocks:
            return pd.DataFrame({c: pd.Series(dtype=np.int64 if c == "row" else object) for c in LEDGER_COLUMNS})
        if len(self._blocks) > 1:
            self._blocks = [pd.concat(self._blocks, ignore_index=True, copy=False)]
        frame = self._blocks[0]
        if not self._typed and isinstance(frame["key"].dtype, pd.StringDtype):
            # Only bulk blocks so far: their keys were object before they were kept as Arrow strings.
            frame["key"] = frame["key"].astype(object)
        return frame

    def final_status(self, level: Level) -> dict[str, str]:
        """The most severe status per entity of one level."""
        frame = self.frame()
        part = frame[frame["level"] == level]
        if part.empty:
            return {}
        severity = part["status"].map(_SEVERITY).to_numpy(dtype=np.int8)
        worst = pd.Series(severity, index=part["key"].to_numpy()).groupby(level=0, sort=False).max()
        return dict(zip(worst.index, _STATUS_BY_SEVERITY[worst.to_numpy()], strict=True))

    def counts(self) -> dict[str, dict[str, int]]:
        """``{"row": {"kept": n, ...}, "answer": {...}}`` over final statuses."""
        result: dict[str, dict[str, int]] = {}
        for level in ("row", "answer"):
            statuses = pd.Series(list(self.final_status(level).values()), dtype=object)
            result[level] = {str(k): int(v) for k, v in statuses.value_counts(sort=False).items()}
        return result

    def reasons(self) -> dict[str, int]:
        """How many events carry each ``stage:code``, for the manifest."""
        frame = self.frame()
        if frame.empty:
            return {}
        sizes = frame.groupby(["stage", "code"], sort=True).size()
        return {f"{stage}:{code}": int(n) for (stage, code), n in sizes.items()}

    def accounted(self, level: Level) -> set[str]:
        frame = self.frame()
        return set(frame.loc[frame["level"] == level, "key"].tolist())
