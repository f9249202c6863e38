"""Decisions survive a hard kill of the app.

The app runs in a child process (headless, driven by Textual's auto-pilot):
it records decisions with the same keys a user presses, says so, and keeps
running — a recomputation is scheduled or under way — until the test kills it
with SIGKILL. The decision store is then reopened: every decision is there and
SQLite's ``PRAGMA integrity_check`` answers ``ok`` (SQLite documentation,
"PRAGMA integrity_check": the single row ``ok`` means no problem found).
Finally the app is opened again in-process and shows and applies them.
"""

from __future__ import annotations

import csv
import os
import signal
import sqlite3
import subprocess
import sys
from pathlib import Path

import pytest

from workbench.core.decisions import DecisionStore
from workbench.ui.app import TermloomApp
from workbench.ui.widgets.frame_grid import FrameGrid

CHILD = r"""
import asyncio, os, sys
from pathlib import Path
from workbench.ui.app import TermloomApp
from workbench.ui.screens.choice_screen import ChoiceScreen

async def drive(pilot):
    app = pilot.app
    while app.session is None or app.session.outputs is None:
        await app.wait_until_idle()
        await pilot.pause()
    await pilot.press("2")
    grid = app.workbench.query_one("#answers-grid")
    grid.move_to_key("r1|comment")
    await pilot.press("n")                  # r1 is a non-answer (clean kept it as a real one)
    grid.move_to_key("r2|comment")
    await pilot.press("n")                  # r2 is a real answer (clean flagged "no comment")
    grid.move_to_key("r3|comment")
    await pilot.press("l")                  # r3 is German
    screen = app.screen
    assert isinstance(screen, ChoiceScreen)
    screen.query_one("#choices").highlighted = [v for v, _ in screen.choices].index("de")
    await pilot.press("enter")
    os.write(1, b"DECIDED\n")              # straight to the pipe: Textual buffers print() while running
    await asyncio.Event().wait()            # stay alive until killed

TermloomApp(Path(sys.argv[1]), debounce=30).run(headless=True, auto_pilot=drive)
"""

TEXTS = [
    ("r1", "the price of the monthly pass is too high"),
    ("r2", "no comment"),
    ("r3", "Fahrkarten sind teuer"),
    ("r4", "friendly staff and clean trains"),
    ("r5", "die Züge sind pünktlich und sauber"),
    ("r6", "the app keeps crashing on my phone"),
]


def _study(folder: Path) -> Path:
    with (folder / "answers.csv").open("w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(["rid", "comment"])
        writer.writerows(TEXTS)
    path = folder / "crash.study.toml"
    path.write_text(
        '[[sources]]\npath = "answers.csv"\n[columns]\nid = "rid"\ntext = ["comment"]\n'
        '[languages]\nexpected = ["en", "de"]\n[weigh]\nmin_df = 1\n[compare]\nbootstrap = 0\n',
        encoding="utf-8",
    )
    return path


@pytest.mark.slow
@pytest.mark.anyio
@pytest.mark.skipif(sys.platform == "win32", reason="SIGKILL is POSIX")
async def test_decisions_survive_sigkill(tmp_path: Path) -> None:
    study = _study(tmp_path)
    env = {**os.environ, "NO_COLOR": "1"}
    child = subprocess.Popen(
        [sys.executable, "-c", CHILD, str(study)],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
        env=env,
        cwd=tmp_path,
    )
    try:
        line = child.stdout.readline() if child.stdout else ""
        while line and "DECIDED" not in line:
            line = child.stdout.readline() if child.stdout else ""
        assert "DECIDED" in line, f"the app did not record the decisions: {child.stderr.read() if child.stderr else ''}"
        os.kill(child.pid, signal.SIGKILL)
        assert child.wait() == -signal.SIGKILL
    finally:
        if child.poll() is None:
            child.kill()
            child.wait()
        for stream in (child.stdout, child.stderr):
            if stream:
                stream.close()

    store_path = tmp_path / "crash.decisions.sqlite"
    with sqlite3.connect(store_path) as db:
        assert db.execute("PRAGMA integrity_check").fetchall() == [("ok",)]
    with DecisionStore(store_path) as store:
        active = store.active()
    assert active.non_answer == {"r1|comment": True, "r2|comment": False}
    assert active.language == {"r3|comment": "de"}

    app = TermloomApp(study, debounce=0)
    async with app.run_test(size=(100, 30)):
        await app.wait_until_idle()
        panel = app.workbench.query_one("#decisions-grid", FrameGrid)
        assert panel.row_count == 3
        answers = app.session.outputs.answers.set_index("answer_id")
        assert answers.loc["r3|comment", "language"] == "de"
        assert answers.loc["r3|comment", "language_source"] == "decision"
        assert "non_answer" in list(answers.loc["r1|comment", "flags"])
        assert not answers.loc["r1|comment", "enters_weighting"]
