"""Terms: each language's vocabulary with frequencies and stop-word status.

Keys record stop-word and lemma decisions; the terms stage (and everything
after it) is then recomputed, and the counts here follow.
"""

from __future__ import annotations

from typing import Any, ClassVar

import numpy as np
import pandas as pd
from textual import on
from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import Horizontal, Vertical
from textual.widget import Widget
from textual.widgets import Input, Select, Static

from workbench.ui.screens.prompt_screen import PromptScreen
from workbench.ui.session import Session
from workbench.ui.widgets.frame_grid import FrameGrid, GridColumn
from workbench.ui.widgets.kwic_panel import KwicPanel
from workbench.ui.widgets.view_base import ViewBase

SHOW_ALL, SHOW_CONTENT, SHOW_STOP = "all terms", "content terms", "stop words"


def terms_frame(vocabulary: pd.DataFrame | None, stop_hits: pd.DataFrame | None) -> pd.DataFrame:
    """One table per language: the kept terms and the stop words removed, each with ``tf`` and ``df``.

    The terms stage hands on the two separately (``vocabularies`` and
    ``stop_hits``); ``stop`` says which list a row came from.
    """
    parts = []
    for table, stop in ((vocabulary, False), (stop_hits, True)):
        if table is not None and len(table):
            part = table[["term", "tf", "df"]].copy()
            part["stop"] = stop
            parts.append(part)
    if not parts:
        return pd.DataFrame({"term": [], "tf": [], "df": [], "stop": []})
    frame = pd.concat(parts, ignore_index=True)
    frame["term"] = frame["term"].astype(str)
    return frame.sort_values(["tf", "term"], ascending=[False, True], kind="stable").reset_index(drop=True)


def _stop(value: Any) -> tuple[str, str]:
    return ("stop", "red") if bool(value) else ("", "")


def _count(value: Any) -> str:
    try:
        return f"{int(value):,}"
    except (TypeError, ValueError):
        return ""


