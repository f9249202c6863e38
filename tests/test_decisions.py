"""The decision store: immediate persistence, undo/redo, folding, and survival of a hard kill."""

from __future__ import annotations

import os
import signal
import sqlite3
import subprocess
import sys
from pathlib import Path

from workbench.core.decisions import DecisionStore, load_decisions


def test_record_fold_undo_redo(tmp_path: Path) -> None:
    with DecisionStore(tmp_path / "d.sqlite") as store:
        store.record("language", "r1|q1", "de")
        store.record("stop_add", "zug", language="de")
        store.record("lemma", "züge", "zug", language="de")
        folded = store.active()
        assert folded.language == {"r1|q1": "de"}
        assert folded.stop_add == {"de": {"zug"}}
        assert folded.lemma == {"de": {"züge": "zug"}}

        assert store.undo().kind == "lemma"
        assert store.undo().kind == "stop_add"
        assert store.active().stop_add == {}
        assert store.redo().kind == "stop_add"  # the most recently undone comes back first
        assert store.active().stop_add == {"de": {"zug"}}

        store.record("exclude", "r2|q1")  # a new decision clears the redo history
        assert store.redo() is None
        assert [d.kind for d in store.history()] == ["language", "stop_add", "exclude"]


def test_later_decision_wins_and_stop_add_remove_cancel(tmp_path: Path) -> None:
    with DecisionStore(tmp_path / "d.sqlite") as store:
        store.record("language", "a", "de")
        store.record("language", "a", "en")
        store.record("stop_add", "very", language="en")
        store.record("stop_remove", "very", language="en")
        folded = store.active()
    assert folded.language == {"a": "en"}
    assert folded.stop_add == {"en": set()}
    assert folded.stop_remove == {"en": {"very"}}


def test_missing_store_means_no_decisions(tmp_path: Path) -> None:
    assert not load_decisions(tmp_path / "none.sqlite")


_WRITER = """
import sys
from workbench.core.decisions import DecisionStore
store = DecisionStore(sys.argv[1])
for n in range(int(sys.argv[2])):
    store.record("language", f"r{n}|q1", "fr")
print("saved", flush=True)
sys.stdin.readline()  # wait to be killed while the store is open
"""


def test_decisions_survive_sigkill(tmp_path: Path) -> None:
    """A process that saved decisions and is killed hard loses none of them (SQLite WAL + full sync)."""
    path = tmp_path / "d.sqlite"
    proc = subprocess.Popen(
        [sys.executable, "-c", _WRITER, str(path), "25"], stdin=subprocess.PIPE, stdout=subprocess.PIPE, text=True
    )
    assert proc.stdout is not None
    assert proc.stdout.readline().strip() == "saved"
    os.kill(proc.pid, signal.SIGKILL)
    proc.wait()
    proc.stdin.close()
    proc.stdout.close()
    with sqlite3.connect(path) as db:
        assert db.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    assert len(load_decisions(path).language) == 25
