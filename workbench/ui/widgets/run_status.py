"""One status line: what the pipeline is doing, a bar, a time estimate; a summary when idle."""

from __future__ import annotations

import time

from rich.text import Text
from textual.widgets import Static

from workbench.core.pipeline import STAGES

BAR_WIDTH = 20


def estimate(fraction: float, elapsed: float) -> str:
    """Remaining time from the share done so far, e.g. ``"~12 s left"``; empty until 5 % is done."""
    if fraction < 0.05 or fraction >= 1.0:
        return ""
    remaining = elapsed * (1.0 - fraction) / fraction
    if remaining < 60:
        return f"~{remaining:.0f} s left"
    return f"~{remaining / 60:.0f} min left"


class RunStatus(Static):
    """Shows progress while a worker runs and a plain, time-free summary otherwise."""

    DEFAULT_CSS = """
    RunStatus { height: 1; background: $panel; color: $text; padding: 0 1; }
    RunStatus.-busy { background: $primary 30%; }
    """

    def __init__(self, *, id: str | None = None) -> None:
        super().__init__("", id=id)
        self.busy = False
        self._began = 0.0
        self._first = 0
        self.summary = "no study open — press ^o to open one"

    def start(self, first_stage: str, label: str = "computing") -> None:
        self.busy = True
        self._began = time.perf_counter()
        self._first = STAGES.index(first_stage) if first_stage in STAGES else 0
        self.add_class("-busy")
        self.update(Text(f"{label} from {first_stage}…  (Esc cancels)"))

    def progress(self, stage: str, done: int, total: int, message: str) -> None:
        if not self.busy:
            return
        span = len(STAGES) - self._first
        index = STAGES.index(stage) - self._first if stage in STAGES else 0
        inner = min(1.0, done / total) if total else 0.0
        fraction = max(0.0, min(1.0, (index + inner) / span)) if stage in STAGES else inner
        filled = int(round(BAR_WIDTH * fraction))
        line = Text()
        line.append(f"{stage:<9}", style="bold")
        line.append("█" * filled + "░" * (BAR_WIDTH - filled))
        line.append(f" {fraction:4.0%} ")
        hint = estimate(fraction, time.perf_counter() - self._began)
        if hint:
            line.append(hint + "  ")
        line.append(message[:60], style="dim")
        line.append("  Esc cancels", style="italic")
        self.update(line)

    def finish(self, summary: str | None = None) -> None:
        self.busy = False
        self.remove_class("-busy")
        if summary is not None:
            self.summary = summary
        self.update(Text(self.summary))

    def on_mount(self) -> None:
        self.update(Text(self.summary))
