"""Answers: a virtual table of every answer with filters, and keys that record decisions.

Decisions show at once as an overlay on the affected rows (so the user sees
the new language before recomputation ends); the next results replace the
overlay.
"""

from __future__ import annotations

from typing import Any, ClassVar

import numpy as np

from rich.text import Text
from textual import on
from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import Horizontal
from textual.widget import Widget
from textual.widgets import Input, Select, Static

from workbench.core import corpus as C
from workbench.core.errors import TermloomError
from workbench.core.profiles import load_profile
from workbench.ui.answer_filter import ANY_FLAG, EXCLUDED, FALLBACK, SUSPECT, UNFLAGGED, AnswerIndex, AnswerQuery
from workbench.ui.screens.answer_screen import AnswerScreen
from workbench.ui.screens.choice_screen import ChoiceScreen
from workbench.ui.session import Session
from workbench.ui.widgets.frame_grid import FrameGrid, GridColumn
from workbench.ui.widgets.view_base import ViewBase


def highlight_placeholders(text: str) -> Text:
    """The text with every masking placeholder (``⟨email⟩``…) styled, so masks stand out."""
    shown = Text(text)
    from workbench.core.pii import PLACEHOLDER_RE  # here, not at import: pii loads phonenumbers

    for match in PLACEHOLDER_RE.finditer(text):
        shown.stylize("bold reverse", match.start(), match.end())
    return shown


def language_name(code: str) -> str:
    """The language's name from its profile, or '' when there is none."""
    try:
        return load_profile(code).name
    except TermloomError:
        return ""


def _confidence(value: Any) -> str:
    try:
        return f"{float(value):.2f}"
    except (TypeError, ValueError):
        return ""


def _language(value: Any) -> tuple[str, str]:
    code = "" if value is None else str(value)
    return code, "bold red" if code == "und" else "bold"


def _source(value: Any) -> tuple[str, str]:
    source = "" if value is None else str(value)
    short = {"detector": "det", "hint": "hint", "default": "dflt", "decision": "you"}.get(source, source[:4])
    return short, "bold green" if source == "decision" else ("yellow" if source in ("hint", "default") else "dim")


def _flags(value: Any) -> tuple[str, str]:
    if value is None or not len(value):
        return "", ""
    return ",".join(str(v) for v in value), "yellow"


def _text(value: Any) -> str | Text:
    text = "" if value is None else str(value)
    return highlight_placeholders(text) if "⟨" in text else text


def _state(value: Any) -> tuple[str, str]:
    return {"out": "✗", "in": "", "junk": "·"}.get(str(value), ""), "red"


COLUMNS = [
    GridColumn("_state", "", 1, format=_state),
    GridColumn(C.LANGUAGE, "lang", 4, format=_language),
    GridColumn(C.CONFIDENCE, "conf", 4, "right", _confidence),
    GridColumn(C.LANGUAGE_SOURCE, "by", 4, format=_source),
    GridColumn(C.FLAGS, "flags", 14, format=_flags),
    GridColumn(C.RESPONDENT_ID, "respondent", 10),
    GridColumn(C.CLEAN_TEXT, "answer", format=_text),
]

BLANK = Select.NULL


