"""The key reference, opened with ``?``: every key, grouped by where it works."""

from __future__ import annotations

from typing import ClassVar

from rich.table import Table
from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import Vertical, VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Static

from workbench.ui.keymap import KeyAction


class HelpScreen(ModalScreen[None]):
    AUTO_FOCUS = "#help-body"
    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("escape,question_mark,q", "dismiss_help", "Close"),
    ]

    def __init__(self, actions: list[KeyAction]) -> None:
        super().__init__()
        self.actions = actions

    def compose(self) -> ComposeResult:
        table = Table(box=None, show_header=False, padding=(0, 1), expand=True)
        table.add_column("key", style="bold", no_wrap=True, width=14)
        table.add_column("what")
        scope = None
        for action in self.actions:
            if action.scope != scope:
                scope = action.scope
                table.add_row("", "")
                table.add_row(f"[reverse] {scope} [/]", "")
            table.add_row(action.key, action.description)
        table.add_row("", "")
        table.add_row("^p", "command palette: type any action's name")
        with Vertical(classes="dialog help-dialog"):
            yield Static("Keys", classes="dialog-title")
            with VerticalScroll(id="help-body"):
                yield Static(table)
            yield Static("↑↓ scroll · Esc or ? close", classes="dialog-hint")

    def action_dismiss_help(self) -> None:
        self.dismiss(None)
