"""Sources: what ingest decided about each file, a preview of the rows, and the column roles.

Roles are edited in memory with one key each and written into the study file
with ``ctrl+s`` (only its ``[columns]`` table changes); the study is then read
again and recomputed from ingest.
"""

from __future__ import annotations

from pathlib import Path
from typing import ClassVar

import pandas as pd
from rich.text import Text
from textual import work
from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import Horizontal, Vertical
from textual.widget import Widget
from textual.widgets import Static

from workbench.core.errors import TermloomError
from workbench.core.settings import Columns
from workbench.ui.session import Session
from workbench.ui.study_file import columns_table, write_columns
from workbench.ui.widgets.frame_grid import FrameGrid, GridColumn
from workbench.ui.widgets.view_base import ViewBase

ROLE_STYLE = {"id": "bold cyan", "text": "bold green", "group": "magenta", "weight": "yellow", "hint": "blue"}
#: Rows of each source shown in the preview.
PREVIEW_ROWS = 200


def roles_of(columns: Columns) -> dict[str, str]:
    """Column name -> role, read from the study's ``[columns]`` table."""
    roles: dict[str, str] = {}
    for name in columns.groups:
        roles[name] = "group"
    for name in columns.text:
        roles[name] = "text"
    if columns.weight:
        roles[columns.weight] = "weight"
    if columns.language_hint:
        roles[columns.language_hint] = "hint"
    if columns.id:
        roles[columns.id] = "id"
    return roles


def _width(values: pd.Series, name: str, widest: int = 16) -> int:
    """Room for the column's name and its longest value among the rows shown, at most ``widest``."""
    longest = int(values.astype(str).str.len().max()) if len(values) else 0
    return max(2, min(widest, max(len(name), longest)))


def _role_cell(value: object) -> tuple[str, str]:
    role = str(value or "")
    return role or "·", ROLE_STYLE.get(role, "dim")


