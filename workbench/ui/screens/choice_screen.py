"""A small modal list: pick one value (a language, a group) with the arrows, or by typing it, and Enter."""

from __future__ import annotations

from typing import ClassVar

from textual import events
from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import OptionList, Static
from textual.widgets.option_list import Option


class ChoiceScreen(ModalScreen[str | None]):
    """Returns the chosen value, or ``None`` on Escape.

    Typing jumps to the first value starting with what was typed ("e", "s"
    goes to ``es``); Backspace takes a letter back.
    """

    AUTO_FOCUS = "#choices"
    BINDINGS: ClassVar[list[BindingType]] = [Binding("escape", "dismiss_none", "Cancel")]

    def __init__(self, title: str, choices: list[tuple[str, str]], current: str | None = None, detail: str = "") -> None:
        """``choices`` are ``(value, label)`` pairs; ``current`` is highlighted first; ``detail`` is shown under the title."""
        super().__init__()
        self.title_text = title
        self.choices = choices
        self.current = current
        self.detail = detail
        self.typed = ""

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog choice-dialog"):
            yield Static(self.title_text, classes="dialog-title")
            if self.detail:
                yield Static(self.detail, classes="dialog-detail")
            yield OptionList(*(Option(label, id=value) for value, label in self.choices), id="choices")
            yield Static("type a code or ↑↓ · Enter choose · Esc cancel", classes="dialog-hint")

    def on_mount(self) -> None:
        options = self.query_one(OptionList)
        values = [value for value, _ in self.choices]
        if self.current in values:
            options.highlighted = values.index(self.current)

    def on_key(self, event: events.Key) -> None:
        if event.key == "backspace":
            self.typed = self.typed[:-1]
        elif event.character and event.character.isprintable() and not event.character.isspace():
            self.typed += event.character.lower()
        else:
            return
        event.stop()
        match = self._find(self.typed)
        if match is None and event.character:
            self.typed = event.character.lower()
            match = self._find(self.typed)
        if match is not None:
            self.query_one(OptionList).highlighted = match

    def _find(self, typed: str) -> int | None:
        """The first choice whose value, or else whose label, starts with ``typed``."""
        for field in (0, 1):
            for index, choice in enumerate(self.choices):
                if choice[field].lower().startswith(typed):
                    return index
        return None

    def on_option_list_option_selected(self, event: OptionList.OptionSelected) -> None:
        self.dismiss(event.option.id)

    def action_dismiss_none(self) -> None:
        self.dismiss(None)
