"""The decisions panel: every manual choice of this study, newest first, with its state."""

from __future__ import annotations

import pandas as pd
from textual.app import ComposeResult
from textual.containers import Vertical
from textual.widgets import Static

from workbench.core.decisions import Decision
from workbench.ui.widgets.frame_grid import FrameGrid, GridColumn


def describe(decision: Decision) -> str:
    """A short sentence for one decision, as the panel and notifications show it."""
    lang = f" ({decision.language})" if decision.language else ""
    if decision.kind == "language":
        return f"{decision.target} is {decision.value}"
    if decision.kind == "non_answer":
        return f"{decision.target} {'is' if decision.value == '1' else 'is not'} a non-answer"
    if decision.kind == "exclude":
        return f"{decision.target} {'excluded' if decision.value == '1' else 'included'}"
    if decision.kind == "stop_add":
        return f"'{decision.target}' is a stop word{lang}"
    if decision.kind == "stop_remove":
        return f"'{decision.target}' is not a stop word{lang}"
    if decision.kind == "lemma":
        return f"'{decision.target}' counts as '{decision.value}'{lang}"
    return f"{decision.kind} {decision.target} = {decision.value}{lang}"


def _state(value: object) -> tuple[str, str]:
    state = str(value)
    return state, {"active": "", "undone": "dim italic", "dropped": "dim strike"}.get(state, "")


class DecisionsPanel(Vertical):
    """Lists decisions; undo and redo are app keys so they work from every view."""

    DEFAULT_CSS = """
    DecisionsPanel { width: 44; max-width: 50%; border-left: vkey $primary; display: none; }
    DecisionsPanel.-shown { display: block; }
    DecisionsPanel > #decisions-title { height: 1; text-style: bold; padding: 0 1; }
    """

    def compose(self) -> ComposeResult:
        yield Static("Decisions  ^z undo  ^y redo", id="decisions-title")
        yield FrameGrid(
            [
                GridColumn("id", "#", 4, "right"),
                GridColumn("what", "decision"),
                GridColumn("state", "state", 7, format=_state),
            ],
            key_column="id",
            empty_text="no decisions yet",
            id="decisions-grid",
        )

    def show_history(self, history: list[Decision]) -> None:
        rows = [{"id": d.id, "what": describe(d), "state": d.state} for d in reversed(history)]
        frame = pd.DataFrame(rows, columns=["id", "what", "state"])
        self.query_one(FrameGrid).set_frame(frame)
        active = sum(1 for d in history if d.state == "active")
        self.query_one("#decisions-title", Static).update(f"Decisions ({active} active)  ^z undo  ^y redo")
