"""A keyword-in-context panel: every answer that holds a term, the term in the middle.

The lines come from :func:`workbench.core.kwic.kwic_lines` (the function the
export's KWIC tables use), looked up in a worker so a large corpus never
blocks the screen; this widget only lays them out.
"""

from __future__ import annotations

import traceback
from typing import Any

import pandas as pd
from textual import work
from textual.app import ComposeResult
from textual.containers import Vertical
from textual.widgets import Static

from workbench.core.errors import TermloomError
from workbench.core.pipeline import RunOutputs
from workbench.ui.widgets.frame_grid import FrameGrid, GridColumn


def _left(value: Any) -> tuple[str, str]:
    return ("" if value is None else str(value)), "dim"


def _hit(value: Any) -> tuple[str, str]:
    return ("" if value is None else str(value)), "bold reverse"


class KwicPanel(Vertical):
    """Shown under a term list; ``show_targets`` fills it, ``hide`` hides it."""

    DEFAULT_CSS = """
    KwicPanel > #kwic-title { height: 1; text-style: bold; padding: 0 1; }
    """

    def __init__(self, *, id: str | None = None) -> None:
        super().__init__(id=id)
        self.label: str | None = None
        self.lines: pd.DataFrame | None = None

    def compose(self) -> ComposeResult:
        yield Static("Keyword in context", id="kwic-title")
        yield FrameGrid(
            [
                GridColumn("language", "", 3),
                GridColumn("left", "", 36, "right", _left, clip="start"),
                GridColumn("match", "", 14, format=_hit),
                GridColumn("right", "", format=_left),
                GridColumn("answer_id", "answer", 12),
            ],
            key_column="answer_id",
            empty_text="looking up…",
            id="kwic-grid",
        )

    @property
    def grid(self) -> FrameGrid:
        return self.query_one("#kwic-grid", FrameGrid)

    def show_targets(
        self,
        label: str,
        outputs: RunOutputs,
        targets: list[tuple[str | None, str]],
        answers: pd.DataFrame | None = None,
    ) -> None:
        """Look up and show the answers holding any of ``targets`` (``(language or None, term)``).

        ``answers`` narrows the search to those answers (default: every answer of the run).
        """
        self.label = label
        self.add_class("-shown")
        self.query_one("#kwic-title", Static).update(f"Keyword in context: {label} — looking up…")
        self.grid.empty_text = "looking up…"
        self.grid.set_frame(pd.DataFrame(columns=["answer_id", "language", "left", "match", "right"]))
        self._lookup(label, outputs, targets, outputs.answers if answers is None else answers)

    @work(thread=True, exclusive=True, group="kwic", exit_on_error=False)
    def _lookup(
        self, label: str, outputs: RunOutputs, targets: list[tuple[str | None, str]], answers: pd.DataFrame
    ) -> None:
        from workbench.ui.kwic_lines import kwic_for  # loads spaCy; only when first asked

        try:
            lines: pd.DataFrame | None = kwic_for(answers, outputs.study, outputs.decisions, targets)
            error = None
        except TermloomError as exc:
            lines, error = None, str(exc)
        except Exception as exc:  # a bug: one line here, the traceback in the log
            self.log.error(traceback.format_exc())
            lines, error = None, f"internal error ({type(exc).__name__}: {exc})"
        self.app.call_from_thread(self._show, label, lines, error)

    def _show(self, label: str, lines: pd.DataFrame | None, error: str | None) -> None:
        if label != self.label:
            return
        title = self.query_one("#kwic-title", Static)
        self.lines = lines
        if lines is None:
            title.update(f"Keyword in context: {label} — {error}")
            self.grid.empty_text = "no lines"
            self.grid.refresh()
            return
        located = int(lines["located"].sum()) if "located" in lines and len(lines) else 0
        note = f" ({len(lines) - located} not located in the text)" if located < len(lines) else ""
        title.update(f"Keyword in context: {label} — {len(lines):,} lines{note} · Esc closes")
        self.grid.empty_text = "no answer holds this term"
        self.grid.set_frame(lines.reset_index(drop=True), keep_key=False)

    def hide(self) -> None:
        self.remove_class("-shown")
        self.label = None
