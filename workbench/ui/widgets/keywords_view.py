"""Keywords: top keywords per language, group or pooled; two groups compared; languages side by side.

Every number shown comes from the weigh and compare stages (see
:mod:`workbench.ui.keyword_tables`); from any row, ``k`` opens the answers
holding the term in context.
"""

from __future__ import annotations

from typing import Any, ClassVar

import numpy as np
import pandas as pd
from rich.text import Text
from textual import on
from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import Horizontal, Vertical
from textual.widget import Widget
from textual.widgets import Select, Static

from workbench.ui import keyword_tables as K
from workbench.ui.bars import bar
from workbench.ui.kwic_lines import kwic_for
from workbench.ui.session import Session
from workbench.ui.widgets.frame_grid import FrameGrid, GridColumn
from workbench.ui.widgets.kwic_panel import KwicPanel
from workbench.ui.widgets.view_base import ViewBase

MODE_TOP, MODE_COMPARE, MODE_CONCEPTS = "top keywords", "two groups", "languages side by side"
RANKINGS = [("mean_weight", "by mean weight"), ("doc_share", "by share of answers")]


def _number(digits: int) -> Any:
    def show(value: Any) -> str:
        try:
            number = float(value)
        except (TypeError, ValueError):
            return ""
        return "" if np.isnan(number) else f"{number:.{digits}f}"

    return show


def _share(value: Any) -> str:
    try:
        number = float(value)
    except (TypeError, ValueError):
        return ""
    return "" if np.isnan(number) else f"{number:.1%}"


def _p(value: Any) -> str:
    try:
        number = float(value)
    except (TypeError, ValueError):
        return ""
    if np.isnan(number):
        return ""
    return "<0.001" if number < 0.001 else f"{number:.3f}"


def _bar_text(value: Any) -> Text:
    return Text(str(value or ""), style="green")


TOP_GRID = [
    GridColumn("rank", "#", 3, "right"),
    GridColumn("term", "term"),
    GridColumn("score", "score", 7, "right", _number(4)),
    GridColumn("bar", "", 12, format=_bar_text),
    GridColumn("share", "share", 6, "right", _share),
    GridColumn("df", "answers", 7, "right"),
    GridColumn("stability", "stable", 6, "right", _share),
]

COMPARE_GRID = [
    GridColumn("term", "term"),
    GridColumn("freq_a", "A", 6, "right"),
    GridColumn("freq_b", "B", 6, "right"),
    GridColumn("g2", "G²", 7, "right", _number(2)),
    GridColumn("log_ratio", "LogRatio", 8, "right", _number(2)),
    GridColumn("bar", "", 12, format=_bar_text),
    GridColumn("p_adj", "adj. p", 7, "right", _p),
]


