"""A virtual table over a pandas DataFrame: only the visible lines are ever formatted.

Textual's ``DataTable`` copies every cell into widget state, which takes
seconds for 100,000 rows. ``FrameGrid`` keeps a reference to the table and an
array of row positions (the current filter and order) and formats a row only
when ``render_line`` asks for it, so filtering is an array swap and scrolling
costs the same at row 10 and row 100,000.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Any, ClassVar, Literal

import numpy as np
import pandas as pd
from rich.cells import cell_len, set_cell_size
from rich.segment import Segment
from rich.style import Style
from rich.text import Text
from textual import events
from textual.binding import Binding, BindingType
from textual.geometry import Region, Size
from textual.message import Message
from textual.reactive import reactive
from textual.scroll_view import ScrollView
from textual.strip import Strip

from workbench.ui.stray_keys import mark_origin

#: Turns a cell value into text: a ``str``, a ``(str, style)`` pair to colour the
#: whole cell, or a ``rich.text.Text`` to colour parts of it (slower; use sparingly).
Formatter = Callable[[Any], "str | tuple[str, str] | Text"]
_FLAT = str.maketrans({"\n": " ", "\t": " ", "\r": " "})


@dataclass(frozen=True)
class GridColumn:
    """One column shown by a :class:`FrameGrid`; ``width=None`` takes the remaining space."""

    key: str
    label: str
    width: int | None = None
    align: Literal["left", "right"] = "left"
    format: Formatter | None = None
    #: Which end of a too-long text to cut: the end (default) or the start (keeps the text nearest the right edge).
    clip: Literal["end", "start"] = "end"


def _plain(value: Any) -> str:
    if value is None or (isinstance(value, float) and np.isnan(value)):
        return ""
    if isinstance(value, float):
        return f"{value:.3f}"
    if isinstance(value, (list, tuple, np.ndarray)):
        return ",".join(str(v) for v in value)
    return str(value)


class FrameGrid(ScrollView, can_focus=True):
    """Rows of a DataFrame, selected and ordered by a positions array, with a cursor."""

    DEFAULT_CSS = """
    FrameGrid {
        height: 1fr;
        background: $surface;
        scrollbar-size-vertical: 1;
        overflow-x: hidden;
    }
    FrameGrid > .frame-grid--header { text-style: bold; background: $panel; }
    FrameGrid > .frame-grid--cursor { background: $accent 40%; }
    FrameGrid:focus > .frame-grid--cursor { background: $accent; color: $text; }
    FrameGrid > .frame-grid--mark { color: $warning; text-style: bold; }
    FrameGrid > .frame-grid--empty { color: $text-muted; }
    """

    COMPONENT_CLASSES: ClassVar[set[str]] = {
        "frame-grid--header",
        "frame-grid--cursor",
        "frame-grid--mark",
        "frame-grid--empty",
    }

    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("up", "cursor(-1)", "Up", show=False),
        Binding("down", "cursor(1)", "Down", show=False),
        Binding("pageup", "page(-1)", "Page up", show=False),
        Binding("pagedown", "page(1)", "Page down", show=False),
        Binding("home", "edge(0)", "First row", show=False),
        Binding("end", "edge(1)", "Last row", show=False),
        Binding("enter", "choose", "Open", show=False),
    ]

    cursor_row: reactive[int] = reactive(0, always_update=True)

    class Highlighted(Message):
        """The cursor moved to another row."""

        def __init__(self, grid: FrameGrid, key: Any) -> None:
            super().__init__()
            self.grid = grid
            self.key = key

        @property
        def control(self) -> FrameGrid:
            return self.grid

    class Chosen(Message):
        """Enter or a double click on a row."""

        def __init__(self, grid: FrameGrid, key: Any) -> None:
            super().__init__()
            self.grid = grid
            self.key = key

        @property
        def control(self) -> FrameGrid:
            return self.grid

    def __init__(
        self,
        columns: list[GridColumn],
        key_column: str,
        empty_text: str = "nothing to show",
        *,
        id: str | None = None,
        classes: str | None = None,
    ) -> None:
        super().__init__(id=id, classes=classes)
        self.columns = columns
        self.key_column = key_column
        self.empty_text = empty_text
        self._frame = pd.DataFrame()
        self._positions = np.zeros(0, dtype=np.int64)
        self._data: dict[str, np.ndarray] = {}
        self._keys = np.zeros(0, dtype=object)
        #: ``key -> {column: value}`` shown instead of the table's values (pending decisions).
        self.overlay: dict[Any, dict[str, Any]] = {}
        self.marks: set[Any] = set()
        self._styles: dict[str, Style] = {}

    # ------------------------------------------------------------------ data

    @property
    def row_count(self) -> int:
        return len(self._positions)

    @property
    def frame(self) -> pd.DataFrame:
        return self._frame

    def set_frame(self, frame: pd.DataFrame, positions: np.ndarray | None = None, keep_key: bool = True) -> None:
        """Show ``frame`` (rows ``positions``, in that order); the cursor stays on the same key when it can."""
        previous = self.current_key() if keep_key else None
        frame = frame.reset_index(drop=True)
        self._frame = frame
        self._data = {c.key: frame[c.key].to_numpy() for c in self.columns if c.key in frame}
        self._keys = frame[self.key_column].to_numpy() if self.key_column in frame else np.arange(len(frame))
        self.set_positions(np.arange(len(frame)) if positions is None else positions, previous)

    def set_positions(self, positions: np.ndarray, keep: Any = None) -> None:
        """Change which rows are shown without touching the table (a filter keystroke)."""
        self._positions = np.asarray(positions, dtype=np.int64)
        self._set_virtual_height(self.row_count + 1)
        target = 0
        if keep is not None and self.row_count:
            hits = np.flatnonzero(self._keys[self._positions] == keep)
            # A row that left the view (e.g. decided, so no longer suspect) leaves the
            # cursor where it was: on the next row, as when reviewing a list.
            target = int(hits[0]) if len(hits) else self.cursor_row
        self.cursor_row = target
        self.refresh()

    def _set_virtual_height(self, height: int) -> None:
        """Resize the scrollable area; a full screen layout only when the scrollbar appears or goes.

        Assigning ``virtual_size`` always re-lays out the whole screen, which
        costs more than filtering 100,000 rows; when the scrollbar stays as it
        is, only the scrollbar and this widget need redrawing.
        """
        size = Size(self.size.width, height)
        if size == self.virtual_size:
            return
        view = self.size.height
        needs_bar_before = self.virtual_size.height > view
        needs_bar_after = height > view
        if not self.is_mounted or needs_bar_before != needs_bar_after:
            self.virtual_size = size
            return
        self.set_reactive(FrameGrid.virtual_size, size)
        self._scroll_update(size)
        self.scroll_y = self.validate_scroll_y(self.scroll_y)

    def current_key(self) -> Any:
        if not self.row_count:
            return None
        return self._keys[self._positions[min(self.cursor_row, self.row_count - 1)]]

    def current_row(self) -> dict[str, Any] | None:
        """The row under the cursor as a dict of every table column (overlay applied)."""
        if not self.row_count:
            return None
        position = int(self._positions[min(self.cursor_row, self.row_count - 1)])
        row = self._frame.iloc[position].to_dict()
        row.update(self.overlay.get(self._keys[position], {}))
        return row

    def move_to_key(self, key: Any) -> bool:
        hits = np.flatnonzero(self._keys[self._positions] == key) if self.row_count else []
        if len(hits):
            self.cursor_row = int(hits[0])
            return True
        return False

    def refresh_key(self, key: Any) -> None:
        hits = np.flatnonzero(self._keys[self._positions] == key) if self.row_count else []
        for hit in hits:
            self.refresh(Region(0, int(hit) + 1 - int(self.scroll_offset.y), self.size.width, 1))

    # ------------------------------------------------------------------ cursor

    def validate_cursor_row(self, value: int) -> int:
        return max(0, min(value, self.row_count - 1)) if self.row_count else 0

    def watch_cursor_row(self, old: int, new: int) -> None:
        self._scroll_cursor_into_view()
        self.refresh()
        self.post_message(self.Highlighted(self, self.current_key()))

    def _scroll_cursor_into_view(self) -> None:
        visible = max(1, self.size.height - 1)
        top = int(self.scroll_offset.y)
        if self.cursor_row < top:
            self.scroll_to(y=self.cursor_row, animate=False, immediate=True)
        elif self.cursor_row >= top + visible:
            self.scroll_to(y=self.cursor_row - visible + 1, animate=False, immediate=True)

    def action_cursor(self, step: int) -> None:
        self.cursor_row += step

    def action_page(self, direction: int) -> None:
        self.cursor_row += direction * max(1, self.size.height - 2)

    def action_edge(self, end: int) -> None:
        self.cursor_row = self.row_count - 1 if end else 0

    def action_choose(self) -> None:
        if self.row_count:
            self.post_message(self.Chosen(self, self.current_key()))

    def on_key(self, event: events.Key) -> None:
        mark_origin(self, event)

    def on_click(self, event: events.Click) -> None:
        row = int(self.scroll_offset.y) + event.y - 1
        if event.y >= 1 and 0 <= row < self.row_count:
            self.cursor_row = row
            if event.chain >= 2:
                self.action_choose()

    def on_resize(self, event: events.Resize) -> None:
        self.virtual_size = Size(self.size.width, self.row_count + 1)  # the size changed: a layout is due anyway
        self._scroll_cursor_into_view()

    # ------------------------------------------------------------------ drawing

    def _widths(self, width: int) -> list[int]:
        fixed = sum(c.width or 0 for c in self.columns)
        gaps = len(self.columns) + 1  # a mark column, then one space between columns
        flexible = [c for c in self.columns if c.width is None]
        rest = max(8, width - fixed - gaps)
        share = rest // len(flexible) if flexible else 0
        return [c.width if c.width is not None else share for c in self.columns]

    @staticmethod
    def _fit(text: str, width: int, align: str, clip: str = "end") -> str:
        """``text`` cut (with an ellipsis) or padded to exactly ``width`` cells."""
        size = cell_len(text)
        if size > width:
            if width <= 0:
                return ""
            if clip == "start":
                tail = text[-(width - 1):] if width > 1 else ""
                while cell_len(tail) > width - 1:
                    tail = tail[1:]
                return ("…" + tail).rjust(width) if align == "right" else ("…" + tail).ljust(width)
            return set_cell_size(text, max(0, width - 1)) + "…"
        pad = " " * (width - size)
        return pad + text if align == "right" else text + pad

    def _style(self, name: str) -> Style:
        style = self._styles.get(name)
        if style is None:
            style = self._styles[name] = Style.parse(name)
        return style

    def _cell(self, shown: str | tuple[str, str] | Text, width: int, align: str, base: Style, clip: str = "end") -> list[Segment]:
        if isinstance(shown, Text):
            text = shown.copy()
            text.plain = text.plain.translate(_FLAT)
            text.truncate(width, overflow="ellipsis", pad=True)
            if align == "right":
                text.rstrip()
                text = Text(" " * (width - cell_len(text.plain))) + text
            return [Segment(t, base + st if st else base) for t, st, _ in text.render(self.app.console, end="")]
        if isinstance(shown, tuple):
            text, style = shown
            return [Segment(self._fit(str(text).translate(_FLAT), width, align, clip), base + self._style(style) if style else base)]
        return [Segment(self._fit(str(shown).translate(_FLAT), width, align, clip), base)]

    def render_line(self, y: int) -> Strip:
        width = self.size.width
        if y == 0:
            return self._header(width)
        index = int(self.scroll_offset.y) + y - 1
        if index >= self.row_count:
            if index == 0:
                style = self.get_component_rich_style("frame-grid--empty")
                return Strip([Segment(f" {self.empty_text}", style)]).adjust_cell_length(width, self.rich_style)
            return Strip.blank(width, self.rich_style)
        return self._row(index, width)

    def _header(self, width: int) -> Strip:
        style = self.get_component_rich_style("frame-grid--header")
        segments = [Segment(" ", style)]
        for column, size in zip(self.columns, self._widths(width), strict=True):
            segments.append(Segment(self._fit(column.label, size, column.align) + " ", style))
        return Strip(segments).adjust_cell_length(width, style)

    def _row(self, index: int, width: int) -> Strip:
        position = int(self._positions[index])
        key = self._keys[position]
        overlay = self.overlay.get(key, {})
        base = self.rich_style
        if index == self.cursor_row:
            base = base + self.get_component_rich_style("frame-grid--cursor")
        marked = key in self.marks
        segments = [Segment("▸" if marked else " ", base + self.get_component_rich_style("frame-grid--mark") if marked else base)]
        gap = Segment(" ", base)
        for column, size in zip(self.columns, self._widths(width), strict=True):
            if column.key in overlay:
                value = overlay[column.key]
            else:
                data = self._data.get(column.key)
                value = data[position] if data is not None else None
            shown = column.format(value) if column.format else _plain(value)
            segments.extend(self._cell(shown, size, column.align, base, column.clip))
            segments.append(gap)
        return Strip(segments).adjust_cell_length(width, base)
