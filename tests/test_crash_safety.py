"""Crash safety under SIGKILL: the export, and the decision store while it is being written.

The export checks are those of ``tests/bench/kill_export.py`` (its docstring defines what "verify
tells which" means); here three trials kill the run at fixed points of the export instead of the
benchmark's 50+ random ones. The decision store is killed in a loop while a child writes decisions
as fast as it can: SQLite's ``PRAGMA integrity_check`` must answer ``ok`` (SQLite documentation,
"PRAGMA integrity_check") and every decision whose ``record`` call returned before the kill must be
there. ``tests/test_decisions.py`` and ``tests/test_ui_crash.py`` kill a process that has finished
writing; this one kills it mid-write.
"""

from __future__ import annotations

import importlib.util
import os
import signal
import sqlite3
import subprocess
import sys
from pathlib import Path
from types import ModuleType

import pytest

from workbench.core.decisions import DecisionStore

pytestmark = pytest.mark.skipif(os.name != "posix", reason="SIGKILL is POSIX")


def kill_export() -> ModuleType:
    path = Path(__file__).parent / "bench" / "kill_export.py"
    spec = importlib.util.spec_from_file_location("kill_export", path)
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    sys.modules.setdefault("kill_export", module)  # dataclasses look their module up there
    spec.loader.exec_module(module)
    return module


@pytest.mark.slow
def test_sigkill_during_export_leaves_each_file_old_or_new_and_verify_says_which(tmp_path: Path) -> None:
    bench = kill_export()
    ref = bench.reference(tmp_path, in_process=True, light=True)
    kinds = []
    # right after the export starts, in the middle (some files replaced), after the manifest
    for number, kill_after in enumerate(("writing the ledger", "writing compare tables", "wrote ")):
        outcome, status = bench.trial(ref, tmp_path / f"trial-{number}", kill_after, 0.0)
        assert outcome.problems == [], outcome.problems
        assert status in (0, -signal.SIGKILL)
        kinds.append(outcome.kind)
    assert kinds[0].startswith("old") and kinds[1] == "old, verify failed" and kinds[2] == "new, verify ok", kinds


WRITER = r"""
import sys
from workbench.core.decisions import DecisionStore

store = DecisionStore(sys.argv[1])
prefix = sys.argv[2]
n = 0
while True:
    store.record("language", f"{prefix}-{n}|q1", "de")
    print(n, flush=True)  # acknowledged: record() has returned, so the decision is committed
    n += 1
"""


def test_decision_store_killed_mid_write_in_a_loop(tmp_path: Path) -> None:
    store_path = tmp_path / "study.decisions.sqlite"
    acknowledged: list[str] = []
    for round_, after in enumerate((1, 7, 25, 60, 3, 120)):
        child = subprocess.Popen([sys.executable, "-c", WRITER, str(store_path), f"r{round_}"],
                                 stdout=subprocess.PIPE, text=True)
        assert child.stdout is not None
        last = -1
        for line in child.stdout:
            last = int(line)
            if last >= after:
                break
        os.kill(child.pid, signal.SIGKILL)  # the child is inside its next record() call or about to be
        assert child.wait() == -signal.SIGKILL
        for line in child.stdout:  # acknowledgements still in the pipe
            last = int(line)
        child.stdout.close()
        acknowledged += [f"r{round_}-{n}|q1" for n in range(last + 1)]
        with sqlite3.connect(store_path) as db:
            assert db.execute("PRAGMA integrity_check").fetchall() == [("ok",)]
        with DecisionStore(store_path) as store:
            saved = store.active().language
        missing = [key for key in acknowledged if key not in saved]
        assert not missing, f"round {round_}: acknowledged decisions lost: {missing[:5]}"
        # at most the decision committed just before the kill is there without its acknowledgement
        assert len(saved) - len(acknowledged) in (0, 1)