class KeywordsView(ViewBase):
    TITLE = "Keywords"

    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("t", "mode('top')", "Top", tooltip="Top keywords of a language, a group or all"),
        Binding("c", "mode('compare')", "Compare", tooltip="Compare two groups (G², Log Ratio, adjusted p)"),
        Binding("g", "mode('concepts')", "Concepts", show=False, tooltip="Languages side by side through the glossary"),
        Binding("left_square_bracket", "scope(-1)", "Prev", show=False, tooltip="Previous language / group"),
        Binding("right_square_bracket", "scope(1)", "Next", tooltip="Next language / group"),
        Binding("r", "ranking", "Ranking", show=False, tooltip="Rank by mean weight / by share of answers"),
        Binding("k", "kwic", "In context", tooltip="Show the answers holding this term, in context"),
        Binding("f", "filters", "Choices", show=False, tooltip="Go to the choices bar (Tab moves on)"),
        Binding("escape", "close_kwic", "Close", show=False, tooltip="Close the context panel"),
    ]

    def __init__(self, *, id: str | None = None) -> None:
        super().__init__(id=id)
        self.mode = MODE_TOP
        self.scope: str | None = None
        self.ranking = "mean_weight"
        self.group_column: str | None = None
        self.group_a: str | None = None
        self.group_b: str | None = None
        self.language_of_row: dict[str, str] = {}

    def compose(self) -> ComposeResult:
        with Vertical(id="keywords-main"):
            with Horizontal(classes="filter-bar"):
                yield Select(
                    [(m, m) for m in (MODE_TOP, MODE_COMPARE, MODE_CONCEPTS)],
                    id="kw-mode",
                    compact=True,
                    allow_blank=False,
                    value=MODE_TOP,
                )
                yield Select([], prompt="scope", id="kw-scope", compact=True)
                yield Select(RANKINGS and [(label, key) for key, label in RANKINGS], id="kw-ranking", compact=True, allow_blank=False, value="mean_weight")
                yield Select([], prompt="group column", id="kw-group", compact=True)
                yield Select([], prompt="group A", id="kw-a", compact=True)
                yield Select([], prompt="group B / rest", id="kw-b", compact=True)
            yield FrameGrid(TOP_GRID, key_column="term", empty_text="keywords appear after the weigh stage", id="kw-grid")
            yield Static("", id="keywords-legend")
        yield KwicPanel(id="kw-kwic")

    @property
    def grid(self) -> FrameGrid:
        return self.query_one("#kw-grid", FrameGrid)

    def main_widget(self) -> Widget | None:
        return self.grid

    # ------------------------------------------------------------------ data

    def outputs_changed(self, session: Session) -> None:
        if session.outputs is None or session.outputs.weighed is None:
            return
        self._fill_choices(session)
        self._show()

    def _fill_choices(self, session: Session) -> None:
        outputs = session.outputs
        assert outputs is not None
        scopes = K.keyword_scopes(outputs)
        ids = [key for key, _ in scopes]
        if self.scope not in ids:
            self.scope = ids[0] if ids else None
        groups = K.group_columns(outputs)
        if self.group_column not in groups:
            self.group_column = groups[0] if groups else None
        values = K.group_values(outputs, self.group_column) if self.group_column else []
        if self.group_a not in values:
            self.group_a = values[0] if values else None
        if self.group_b is not None and self.group_b not in values:
            self.group_b = None
        with self.prevent(Select.Changed):
            scope = self.query_one("#kw-scope", Select)
            scope.set_options([(label, key) for key, label in scopes])
            scope.value = self.scope if self.scope else Select.BLANK
            group = self.query_one("#kw-group", Select)
            group.set_options([(g, g) for g in groups])
            group.value = self.group_column or Select.BLANK
            for select_id, current, prompt_rest in (("#kw-a", self.group_a, False), ("#kw-b", self.group_b, True)):
                select = self.query_one(select_id, Select)
                select.set_options([(v, v) for v in values])
                select.value = current if current else Select.BLANK
        self._show_controls()

    def _show_controls(self) -> None:
        compare = self.mode == MODE_COMPARE
        self.query_one("#kw-scope").display = self.mode == MODE_TOP
        self.query_one("#kw-ranking").display = self.mode == MODE_TOP
        for select_id in ("#kw-group", "#kw-a", "#kw-b"):
            self.query_one(select_id).display = compare

    def _show(self) -> None:
        session = self.session
        if session is None or session.outputs is None:
            return
        outputs = session.outputs
        legend = self.query_one("#keywords-legend", Static)
        if self.mode == MODE_TOP:
            frame = K.top_keywords(outputs, self.scope or "", self.ranking) if self.scope else pd.DataFrame(columns=K.TOP_COLUMNS)
            top = float(frame["score"].max()) if len(frame) else 0.0
            frame["bar"] = [bar(float(v), top, 12) for v in frame["score"]] if len(frame) else []
            self.grid.columns = TOP_GRID
            self.grid.set_frame(frame)
            legend.update(K.top_legend(outputs, self.scope, self.ranking))
        elif self.mode == MODE_COMPARE:
            frame, note = K.two_groups(outputs, self.group_column, self.group_a, self.group_b)
            top = float(frame["log_ratio"].abs().max()) if len(frame) else 0.0
            frame["bar"] = [bar(abs(float(v)), top, 12) for v in frame["log_ratio"]] if len(frame) else []
            self.grid.columns = COMPARE_GRID
            self.grid.set_frame(frame)
            legend.update(note)
        else:
            frame, columns, note = K.concepts(outputs)
            self.grid.columns = [GridColumn(c, c, None if c in ("concept",) else 16) for c in columns]
            self.grid.set_frame(frame)
            legend.update(note)

    # ------------------------------------------------------------------ choices

    @on(Select.Changed)
    def _changed(self, event: Select.Changed) -> None:
        value = None if event.value is Select.BLANK else str(event.value)
        select_id = event.select.id
        if select_id == "kw-mode":
            self.mode = value or MODE_TOP
            self._show_controls()
        elif select_id == "kw-scope":
            self.scope = value
        elif select_id == "kw-ranking":
            self.ranking = value or "mean_weight"
        elif select_id == "kw-group":
            self.group_column = value
            self.group_a = self.group_b = None
            if self.session is not None and self.session.outputs is not None:
                self._fill_choices(self.session)
        elif select_id == "kw-a":
            self.group_a = value
        elif select_id == "kw-b":
            self.group_b = value
        else:
            return
        self._show()

    def action_mode(self, mode: str) -> None:
        self.query_one("#kw-mode", Select).value = {"top": MODE_TOP, "compare": MODE_COMPARE, "concepts": MODE_CONCEPTS}[mode]
        if mode == "compare":
            self.query_one("#kw-a", Select).focus()

    def action_scope(self, step: int) -> None:
        select_id = "#kw-scope" if self.mode == MODE_TOP else "#kw-a"
        select = self.query_one(select_id, Select)
        options = [value for _, value in select._options if value is not Select.BLANK]  # noqa: SLF001 - the option list
        if not options:
            return
        current = select.value if select.value in options else options[0]
        select.value = options[(options.index(current) + step) % len(options)]

    def action_ranking(self) -> None:
        self.query_one("#kw-ranking", Select).value = "doc_share" if self.ranking == "mean_weight" else "mean_weight"

    def action_filters(self) -> None:
        self.query_one("#kw-mode", Select).focus()

    def action_kwic(self) -> None:
        session = self.session
        row = self.grid.current_row()
        if session is None or row is None:
            return
        term, language = K.term_and_language(str(row.get("term", "")), self.scope, session)
        lines, note = kwic_for(session, term, language)
        self.query_one(KwicPanel).show_lines(term, language, lines, note)

    def action_close_kwic(self) -> None:
        self.query_one(KwicPanel).hide()
        self.grid.focus()