class AnswersView(ViewBase):
    TITLE = "Answers"

    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("m", "suspects", "Suspects", tooltip="Show answers whose detected language looks wrong, least sure first (toggle)"),
        Binding("b", "fallbacks", "By fallback", show=False, tooltip="Show answers labelled by the hint / default language, not the detector (toggle)"),
        Binding("l", "set_language", "Language", tooltip="Set the language of the marked answers, or of this one"),
        Binding("n", "toggle_non_answer", "Non-answer", tooltip="Mark this answer as a non-answer, or as a real answer"),
        Binding("x", "toggle_exclude", "Exclude", tooltip="Exclude the marked answers (or this one) from the analysis, or include them again"),
        Binding("space", "mark", "Mark", show=False, tooltip="Mark / unmark this answer (l and x act on marked answers)"),
        Binding("enter", "open_answer", "Open", show=False, tooltip="Open the full text with masks highlighted"),
        Binding("f", "filters", "Filters", show=False, tooltip="Go to the filter bar (Tab moves on)"),
        Binding("c", "clear_filters", "Clear", show=False, tooltip="Clear every filter"),
        Binding("o", "order", "Order", show=False, tooltip="Order by input / by lowest confidence"),
    ]

    def __init__(self, *, id: str | None = None) -> None:
        super().__init__(id=id)
        self.index: AnswerIndex | None = None
        self.query_state = AnswerQuery()
        self._choices_key: tuple[Any, ...] = ()

    def compose(self) -> ComposeResult:
        with Horizontal(id="answer-filters", classes="filter-bar"):
            yield Input(placeholder="/ search", id="answer-search", compact=True)
            yield Select([], prompt="language", id="filter-language", compact=True)
            yield Select([], prompt="flag", id="filter-flag", compact=True)
            yield Select([], prompt="group", id="filter-group", compact=True)
            yield Select([], prompt="question", id="filter-question", compact=True)
        yield FrameGrid(COLUMNS, key_column=C.ANSWER_ID, empty_text="no answers match", id="answers-grid")
        yield Static("", id="answers-count", classes="count-line")

    @property
    def grid(self) -> FrameGrid:
        return self.query_one("#answers-grid", FrameGrid)

    def main_widget(self) -> Widget | None:
        return self.grid

    def search_box(self) -> Widget | None:
        return self.query_one("#answer-search", Input)

    # ------------------------------------------------------------------ data

    def outputs_changed(self, session: Session) -> None:
        outputs = session.outputs
        if outputs is None or not outputs.snapshots:
            return
        answers = outputs.answers.copy(deep=False)
        decisions = session.active()
        excluded = {key for key, value in decisions.exclude.items() if value}
        answers["_state"] = self._states(answers, excluded)
        if C.CLEAN_TEXT not in answers:
            answers[C.CLEAN_TEXT] = answers[C.RAW_TEXT]
        shown = self._shown_ids()
        self.index = AnswerIndex(answers, session.study.identify.min_confidence, excluded)
        self.grid.overlay.clear()
        self._fill_choices()
        self.grid.set_frame(self.index.frame, self._stable(self.index.select(self.query_state), shown))
        self._count()

    def _shown_ids(self) -> list[str]:
        if self.index is None or not self.grid.row_count:
            return []
        return [str(v) for v in self.index.ids[self.grid._positions]]  # noqa: SLF001 - the rows on screen

    def _stable(self, matches: np.ndarray, shown: list[str]) -> np.ndarray:
        """New results keep the rows on screen in place (a decided answer no longer suspect stays
        until the filter changes), so the row under the cursor never shifts while reviewing;
        new matches come after them."""
        assert self.index is not None
        if not shown:
            return matches
        kept = [p for p in (self.index.position(i) for i in shown) if p is not None]
        seen = set(kept)
        extra = [int(p) for p in matches if int(p) not in seen]
        return np.asarray(kept + extra, dtype=np.int64)

    @staticmethod
    def _states(answers: Any, excluded: set[str]) -> list[str]:
        ids = answers[C.ANSWER_ID].tolist()
        if C.ENTERS_WEIGHTING in answers:
            enters = answers[C.ENTERS_WEIGHTING].tolist()
        else:
            enters = [True] * len(ids)
        return ["out" if key in excluded else ("in" if enter else "junk") for key, enter in zip(ids, enters, strict=True)]

    def _fill_choices(self) -> None:
        assert self.index is not None
        languages = self.index.languages()
        flags = [SUSPECT, FALLBACK, ANY_FLAG, UNFLAGGED, EXCLUDED, *self.index.flag_codes()]
        groups = self.index.groups()
        questions = self.index.questions()
        key = (tuple(languages), tuple(flags), tuple(groups), tuple(questions))
        if key == self._choices_key:
            return
        self._choices_key = key
        with self.prevent(Select.Changed):
            for select_id, values, current in (
                ("#filter-language", languages, self.query_state.language),
                ("#filter-flag", flags, self.query_state.flag),
                ("#filter-group", groups, self.query_state.group),
                ("#filter-question", questions, self.query_state.question),
            ):
                select = self.query_one(select_id, Select)
                select.set_options([(value, value) for value in values])
                select.value = current if current in values else BLANK

    def _count(self) -> None:
        if self.index is None:
            return
        shown = self.grid.row_count
        suspect = int(self.index.suspect().sum())
        fallback = int(self.index.fallback().sum())
        marked = len(self.grid.marks)
        parts = [f"{shown:,} of {self.index.size:,} answers"]
        if suspect:
            parts.append(f"{suspect:,} suspect languages (m)")
        if fallback:
            parts.append(f"{fallback:,} by fallback (b)")
        if marked:
            parts.append(f"{marked} marked")
        if self.query_state.order == "confidence":
            parts.append("lowest confidence first")
        self.query_one("#answers-count", Static).update(" · ".join(parts), layout=False)

    def apply_query(self, query: AnswerQuery) -> None:
        self.query_state = query
        if self.index is None:
            return
        self.grid.set_positions(self.index.select(query), self.grid.current_key())
        self._count()

    # ------------------------------------------------------------------ filters

    @on(Input.Changed, "#answer-search")
    def _search_changed(self, event: Input.Changed) -> None:
        self.apply_query(_with(self.query_state, text=event.value))

    @on(Select.Changed)
    def _select_changed(self, event: Select.Changed) -> None:
        field = {
            "filter-language": "language",
            "filter-flag": "flag",
            "filter-group": "group",
            "filter-question": "question",
        }.get(event.select.id or "")
        if field is None:
            return
        value = "" if event.value is BLANK else str(event.value)
        self.apply_query(_with(self.query_state, **{field: value}))

    def action_filters(self) -> None:
        self.focus_now(self.query_one("#filter-language", Select))

    def action_suspects(self) -> None:
        self._toggle_flag(SUSPECT)

    def action_fallbacks(self) -> None:
        self._toggle_flag(FALLBACK)

    def _toggle_flag(self, flag: str) -> None:
        on = self.query_state.flag != flag
        query = _with(self.query_state, flag=flag if on else "", order="confidence" if on else "input")
        with self.prevent(Select.Changed):
            self.query_one("#filter-flag", Select).value = flag if on else BLANK
        self.apply_query(query)
        self.focus_now(self.grid)

    def action_clear_filters(self) -> None:
        with self.prevent(Select.Changed, Input.Changed):
            self.query_one("#answer-search", Input).value = ""
            for select in self.query(Select):
                select.value = BLANK
        self.apply_query(AnswerQuery())

    def action_order(self) -> None:
        order = "input" if self.query_state.order == "confidence" else "confidence"
        self.apply_query(_with(self.query_state, order=order))

    # ------------------------------------------------------------------ decisions

    def _targets(self) -> list[str]:
        marked = [key for key in self.grid.marks]
        if marked:
            return marked
        key = self.grid.current_key()
        return [key] if key is not None else []

    def action_mark(self) -> None:
        key = self.grid.current_key()
        if key is None:
            return
        self.grid.marks.symmetric_difference_update({key})
        self.grid.refresh_key(key)
        self.grid.action_cursor(1)
        self._count()

    def action_set_language(self) -> None:
        session = self.session
        targets = self._targets()
        if session is None or not targets:
            return
        row = self.grid.current_row() or {}
        choices = [(code, f"{code:<4}{language_name(code)}") for code in session.study.languages.expected]
        choices.append(("und", "und undetermined"))
        title = f"Language of {len(targets)} marked answers" if len(targets) > 1 else f"Language of {targets[0]}"
        detail = "" if len(targets) > 1 else str(row.get(C.CLEAN_TEXT) or row.get(C.RAW_TEXT) or "")[:300]

        def chosen(code: str | None) -> None:
            if code is None:
                return
            for key in targets:
                if not self.termloom.decide("language", key, code):
                    return
                self.grid.overlay.setdefault(key, {}).update({C.LANGUAGE: code, C.LANGUAGE_SOURCE: "decision"})
                self.grid.refresh_key(key)
            self.grid.marks.clear()
            self.grid.refresh()
            self._count()
            self.notify(f"{len(targets)} answer{'s' if len(targets) > 1 else ''} set to {code}", timeout=3)

        self.app.push_screen(ChoiceScreen(title, choices, str(row.get(C.LANGUAGE, "")), detail), chosen)

    def _is_non_answer(self, key: str, row: dict[str, Any]) -> bool:
        decided = self.termloom.active_decisions().non_answer.get(key)
        if decided is not None:
            return decided
        flags = row.get(C.FLAGS)
        from workbench.core.nonanswer import JUNK_CODES  # here, not at import: nonanswer loads emoji

        return bool(flags is not None and any(str(f) in JUNK_CODES for f in flags))

    def action_toggle_non_answer(self) -> None:
        key = self.grid.current_key()
        row = self.grid.current_row()
        if key is None or row is None:
            return
        now = not self._is_non_answer(key, row)
        if self.termloom.decide("non_answer", key, "1" if now else "0"):
            self.grid.overlay.setdefault(key, {})["_state"] = "junk" if now else "in"
            self.grid.refresh_key(key)
            self.notify(f"{key} {'is' if now else 'is not'} a non-answer", timeout=3)

    def action_toggle_exclude(self) -> None:
        targets = self._targets()
        if not targets:
            return
        excluded = self.termloom.active_decisions().exclude
        for key in targets:
            now = not excluded.get(key, False)
            if not self.termloom.decide("exclude", key, "1" if now else "0"):
                return
            self.grid.overlay.setdefault(key, {})["_state"] = "out" if now else "in"
            self.grid.refresh_key(key)
        self.grid.marks.clear()
        self.grid.refresh()
        self._count()

    def action_open_answer(self) -> None:
        row = self.grid.current_row()
        if row is not None:
            self.app.push_screen(AnswerScreen(row))

    @on(FrameGrid.Chosen, "#answers-grid")
    def _chosen(self) -> None:
        self.action_open_answer()


def _with(query: AnswerQuery, **changes: Any) -> AnswerQuery:
    from dataclasses import replace

    return replace(query, **changes)
