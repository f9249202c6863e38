"""The ledger: a row-by-row account of what happened to every input row and answer.

Each event says which entity (an input row or an answer), which stage, a status
(``kept``, ``flagged`` or ``dropped``), a reason code and a human message. An
entity may collect several events (an answer can be flagged by clean and kept
by identify); its final status is the most severe one. The invariant the tests
hold the pipeline to: every input row and every answer has at least one event.
"""

from __future__ import annotations

from collections import Counter
from dataclasses import dataclass, field
from typing import Literal

import pandas as pd

Status = Literal["kept", "flagged", "dropped"]
Level = Literal["row", "answer"]
_SEVERITY = {"kept": 0, "flagged": 1, "dropped": 2}

LEDGER_COLUMNS = ["level", "key", "source", "row", "stage", "status", "code", "message"]


@dataclass
class Ledger:
    """Append-only list of events; cheap to append, turned into a table at the end."""

    events: list[tuple[str, str, str, int, str, str, str, str]] = field(default_factory=list)

    def row(self, key: str, source: str, row: int, stage: str, status: Status, code: str, message: str) -> None:
        """Record an event for one input row (``row`` is the 1-based line or record number)."""
        self.events.append(("row", key, source, row, stage, status, code, message))

    def answer(self, key: str, source: str, row: int, stage: str, status: Status, code: str, message: str) -> None:
        """Record an event for one answer (``key`` is its answer id)."""
        self.events.append(("answer", key, source, row, stage, status, code, message))

    def extend(self, events: list[tuple[str, str, str, int, str, str, str, str]]) -> None:
        self.events.extend(events)

    def frame(self) -> pd.DataFrame:
        """All events as a table with :data:`LEDGER_COLUMNS`."""
        return pd.DataFrame(self.events, columns=LEDGER_COLUMNS)

    def final_status(self, level: Level) -> dict[str, str]:
        """The most severe status per entity of one level."""
        result: dict[str, str] = {}
        for lvl, key, _s, _r, _st, status, _c, _m in self.events:
            if lvl == level and _SEVERITY[status] >= _SEVERITY.get(result.get(key, "kept"), 0):
                result[key] = status
        return result

    def counts(self) -> dict[str, dict[str, int]]:
        """``{"row": {"kept": n, ...}, "answer": {...}}`` over final statuses."""
        return {level: dict(Counter(self.final_status(level).values())) for level in ("row", "answer")}

    def reasons(self) -> dict[str, int]:
        """How many events carry each ``stage:code``, for the manifest."""
        return dict(Counter(f"{e[4]}:{e[6]}" for e in self.events))

    def accounted(self, level: Level) -> set[str]:
        return {e[1] for e in self.events if e[0] == level}