class TermsView(ViewBase):
    TITLE = "Terms"

    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("s", "toggle_stop", "Stop word", tooltip="Make this term a stop word, or not"),
        Binding("equals_sign", "lemma", "Lemma", tooltip="Count this term as another term (lemma override)"),
        Binding("space", "mark", "Mark", show=False, tooltip="Mark a term to merge into another"),
        Binding("M", "merge", "Merge", tooltip="Merge the marked term into the term under the cursor"),
        Binding("k", "kwic", "In context", tooltip="Show the answers holding this term, in context"),
        Binding("left_square_bracket", "language(-1)", "Prev lang", show=False, tooltip="Previous language"),
        Binding("right_square_bracket", "language(1)", "Next lang", tooltip="Next language"),
        Binding("v", "cycle_show", "Show", show=False, tooltip="Show all terms / content terms / stop words"),
        Binding("escape", "close_kwic", "Close", show=False, tooltip="Close the context panel"),
    ]

    def __init__(self, *, id: str | None = None) -> None:
        super().__init__(id=id)
        self.language: str | None = None
        self.frames: dict[str, pd.DataFrame] = {}
        self.show = SHOW_ALL
        self.search = ""
        self.marked: str | None = None

    def compose(self) -> ComposeResult:
        with Vertical(id="terms-main"):
            with Horizontal(classes="filter-bar"):
                yield Input(placeholder="/ search terms", id="terms-search", compact=True)
                yield Select([], prompt="language", id="terms-language", compact=True)
                yield Select(
                    [(s, s) for s in (SHOW_ALL, SHOW_CONTENT, SHOW_STOP)],
                    id="terms-show",
                    compact=True,
                    allow_blank=False,
                    value=SHOW_ALL,
                )
            yield FrameGrid(
                [
                    GridColumn("term", "term"),
                    GridColumn("tf", "count", 9, "right", _count),
                    GridColumn("df", "answers", 9, "right", _count),
                    GridColumn("stop", "", 5, format=_stop),
                ],
                key_column="term",
                empty_text="the terms stage has not run yet",
                id="terms-grid",
            )
            yield Static("", id="terms-count", classes="count-line")
        yield KwicPanel(id="terms-kwic")

    @property
    def grid(self) -> FrameGrid:
        return self.query_one("#terms-grid", FrameGrid)

    def main_widget(self) -> Widget | None:
        return self.grid

    def search_box(self) -> Widget | None:
        return self.query_one("#terms-search", Input)

    # ------------------------------------------------------------------ data

    def outputs_changed(self, session: Session) -> None:
        outputs = session.outputs
        if outputs is None or outputs.terms is None:
            return
        vocabularies = outputs.terms.vocabularies
        stop_hits = outputs.terms.stop_hits
        self.frames = {
            str(language): terms_frame(vocabularies.get(language), stop_hits.get(language))
            for language in sorted(set(vocabularies) | set(stop_hits))
        }
        languages = sorted(self.frames)
        select = self.query_one("#terms-language", Select)
        with self.prevent(Select.Changed):
            select.set_options([(lang, lang) for lang in languages])
            if languages:
                self.language = self.language if self.language in languages else languages[0]
                select.value = self.language
        self._show(keep=True)

    def _show(self, keep: bool = True) -> None:
        frame = self.frames.get(self.language or "")
        if frame is None:
            self.grid.set_frame(pd.DataFrame(columns=["term", "tf", "df", "stop"]))
            self.query_one("#terms-count", Static).update("")
            return
        mask = np.ones(len(frame), bool)
        if self.show == SHOW_CONTENT:
            mask &= ~frame["stop"].to_numpy(bool)
        elif self.show == SHOW_STOP:
            mask &= frame["stop"].to_numpy(bool)
        if self.search:
            mask &= frame["term"].str.contains(self.search, case=False, regex=False).to_numpy()
        self.grid.marks = {self.marked} if self.marked else set()
        self.grid.set_frame(frame, np.flatnonzero(mask), keep_key=keep)
        stops = int(frame["stop"].sum())
        parts = [f"{int(mask.sum()):,} of {len(frame):,} terms in {self.language}", f"{stops:,} stop words"]
        if self.marked:
            parts.append(f"marked '{self.marked}': M merges it into the term under the cursor")
        self.query_one("#terms-count", Static).update(" · ".join(parts), layout=False)

    # ------------------------------------------------------------------ filters

    @on(Input.Changed, "#terms-search")
    def _search(self, event: Input.Changed) -> None:
        self.search = event.value.strip()
        self._show()

    @on(Select.Changed, "#terms-language")
    def _language_chosen(self, event: Select.Changed) -> None:
        if event.value is not Select.NULL:
            self.language = str(event.value)
            self.marked = None
            self._show(keep=False)

    @on(Select.Changed, "#terms-show")
    def _show_chosen(self, event: Select.Changed) -> None:
        self.show = str(event.value)
        self._show()

    def action_language(self, step: int) -> None:
        languages = sorted(self.frames)
        if not languages:
            return
        index = languages.index(self.language) if self.language in languages else 0
        self.query_one("#terms-language", Select).value = languages[(index + step) % len(languages)]

    def action_cycle_show(self) -> None:
        order = [SHOW_ALL, SHOW_CONTENT, SHOW_STOP]
        self.query_one("#terms-show", Select).value = order[(order.index(self.show) + 1) % len(order)]

    # ------------------------------------------------------------------ decisions

    def _current(self) -> dict[str, Any] | None:
        row = self.grid.current_row()
        if row is None or not self.language:
            return None
        return row

    def action_toggle_stop(self) -> None:
        row = self._current()
        if row is None or self.language is None:
            return
        term, is_stop = str(row["term"]), bool(row["stop"])
        kind = "stop_remove" if is_stop else "stop_add"
        if self.termloom.decide(kind, term, "1", self.language):
            self.grid.overlay.setdefault(term, {})["stop"] = not is_stop
            self.grid.refresh_key(term)
            self.notify(f"'{term}' {'is no longer' if is_stop else 'is now'} a stop word in {self.language}", timeout=3)

    def action_lemma(self) -> None:
        row = self._current()
        if row is None or self.language is None:
            return
        term, language = str(row["term"]), self.language

        def chosen(lemma: str | None) -> None:
            if lemma and lemma != term and self.termloom.decide("lemma", term, lemma, language):
                self.notify(f"'{term}' now counts as '{lemma}' in {language}", timeout=3)

        self.app.push_screen(PromptScreen(f"Count '{term}' ({language}) as which term?", value=term), chosen)

    def action_mark(self) -> None:
        row = self._current()
        if row is None:
            return
        term = str(row["term"])
        self.marked = None if self.marked == term else term
        self.grid.marks = {self.marked} if self.marked else set()
        self.grid.refresh()
        self._show()

    def action_merge(self) -> None:
        row = self._current()
        if row is None or self.language is None:
            return
        target = str(row["term"])
        if not self.marked or self.marked == target:
            self.notify("mark a term with Space first, then press M on the term to merge it into", severity="warning")
            return
        source, self.marked = self.marked, None
        if self.termloom.decide("lemma", source, target, self.language):
            self.notify(f"'{source}' merged into '{target}' ({self.language})", timeout=3)
        self._show()

    def action_kwic(self) -> None:
        row = self._current()
        session = self.session
        if row is None or session is None or self.language is None:
            return
        if session.outputs is None:
            return
        term = str(row["term"])
        self.query_one(KwicPanel).show_targets(f"'{term}' ({self.language})", session.outputs, [(self.language, term)])

    def check_action(self, action: str, parameters: tuple[object, ...]) -> bool | None:
        if action == "close_kwic":
            # Escape falls through to the app (cancel work) when the panel is closed.
            return self.query_one(KwicPanel).has_class("-shown")
        return True

    def action_close_kwic(self) -> None:
        self.query_one(KwicPanel).hide()
        self.focus_now(self.grid)
