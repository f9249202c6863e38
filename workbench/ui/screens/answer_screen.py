"""One answer in full: raw and cleaned text with masks highlighted, language, flags, terms."""

from __future__ import annotations

from typing import Any, ClassVar

from rich.table import Table
from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import Vertical, VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Static

from workbench.core import corpus as C
from workbench.core.pii import PLACEHOLDER_RE


def _masked(text: str, masks: Any) -> Text:
    """Clean text with each mask highlighted: ``masks`` holds ``(type, start, end)`` offsets into it."""
    shown = Text(text)
    spans = [(int(m[1]), int(m[2])) for m in masks] if masks is not None and len(masks) else []
    if not spans:
        spans = [(m.start(), m.end()) for m in PLACEHOLDER_RE.finditer(text)]
    for start, end in spans:
        shown.stylize("bold reverse", start, end)
    return shown


def _value(row: dict[str, Any], key: str) -> str:
    value = row.get(key)
    if value is None:
        return ""
    if isinstance(value, float):
        return f"{value:.3f}"
    if hasattr(value, "__len__") and not isinstance(value, str):
        return ", ".join(str(v) for v in value)
    return str(value)


class AnswerScreen(ModalScreen[None]):
    AUTO_FOCUS = "#answer-body"
    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("escape,enter,q", "close", "Close"),
        Binding("r", "toggle_raw", "Raw text", tooltip="Show / hide the raw text (it may hold personal data)"),
    ]

    def __init__(self, row: dict[str, Any]) -> None:
        super().__init__()
        self.row = row

    def compose(self) -> ComposeResult:
        row = self.row
        facts = Table(box=None, show_header=False, padding=(0, 1))
        facts.add_column(style="bold", no_wrap=True)
        facts.add_column()
        for label, key in (
            ("answer", C.ANSWER_ID),
            ("question", C.QUESTION),
            ("source", C.SOURCE),
            ("row", C.ROW),
            ("language", C.LANGUAGE),
            ("confidence", C.CONFIDENCE),
            ("labelled by", C.LANGUAGE_SOURCE),
            ("second language", C.SECOND_LANGUAGE),
            ("flags", C.FLAGS),
            ("duplicate of", C.DUPLICATE_OF),
            ("enters weighting", C.ENTERS_WEIGHTING),
        ):
            shown = _value(row, key)
            if shown:
                facts.add_row(label, shown)
        for key in sorted(k for k in row if isinstance(k, str) and k.startswith(C.GROUP_PREFIX)):
            facts.add_row(key.removeprefix(C.GROUP_PREFIX), _value(row, key))
        masks = row.get(C.MASKS)
        if masks is not None and len(masks):
            facts.add_row("masked", ", ".join(str(m[0]) for m in masks))
        with Vertical(classes="dialog answer-dialog"):
            yield Static(f"Answer {row.get(C.ANSWER_ID, '')}", classes="dialog-title")
            with VerticalScroll(id="answer-body"):
                yield Static(facts)
                yield Static(Text("cleaned text (masks highlighted)", style="bold underline"))
                yield Static(_masked(_value(row, C.CLEAN_TEXT) or _value(row, C.RAW_TEXT), masks))
                yield Static(Text("raw text hidden: it may hold personal data (r shows it)", style="dim"), id="raw-label")
                yield Static(Text(_value(row, C.RAW_TEXT)), id="raw-text")
                terms = _value(row, C.TERMS)
                if terms:
                    yield Static(Text("terms", style="bold underline"))
                    yield Static(Text(terms))
            yield Static("Esc close · r raw text", classes="dialog-hint")

    def on_mount(self) -> None:
        self.query_one("#raw-text").display = False

    def action_toggle_raw(self) -> None:
        raw = self.query_one("#raw-text")
        raw.display = not raw.display
        label = "raw text (as read, personal data unmasked)" if raw.display else "raw text hidden: it may hold personal data (r shows it)"
        self.query_one("#raw-label", Static).update(Text(label, style="bold underline" if raw.display else "dim"))

    def action_close(self) -> None:
        self.dismiss(None)
