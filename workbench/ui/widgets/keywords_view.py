"""Keywords: top keywords per language, group or pooled; two groups compared; languages side by side.

Every number shown comes from the weigh and compare stages (see
:mod:`workbench.ui.keyword_tables`); from any row, ``k`` opens the answers
holding the term in context.
"""

from __future__ import annotations

import traceback
from typing import Any, ClassVar

import numpy as np
import pandas as pd
from textual import on, work
from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import Horizontal, Vertical
from textual.widget import Widget
from textual.timer import Timer
from textual.widgets import Select, Static

from workbench.core.errors import TermloomError
from workbench.core.pipeline import RunOutputs
from workbench.core.progress import Reporter
from workbench.core.settings import POOLED
from workbench.ui import keyword_tables as K
from workbench.ui.bars import bar
from workbench.ui.screens.choice_screen import ChoiceScreen
from workbench.ui.session import Session
from workbench.ui.widgets.frame_grid import FrameGrid, GridColumn
from workbench.ui.widgets.kwic_panel import KwicPanel
from workbench.ui.widgets.view_base import ViewBase

MODE_TOP, MODE_COMPARE, MODE_CONCEPTS = "top keywords", "two groups", "languages side by side"
#: Choice standing for "every other group" as group B.
REST = "\x00rest"
#: Seconds of quiet after choosing groups before the comparison runs.
PAIR_DELAY = 0.4
BAR_WIDTH = 12


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
    return "" if np.isnan(number) else f"{number:.0%}"


def _count(value: Any) -> str:
    try:
        number = float(value)
    except (TypeError, ValueError):
        return ""
    return "" if np.isnan(number) else f"{number:,.0f}"


def _p(value: Any) -> str:
    try:
        number = float(value)
    except (TypeError, ValueError):
        return ""
    if np.isnan(number):
        return ""
    return "<0.001" if number < 0.001 else f"{number:.3f}"


def _bar(value: Any) -> tuple[str, str]:
    text = str(value or "")
    if text.startswith("-"):
        return text[1:], "red"
    return text, "green"


TOP_GRID = [
    GridColumn("rank", "#", 3, "right"),
    GridColumn("term", "term", 30),
    GridColumn("score", "score", 7, "right", _number(4)),
    GridColumn("bar", "", BAR_WIDTH, format=_bar),
    GridColumn("share", "share", 5, "right", _share),
    GridColumn("mentions", "n", 6, "right", _count),
    GridColumn("stability", "stable", 6, "right", _share),
]

COMPARE_GRID = [
    GridColumn("term", "term", 26),
    GridColumn("freq_group", "A", 5, "right", _count),
    GridColumn("freq_ref", "B", 5, "right", _count),
    GridColumn("share_group", "A%", 4, "right", _share),
    GridColumn("share_ref", "B%", 4, "right", _share),
    GridColumn("g2", "G²", 6, "right", _number(1)),
    GridColumn("log_ratio", "LogR", 5, "right", _number(2)),
    GridColumn("bar", "", BAR_WIDTH, format=_bar),
    GridColumn("p_adj", "adj.p", 6, "right", _p),
]


