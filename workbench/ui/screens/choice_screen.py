"""A small modal list: pick one value (a language, a group) with the arrows and Enter."""

from __future__ import annotations

from typing import ClassVar

from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import OptionList, Static
from textual.widgets.option_list import Option


class ChoiceScreen(ModalScreen[str | None]):
    """Returns the chosen value, or ``None`` on Escape."""

    BINDINGS: ClassVar[list[BindingType]] = [Binding("escape", "dismiss_none", "Cancel")]

    def __init__(self, title: str, choices: list[tuple[str, str]], current: str | None = None) -> None:
        """``choices`` are ``(value, label)`` pairs; ``current`` is highlighted first."""
        super().__init__()
        self.title_text = title
        self.choices = choices
        self.current = current

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog"):
            yield Static(self.title_text, classes="dialog-title")
            yield OptionList(*(Option(label, id=value) for value, label in self.choices), id="choices")
            yield Static("↑↓ move · Enter choose · Esc cancel", classes="dialog-hint")

    def on_mount(self) -> None:
        options = self.query_one(OptionList)
        values = [value for value, _ in self.choices]
        if self.current in values:
            options.highlighted = values.index(self.current)
        options.focus()

    def on_option_list_option_selected(self, event: OptionList.OptionSelected) -> None:
        self.dismiss(event.option.id)

    def action_dismiss_none(self) -> None:
        self.dismiss(None)
