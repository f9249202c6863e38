"""A keyword-in-context panel: every answer that holds a term, the term centred.

The lines come from :mod:`workbench.core.kwic` (the same function the export
uses); this widget only lays them out.
"""

from __future__ import annotations

from typing import Any

import pandas as pd
from rich.text import Text
from textual.app import ComposeResult
from textual.containers import Vertical
from textual.widgets import Static

from workbench.ui.widgets.frame_grid import FrameGrid, GridColumn


def _left(value: Any) -> Text:
    return Text("" if value is None else str(value), style="dim", justify="right")


def _hit(value: Any) -> Text:
    return Text("" if value is None else str(value), style="bold reverse")


class KwicPanel(Vertical):
    """Shown under a term list; ``show_term`` fills it, Escape (in the view) hides it."""

    DEFAULT_CSS = """
    KwicPanel > #kwic-title { height: 1; text-style: bold; padding: 0 1; }
    """

    def __init__(self, *, id: str | None = None) -> None:
        super().__init__(id=id)
        self.term: str | None = None

    def compose(self) -> ComposeResult:
        yield Static("Keyword in context", id="kwic-title")
        yield FrameGrid(
            [
                GridColumn("left", "", 34, "right", _left),
                GridColumn("match", "term", 14, format=_hit),
                GridColumn("right", ""),
                GridColumn("answer_id", "answer", 12),
            ],
            key_column="answer_id",
            empty_text="no answer holds this term",
            id="kwic-grid",
        )

    @property
    def grid(self) -> FrameGrid:
        return self.query_one("#kwic-grid", FrameGrid)

    def show_lines(self, term: str, language: str, lines: pd.DataFrame | None, note: str = "") -> None:
        """Show KWIC lines (columns ``answer_id``, ``left``, ``match``, ``right``)."""
        self.term = term
        self.add_class("-shown")
        title = f"Keyword in context: '{term}' ({language})"
        if lines is None:
            self.grid.set_frame(pd.DataFrame(columns=["answer_id", "left", "match", "right"]))
            self.query_one("#kwic-title", Static).update(f"{title} — {note}")
            return
        self.query_one("#kwic-title", Static).update(f"{title} — {len(lines):,} lines{(' · ' + note) if note else ''}  (Esc closes)")
        self.grid.set_frame(lines.reset_index(drop=True), keep_key=False)

    def hide(self) -> None:
        self.remove_class("-shown")
