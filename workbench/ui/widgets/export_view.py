"""Export: choose formats and a folder, write the run, list every file written with its size.

Writes through :func:`workbench.core.export.write_run` with the results on
screen (the same decisions ``termloom run`` applies), so the folder matches a
headless run of the same study.
"""

from __future__ import annotations

import typing
from pathlib import Path
from typing import ClassVar

import pandas as pd
from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import Horizontal, Vertical
from textual.widget import Widget
from textual.widgets import Input, SelectionList, Static

from workbench.core.settings import Export
from workbench.ui.session import Session
from workbench.ui.widgets.frame_grid import FrameGrid, GridColumn
from workbench.ui.widgets.view_base import ViewBase

#: Every format the study file accepts, read from the settings declaration.
FORMATS: tuple[str, ...] = typing.get_args(typing.get_args(Export.model_fields["formats"].annotation)[0])

FORMAT_HELP = {
    "csv": "keyword tables, corpus (CSV, UTF-8 with BOM)",
    "xlsx": "keyword tables as a workbook",
    "json": "keyword tables as JSON",
    "mtx": "matrices, Matrix Market + terms + rows",
    "npz": "matrices, SciPy .npz",
    "parquet": "matrices (long) and corpus, Parquet",
    "dta": "corpus for Stata",
    "png": "charts as PNG",
    "svg": "charts as SVG",
}


def human_size(size: int) -> str:
    """Bytes in the largest unit that keeps a number ≥ 1 (``1.2 MB``)."""
    value = float(size)
    for unit in ("B", "KB", "MB", "GB"):
        if value < 1024 or unit == "GB":
            return f"{value:.0f} {unit}" if unit == "B" else f"{value:.1f} {unit}"
        value /= 1024
    return f"{size} B"


def default_folder(session: Session) -> str:
    """The folder ``termloom run`` would use: ``termloom-out/<study file stem>`` under the current folder."""
    path = session.study.study_path
    stem = path.name.removesuffix(".toml").removesuffix(".study") if path else "study"
    return str(Path("termloom-out") / stem)


class ExportView(ViewBase):
    TITLE = "Export"

    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("w", "write", "Write", tooltip="Write the output folder"),
        Binding("F", "focus_folder", "Folder", tooltip="Edit the output folder"),
        Binding("a", "all_formats", "All formats", show=False, tooltip="Select every format"),
    ]

    def __init__(self, *, id: str | None = None) -> None:
        super().__init__(id=id)
        self.written: list[Path] = []

    def compose(self) -> ComposeResult:
        with Horizontal(id="export-top"):
            with Vertical(id="export-formats-box"):
                yield Static("Formats (Space toggles)", classes="box-title")
                yield SelectionList[str](
                    *((f"{name:<8}{FORMAT_HELP.get(name, '')}", name, True) for name in FORMATS),
                    id="export-formats",
                )
            with Vertical(id="export-folder-box"):
                yield Static("Folder (F to edit, w to write)", classes="box-title")
                yield Input(placeholder="output folder", id="export-folder", compact=True)
                yield Static("", id="export-state")
        yield Static("Files written", classes="box-title")
        yield FrameGrid(
            [GridColumn("file", "file"), GridColumn("size", "size", 10, "right")],
            key_column="file",
            empty_text="nothing written yet — press w",
            id="export-files",
        )

    def main_widget(self) -> Widget | None:
        return self.query_one("#export-formats", SelectionList)

    def study_opened(self, session: Session) -> None:
        selection = self.query_one("#export-formats", SelectionList)
        selection.deselect_all()
        for name in session.study.export.formats:
            selection.select(name)
        self.query_one("#export-folder", Input).value = default_folder(session)

    def action_focus_folder(self) -> None:
        self.focus_now(self.query_one("#export-folder", Input))

    def action_all_formats(self) -> None:
        self.query_one("#export-formats", SelectionList).select_all()

    def on_input_submitted(self, event: Input.Submitted) -> None:
        if event.input.id == "export-folder":
            self.action_write()

    def action_write(self) -> None:
        formats = list(self.query_one("#export-formats", SelectionList).selected)
        folder = self.query_one("#export-folder", Input).value.strip()
        if not formats:
            self.notify("choose at least one format (Space in the list)", severity="warning")
            return
        if not folder:
            self.notify("type an output folder first (F)", severity="warning")
            return
        if self.termloom.export(Path(folder).expanduser(), formats, self.export_done):
            self.query_one("#export-state", Static).update(f"writing {len(formats)} formats…")

    def export_done(self, folder: Path, written: list[Path] | None, error: str | None) -> None:
        state = self.query_one("#export-state", Static)
        if written is None:
            state.update(f"not written: {error}" if error else "cancelled")
            return
        self.written = written
        rows = []
        total = 0
        for path in written:
            size = path.stat().st_size if path.exists() else 0
            total += size
            try:
                shown = str(path.relative_to(folder))
            except ValueError:
                shown = str(path)
            rows.append({"file": shown, "size": human_size(size)})
        self.query_one("#export-files", FrameGrid).set_frame(pd.DataFrame(rows, columns=["file", "size"]))
        state.update(f"{len(written)} files, {human_size(total)} in {folder}")
        self.notify(f"wrote {len(written)} files to {folder}", timeout=5)