class KeywordsView(ViewBase):
    TITLE = "Keywords"

    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("t", "mode('top')", "Top", tooltip="Top keywords of a language, a group or all languages"),
        Binding("c", "mode('compare')", "Compare", tooltip="Compare two groups (G², Log Ratio, adjusted p)"),
        Binding("g", "mode('concepts')", "Concepts", show=False, tooltip="Languages side by side through the glossary"),
        Binding("left_square_bracket", "scope(-1)", "Prev", show=False, tooltip="Previous language / group (group A when comparing)"),
        Binding("right_square_bracket", "scope(1)", "Next", tooltip="Next language / group (group A when comparing)"),
        Binding("a", "pick('a')", "Group A", tooltip="Choose group A when comparing"),
        Binding("b", "pick('b')", "Group B", tooltip="Choose group B when comparing (or the rest)"),
        Binding("G", "pick('grouping')", "Group column", show=False, tooltip="Choose the group column when comparing"),
        Binding("u", "pick('unit')", "Unit", show=False, tooltip="Choose the language (or all languages) when comparing"),
        Binding("r", "ranking", "Ranking", show=False, tooltip="Switch between the two rankings of the list"),
        Binding("k", "kwic", "In context", tooltip="Show the answers holding this term, in context"),
        Binding("f", "filters", "Choices", show=False, tooltip="Go to the choices bar (Tab moves on)"),
        Binding("escape", "close_kwic", "Close", show=False, tooltip="Close the context panel"),
    ]

    def __init__(self, *, id: str | None = None) -> None:
        super().__init__(id=id)
        self.mode = MODE_TOP
        self.scope: str | None = None
        self.ranking = "mean_weight"
        self.grouping: str | None = None
        self.group_a: str | None = None
        self.group_b: str | None = None
        self.unit: str | None = None
        #: (grouping, reference) -> tables of a compare run made on request; cleared by new results.
        self.pair_tables: dict[tuple[str, str], dict[str, pd.DataFrame]] = {}
        self._want_pair: tuple[str, str] | None = None
        self._pair_running = False
        self._pair_timer: Timer | None = None

    def compose(self) -> ComposeResult:
        with Vertical(id="keywords-main"):
            with Horizontal(classes="filter-bar"):
                yield Select([(m, m) for m in (MODE_TOP, MODE_COMPARE, MODE_CONCEPTS)], id="kw-mode", compact=True, allow_blank=False, value=MODE_TOP)
                yield Select([], prompt="language / group", id="kw-scope", compact=True)
                yield Select([], prompt="ranking", id="kw-ranking", compact=True)
                yield Select([], prompt="group column", id="kw-group", compact=True)
                yield Select([], prompt="group A", id="kw-a", compact=True)
                yield Select([], prompt="B: the rest", id="kw-b", compact=True)
                yield Select([], prompt="unit", id="kw-unit", compact=True)
            yield FrameGrid(TOP_GRID, key_column="term", empty_text="keywords appear once every stage has run", id="kw-grid")
            yield Static("", id="keywords-legend")
        yield KwicPanel(id="kw-kwic")

    @property
    def grid(self) -> FrameGrid:
        return self.query_one("#kw-grid", FrameGrid)

    def main_widget(self) -> Widget | None:
        return self.grid

    @property
    def outputs(self) -> RunOutputs | None:
        session = self.session
        return session.outputs if session is not None else None

    # ------------------------------------------------------------------ data

    def outputs_changed(self, session: Session) -> None:
        if session.outputs is None or session.outputs.weighed is None:
            return
        self.pair_tables.clear()
        self._fill_choices()
        self._show()

    def _fill_choices(self) -> None:
        outputs = self.outputs
        if outputs is None:
            return
        scopes = K.keyword_scopes(outputs)
        ids = [key for key, _ in scopes]
        if self.scope not in ids:
            self.scope = ids[0] if ids else None
        rankings = K.RANKINGS[K.scope_kind(self.scope)]
        if self.ranking not in [key for key, _ in rankings]:
            self.ranking = rankings[0][0]
        groupings = K.group_columns(outputs)
        if self.grouping not in groupings:
            self.grouping = groupings[0] if groupings else None
        values = K.group_values(outputs, self.grouping)
        if self.group_a not in values:
            self.group_a = values[0] if values else None
        if self.group_b not in values:
            self.group_b = None
        units = K.units(outputs)
        if self.unit not in units:
            self.unit = POOLED if POOLED in units else (units[0] if units else None)
        with self.prevent(Select.Changed):
            self._set("#kw-scope", [(label, key) for key, label in scopes], self.scope)
            self._set("#kw-ranking", [(label, key) for key, label in rankings], self.ranking)
            self._set("#kw-group", [(g, g) for g in groupings], self.grouping)
            self._set("#kw-a", [(f"A: {v}", v) for v in values], self.group_a)
            self._set("#kw-b", [(f"B: {v}", v) for v in values], self.group_b)
            self._set("#kw-unit", [("all languages" if u == POOLED else u, u) for u in units], self.unit)
        self._show_controls()

    def _set(self, select_id: str, options: list[tuple[str, str]], value: str | None) -> None:
        select = self.query_one(select_id, Select)
        select.set_options(options)
        select.value = value if value in [v for _, v in options] else Select.NULL

    def _show_controls(self) -> None:
        top, compare = self.mode == MODE_TOP, self.mode == MODE_COMPARE
        for select_id in ("#kw-scope", "#kw-ranking"):
            self.query_one(select_id).display = top
        for select_id in ("#kw-group", "#kw-a", "#kw-b", "#kw-unit"):
            self.query_one(select_id).display = compare

    def _show(self) -> None:
        outputs = self.outputs
        if outputs is None or outputs.weighed is None:
            return
        legend = self.query_one("#keywords-legend", Static)
        if self.mode == MODE_TOP:
            frame = K.top_keywords(outputs, self.scope or "", self.ranking)
            top = float(frame["score"].max()) if len(frame) else 0.0
            frame["bar"] = [bar(float(v), top, BAR_WIDTH) for v in frame["score"]]
            self.grid.columns = TOP_GRID
            self.grid.key_column = "term"
            self.grid.empty_text = "no keywords in this scope"
            self.grid.set_frame(frame)
            legend.update(K.top_legend(outputs, self.scope, self.ranking))
        elif self.mode == MODE_COMPARE:
            self._show_pair(outputs)
        else:
            frame, columns, note = K.concepts(outputs)
            self.grid.columns = [
                GridColumn(key, label, None if key == "concept" else 7, "left" if key == "concept" else "right", _share if share else None)
                for key, label, share in columns
            ]
            self.grid.key_column = "concept"
            self.grid.empty_text = "no concepts"
            self.grid.set_frame(frame)
            legend.update(note)

    def _show_pair(self, outputs: RunOutputs) -> None:
        legend = self.query_one("#keywords-legend", Static)
        tables = dict(outputs.compared.tables) if outputs.compared is not None else {}
        computed = self.group_b is None or self.group_b == outputs.study.compare.reference
        if self.grouping and self.group_b is not None and (self.grouping, self.group_b) in self.pair_tables:
            tables.update(self.pair_tables[(self.grouping, self.group_b)])
            computed = True
        frame, note = K.two_groups(tables, outputs, self.grouping, self.group_a, self.group_b, self.unit, computed)
        self.grid.columns = COMPARE_GRID
        self.grid.key_column = "term"
        if frame is None:
            self.grid.empty_text = note
            self.grid.set_frame(pd.DataFrame(columns=K.KEYNESS_COLUMNS + ["bar"]))
            legend.update(note)
            assert self.grouping is not None and self.group_b is not None
            self._want_pair = (self.grouping, self.group_b)
            # Choosing groups one after the other should cost one comparison, not one per step.
            if self._pair_timer is not None:
                self._pair_timer.stop()
            self._pair_timer = self.set_timer(PAIR_DELAY, self._start_pair)
            return
        top = float(frame["log_ratio"].abs().max()) if len(frame) else 0.0
        frame["bar"] = [
            ("-" if v < 0 else "") + bar(abs(float(v)), top, BAR_WIDTH) for v in frame["log_ratio"].astype(float)
        ]
        self.grid.empty_text = note if frame.empty else "no terms"
        self.grid.set_frame(frame)
        legend.update(note)

    def _start_pair(self) -> None:
        """Run the comparison asked for last, unless one is already running (it starts the next when done)."""
        self._pair_timer = None
        outputs = self.outputs
        if self._pair_running or self._want_pair is None or outputs is None:
            return
        grouping, reference = self._want_pair
        if (grouping, reference) in self.pair_tables:
            return
        self._pair_running = True
        self._compute_pair(outputs, grouping, reference)

    @work(thread=True, group="pair", exit_on_error=False)
    def _compute_pair(self, outputs: RunOutputs, grouping: str, reference: str) -> None:
        """Run the compare stage with ``reference`` as the reference group (one grouping, no bootstrap)."""
        from workbench.core.compare import compare_corpus

        study = K.pair_study(outputs.study, grouping, reference)
        error = None
        tables: dict[str, pd.DataFrame] = {}
        try:
            tables = compare_corpus(outputs.snapshots["terms"], outputs.weighed, study, Reporter()).tables
        except TermloomError as exc:
            error = str(exc)
        except Exception as exc:  # a bug: one line on screen, the traceback in the log
            self.log.error(traceback.format_exc())
            error = f"internal error ({type(exc).__name__}: {exc})"
        self.app.call_from_thread(self._pair_done, outputs, grouping, reference, tables, error)

    def _pair_done(self, outputs: RunOutputs, grouping: str, reference: str, tables: dict[str, pd.DataFrame], error: str | None) -> None:
        self._pair_running = False
        if outputs is not self.outputs:
            return
        if error:
            self.notify(error, title="Comparison failed", severity="error", timeout=10)
            return
        self.pair_tables[(grouping, reference)] = tables
        if self.mode == MODE_COMPARE:
            self._show()
        if self._want_pair is not None and self._want_pair not in self.pair_tables:
            self._start_pair()

    # ------------------------------------------------------------------ choices

    @on(Select.Changed)
    def _changed(self, event: Select.Changed) -> None:
        value = None if event.value is Select.NULL else str(event.value)
        select_id = event.select.id
        if select_id == "kw-mode":
            self.mode = value or MODE_TOP
            self._show_controls()
        elif select_id == "kw-scope":
            self.scope = value
            self._fill_choices()  # the rankings differ between corpus and group scopes
        elif select_id == "kw-ranking":
            self.ranking = value or self.ranking
        elif select_id == "kw-group":
            self.grouping = value
            self.group_a = self.group_b = None
            self._fill_choices()
        elif select_id == "kw-a":
            self.group_a = value
        elif select_id == "kw-b":
            self.group_b = value
        elif select_id == "kw-unit":
            self.unit = value
        else:
            return
        self._show()

    def action_mode(self, mode: str) -> None:
        self.query_one("#kw-mode", Select).value = {"top": MODE_TOP, "compare": MODE_COMPARE, "concepts": MODE_CONCEPTS}[mode]

    def _cycle(self, select_id: str, step: int, blank: bool = False) -> None:
        select = self.query_one(select_id, Select)
        options: list[Any] = [value for _, value in select._options if value is not Select.NULL]  # noqa: SLF001
        if blank:
            options = [Select.NULL, *options]
        if not options:
            return
        current = select.value if select.value in options else options[0]
        select.value = options[(options.index(current) + step) % len(options)]

    def action_scope(self, step: int) -> None:
        self._cycle("#kw-scope" if self.mode == MODE_TOP else "#kw-a", step)

    def action_pick(self, what: str) -> None:
        """Choose group A, group B, the group column or the unit from a list (type to jump)."""
        outputs = self.outputs
        if outputs is None:
            return
        if self.mode != MODE_COMPARE:
            self.action_mode("compare")
        values = K.group_values(outputs, self.grouping)
        if what == "a":
            choices, current, title, select_id = [(v, v) for v in values], self.group_a, "Group A", "#kw-a"
        elif what == "b":
            choices = [(REST, "the rest (every other group)")] + [(v, v) for v in values]
            current, title, select_id = self.group_b or REST, "Group B", "#kw-b"
        elif what == "grouping":
            choices = [(g, g) for g in K.group_columns(outputs)]
            current, title, select_id = self.grouping, "Group column", "#kw-group"
        else:
            choices = [(u, "all languages (pooled)" if u == POOLED else u) for u in K.units(outputs)]
            current, title, select_id = self.unit, "Compare within", "#kw-unit"
        if not choices:
            self.notify("the study has no group columns to compare (columns.groups)", severity="warning")
            return

        def chosen(value: str | None) -> None:
            if value is not None:
                self.query_one(select_id, Select).value = Select.NULL if value == REST else value

        self.app.push_screen(ChoiceScreen(title, choices, current), chosen)

    def action_ranking(self) -> None:
        self._cycle("#kw-ranking", 1)

    def action_filters(self) -> None:
        self.focus_now(self.query_one("#kw-mode", Select))

    def action_kwic(self) -> None:
        outputs = self.outputs
        row = self.grid.current_row()
        if outputs is None or row is None:
            return
        expected = list(outputs.study.languages.expected)
        targets: list[tuple[str | None, str]]
        if self.mode == MODE_CONCEPTS:
            concept = str(row.get("concept", ""))
            targets = list(K.concept_terms(outputs, concept))
            label = f"concept '{concept}'"
        else:
            unit = K.scope_unit(self.scope) if self.mode == MODE_TOP else self.unit
            term, language = K.term_and_language(str(row.get("term", "")), unit, expected)
            # A pooled row without a language tag is a glossary concept: its terms in every language.
            pairs = K.concept_terms(outputs, term) if language is None else []
            if pairs:
                targets, label = list(pairs), f"concept '{term}'"
            else:
                targets = [(language, term)]
                label = f"'{term}' ({language or 'every language'})"
        answers = None
        if self.mode == MODE_COMPARE and self.grouping and self.group_a and self.group_b:
            # Comparing two named groups: the lines of their answers only.
            answers = K.answers_of_groups(outputs, self.grouping, [self.group_a, self.group_b])
            label += f" in {self.group_a} and {self.group_b}"
        self.query_one(KwicPanel).show_targets(label, outputs, targets, answers)

    def check_action(self, action: str, parameters: tuple[object, ...]) -> bool | None:
        if action == "close_kwic":
            return self.query_one(KwicPanel).has_class("-shown")
        return True

    def action_close_kwic(self) -> None:
        self.query_one(KwicPanel).hide()
        self.focus_now(self.grid)
