"""A small modal prompt for one line of text (a lemma, a folder, a study path)."""

from __future__ import annotations

from typing import ClassVar

from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Input, Static


class PromptScreen(ModalScreen[str | None]):
    """Returns the entered text (stripped), or ``None`` on Escape or an empty entry."""

    AUTO_FOCUS = "#prompt-input"
    BINDINGS: ClassVar[list[BindingType]] = [Binding("escape", "dismiss_none", "Cancel")]

    def __init__(self, title: str, value: str = "", placeholder: str = "") -> None:
        super().__init__()
        self.title_text = title
        self.value = value
        self.placeholder = placeholder

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog"):
            yield Static(self.title_text, classes="dialog-title")
            yield Input(self.value, placeholder=self.placeholder, id="prompt-input")
            yield Static("Enter accept · Esc cancel", classes="dialog-hint")

    def on_input_submitted(self, event: Input.Submitted) -> None:
        text = event.value.strip()
        self.dismiss(text or None)

    def action_dismiss_none(self) -> None:
        self.dismiss(None)