class SourcesView(ViewBase):
    TITLE = "Sources"

    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("i", "role('id')", "Id", tooltip="This column is the respondent id"),
        Binding("t", "role('text')", "Text", tooltip="This column holds answers (toggle)"),
        Binding("g", "role('group')", "Group", tooltip="This column is a group to compare (toggle)"),
        Binding("w", "role('weight')", "Weight", show=False, tooltip="This column is the respondent weight"),
        Binding("h", "role('hint')", "Hint", show=False, tooltip="This column hints at the language"),
        Binding("delete,backspace", "role('')", "No role", show=False, tooltip="This column has no role"),
        Binding("R", "revert_roles", "Revert", show=False, tooltip="Forget unsaved role changes (back to the study file)"),
        Binding("ctrl+s", "save_roles", "Save roles", tooltip="Write the column roles into the study file and re-read the data"),
        Binding("n", "next_source", "Next source", show=False, tooltip="Preview the next source file"),
        Binding("p", "focus_preview", "Preview", show=False, tooltip="Go to the data preview"),
    ]

    def __init__(self, *, id: str | None = None) -> None:
        super().__init__(id=id)
        self.roles: dict[str, str] = {}
        self.order: list[str] = []
        self.saved_roles: dict[str, str] = {}
        self.peeks: list[tuple[pd.DataFrame | None, str]] = []
        self.source_index = 0

    def compose(self) -> ComposeResult:
        yield Static("no study open", id="sources-report")
        with Horizontal(id="sources-body"):
            with Vertical(id="roles-box"):
                yield Static("Column roles", id="roles-title", classes="box-title")
                yield FrameGrid(
                    [GridColumn("column", "column"), GridColumn("role", "role", 7, format=_role_cell)],
                    key_column="column",
                    empty_text="columns appear after import",
                    id="roles-grid",
                )
            with Vertical(id="preview-box"):
                yield Static("Preview", id="preview-title", classes="box-title")
                yield FrameGrid([], key_column="#", empty_text="no rows yet", id="preview-grid")

    def main_widget(self) -> Widget | None:
        return self.query_one("#roles-grid", FrameGrid)

    def study_opened(self, session: Session) -> None:
        self.saved_roles = roles_of(session.study.columns)
        self.roles = dict(self.saved_roles)
        self.order = list(self.roles)
        self._show_roles()
        self._peek(session)

    @work(thread=True, group="peek", exclusive=True, exit_on_error=False)
    def _peek(self, session: Session) -> None:
        """Read the first rows of every source (with every column, text included) for the preview."""
        from workbench.core.ingest import peek_source

        peeks: list[tuple[pd.DataFrame | None, str]] = []
        for source in session.study.sources:
            try:
                frame, report = peek_source(source.path, PREVIEW_ROWS)
            except TermloomError as exc:
                peeks.append((None, str(exc)))
            except OSError as exc:
                peeks.append((None, f"{source.path} cannot be read ({exc.strerror}); fix sources.path in the study"))
            else:
                peeks.append((frame, ", ".join(report.columns)))
        self.app.call_from_thread(self._peeked, session, peeks)

    def _peeked(self, session: Session, peeks: list[tuple[pd.DataFrame | None, str]]) -> None:
        self.peeks = peeks
        seen: list[str] = []
        for frame, _ in peeks:
            if frame is not None:
                seen += [str(c) for c in frame.columns if str(c) not in seen]
        # File order first; roles naming a column the files lack stay listed (ingest will say so).
        self.order = seen + [c for c in self.order if c not in seen]
        self._show_roles()
        self._show_preview()
        if session.outputs is None:
            problems = [text for frame, text in peeks if frame is None]
            if problems:
                self.query_one("#sources-report", Static).update(Text("\n".join(problems), style="red"))

    def _show_preview(self) -> None:
        preview = self.query_one("#preview-grid", FrameGrid)
        frames = [frame for frame, _ in self.peeks if frame is not None]
        if not frames:
            return
        frame = frames[self.source_index % len(frames)].copy()
        frame.insert(0, "#", range(1, len(frame) + 1))
        preview.key_column = "#"
        names = [str(c) for c in frame.columns]
        # Answer columns right after the row number, so they keep room to be read.
        text = [c for c in names if self.roles.get(c) == "text"]
        columns = ["#", *text, *[c for c in names if c != "#" and c not in text]][:14]
        preview.columns = [
            GridColumn(c, c, None if self.roles.get(c) == "text" else _width(frame[c], c, 12)) for c in columns
        ]
        if not any(self.roles.get(c) == "text" for c in columns) and len(preview.columns) > 1:
            last = preview.columns[-1]
            preview.columns[-1] = GridColumn(last.key, last.label)
        preview.set_frame(frame)
        label = f"Preview: first {len(frame)} rows"
        if len(frames) > 1:
            label += f" of source {self.source_index % len(frames) + 1}/{len(frames)} (n: next source)"
        self.query_one("#preview-title", Static).update(label)

    def action_next_source(self) -> None:
        self.source_index += 1
        self._show_preview()

    def outputs_changed(self, session: Session) -> None:
        outputs = session.outputs
        if outputs is None or outputs.corpus is None:
            return
        corpus = outputs.corpus
        lines = Text()
        base = session.study.base_dir
        for report in corpus.reports:
            try:
                shown = str(Path(report.path).resolve().relative_to(base))
            except ValueError:
                shown = report.path
            lines.append(f"{report.source}", style="bold")
            details = [f"{report.format}", f"{report.rows:,} rows", f"{len(report.columns)} columns"]
            if report.encoding:
                details.append(f"encoding {report.encoding}")
            if report.delimiter:
                details.append(f"delimiter {report.delimiter!r}")
            if report.sheet is not None:
                details.append(f"sheet {report.sheet}")
            lines.append(f"  {shown} · " + " · ".join(details) + "\n")
            for note in report.notes:
                lines.append(f"    {note}\n", style="dim")
        counts = outputs.ledger.counts().get("row", {})
        lines.append(
            f"{len(corpus.respondents):,} respondents · {len(corpus.answers):,} answers"
            + (f" · {counts.get('dropped', 0):,} rows dropped (see the ledger in the export)" if counts.get("dropped") else "")
        )
        self.query_one("#sources-report", Static).update(lines)
        seen = list(self.order)
        for report in corpus.reports:
            seen += [c for c in report.columns if c not in seen]
        self.order = seen
        self._show_roles()

    def _show_roles(self) -> None:
        frame = pd.DataFrame({"column": self.order, "role": [self.roles.get(c, "") for c in self.order]})
        self.query_one("#roles-grid", FrameGrid).set_frame(frame)
        changed = self.roles != self.saved_roles
        title = "Column roles" + ("  • unsaved: ^s saves" if changed else "")
        self.query_one("#roles-title", Static).update(title)

    def action_role(self, role: str) -> None:
        column = self.query_one("#roles-grid", FrameGrid).current_key()
        if column is None:
            return
        current = self.roles.get(column, "")
        if role in ("id", "weight", "hint"):
            # One column at most holds these roles.
            for name, value in list(self.roles.items()):
                if value == role:
                    del self.roles[name]
        if role == "" or current == role:
            self.roles.pop(column, None)
        else:
            self.roles[column] = role
        self._show_roles()
        self._show_preview()

    def action_revert_roles(self) -> None:
        self.roles = dict(self.saved_roles)
        self._show_roles()
        self._show_preview()

    def action_focus_preview(self) -> None:
        self.focus_now(self.query_one("#preview-grid", FrameGrid))

    def action_save_roles(self) -> None:
        session = self.session
        if session is None or session.study.study_path is None:
            self.notify("open a study first", severity="warning")
            return
        by_role: dict[str, list[str]] = {}
        for column in self.order:
            if column in self.roles:
                by_role.setdefault(self.roles[column], []).append(column)
        if not by_role.get("text"):
            self.notify("mark at least one answer text column with t before saving", severity="warning")
            return
        table = columns_table(
            (by_role.get("id") or [None])[0],
            by_role.get("text", []),
            by_role.get("group", []),
            (by_role.get("weight") or [None])[0],
            (by_role.get("hint") or [None])[0],
        )
        try:
            write_columns(session.study.study_path, table)
        except TermloomError as exc:
            self.notify(str(exc), title="Roles not saved", severity="error", timeout=12)
            return
        self.notify(f"column roles saved to {session.study.study_path.name}; re-reading the data", timeout=5)
        self.termloom.reload_study()
