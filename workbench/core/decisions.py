"""Manual decisions made in the terminal UI, stored in SQLite beside the study.

Every decision is committed the moment it is made (WAL journal, full sync), so
killing the app loses nothing already saved. Undo marks the newest active
decision as undone; redo re-activates the newest undone one, until a new
decision clears the redo history. Headless runs read the same file and apply
the active decisions, in order, to the stages they steer.
"""

from __future__ import annotations

import sqlite3
import time
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path
from typing import Literal

from workbench.core.errors import SettingsError

Kind = Literal["language", "non_answer", "exclude", "stop_add", "stop_remove", "lemma"]
KINDS: tuple[str, ...] = ("language", "non_answer", "exclude", "stop_add", "stop_remove", "lemma")

_SCHEMA = """
CREATE TABLE IF NOT EXISTS decision (
    id INTEGER PRIMARY KEY AUTOINCREMENT,
    made_at REAL NOT NULL,
    kind TEXT NOT NULL,
    target TEXT NOT NULL,
    value TEXT NOT NULL,
    language TEXT NOT NULL DEFAULT '',
    state TEXT NOT NULL DEFAULT 'active' CHECK (state IN ('active', 'undone', 'dropped'))
);
"""


@dataclass(frozen=True)
class Decision:
    id: int
    made_at: float
    kind: str
    target: str
    value: str
    language: str
    state: str


@dataclass
class Decisions:
    """The active decisions, folded into what each stage needs."""

    language: dict[str, str] = field(default_factory=dict)
    non_answer: dict[str, bool] = field(default_factory=dict)
    exclude: dict[str, bool] = field(default_factory=dict)
    stop_add: dict[str, set[str]] = field(default_factory=dict)
    stop_remove: dict[str, set[str]] = field(default_factory=dict)
    lemma: dict[str, dict[str, str]] = field(default_factory=dict)

    @classmethod
    def fold(cls, rows: list[Decision]) -> Decisions:
        folded = cls()
        for d in rows:
            if d.kind == "language":
                folded.language[d.target] = d.value
            elif d.kind == "non_answer":
                folded.non_answer[d.target] = d.value == "1"
            elif d.kind == "exclude":
                folded.exclude[d.target] = d.value == "1"
            elif d.kind == "stop_add":
                folded.stop_add.setdefault(d.language, set()).add(d.target)
                folded.stop_remove.get(d.language, set()).discard(d.target)
            elif d.kind == "stop_remove":
                folded.stop_remove.setdefault(d.language, set()).add(d.target)
                folded.stop_add.get(d.language, set()).discard(d.target)
            elif d.kind == "lemma":
                folded.lemma.setdefault(d.language, {})[d.target] = d.value
        return folded

    def __bool__(self) -> bool:
        return any((self.language, self.non_answer, self.exclude, self.stop_add, self.stop_remove, self.lemma))


class DecisionStore:
    """The SQLite file of one study. Open it, record, undo, redo, read."""

    def __init__(self, path: Path | str) -> None:
        self.path = Path(path)
        try:
            self._db = sqlite3.connect(self.path, isolation_level=None, check_same_thread=False)
            self._db.execute("PRAGMA journal_mode=WAL")
            self._db.execute("PRAGMA synchronous=FULL")
            self._db.executescript(_SCHEMA)
        except sqlite3.DatabaseError as exc:
            raise SettingsError(
                f"decision store {self.path} cannot be opened ({exc}); move the file aside to start a fresh one"
            ) from None

    def close(self) -> None:
        self._db.close()

    def __enter__(self) -> DecisionStore:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    @contextmanager
    def _transaction(self) -> Iterator[sqlite3.Connection]:
        self._db.execute("BEGIN IMMEDIATE")
        try:
            yield self._db
        except BaseException:
            self._db.execute("ROLLBACK")
            raise
        self._db.execute("COMMIT")

    def record(self, kind: Kind, target: str, value: str = "1", language: str = "") -> int:
        """Save one decision now; clears the redo history. Returns its id."""
        if kind not in KINDS:
            raise SettingsError(f"unknown decision kind '{kind}'; known kinds: {', '.join(KINDS)}")
        with self._transaction() as db:
            db.execute("UPDATE decision SET state = 'dropped' WHERE state = 'undone'")
            cursor = db.execute(
                "INSERT INTO decision (made_at, kind, target, value, language) VALUES (?, ?, ?, ?, ?)",
                (time.time(), kind, target, value, language),
            )
        return int(cursor.lastrowid)

    def undo(self) -> Decision | None:
        """Undo the newest active decision; ``None`` when there is nothing to undo."""
        with self._transaction() as db:
            row = db.execute("SELECT * FROM decision WHERE state = 'active' ORDER BY id DESC LIMIT 1").fetchone()
            if row is None:
                return None
            db.execute("UPDATE decision SET state = 'undone' WHERE id = ?", (row[0],))
        return Decision(*row[:6], "undone")

    def redo(self) -> Decision | None:
        """Re-apply the most recently undone decision; ``None`` when there is none."""
        with self._transaction() as db:
            row = db.execute("SELECT * FROM decision WHERE state = 'undone' ORDER BY id ASC LIMIT 1").fetchone()
            if row is None:
                return None
            db.execute("UPDATE decision SET state = 'active' WHERE id = ?", (row[0],))
        return Decision(*row[:6], "active")

    def history(self, include_inactive: bool = False) -> list[Decision]:
        query = "SELECT * FROM decision" + ("" if include_inactive else " WHERE state = 'active'") + " ORDER BY id"
        return [Decision(*row) for row in self._db.execute(query).fetchall()]

    def active(self) -> Decisions:
        return Decisions.fold(self.history())


def load_decisions(path: Path | None) -> Decisions:
    """Active decisions of a study, or none when the store does not exist yet."""
    if path is None or not Path(path).exists():
        return Decisions()
    with DecisionStore(path) as store:
        return store.active()
