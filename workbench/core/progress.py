"""Progress reporting and cancellation shared by every stage.

A stage receives a :class:`Reporter`; front ends pass a callback that draws a
progress bar (CLI), posts a message (UI) or does nothing (tests).
"""

from __future__ import annotations

import threading
from collections.abc import Callable
from dataclasses import dataclass, field

from workbench.core.errors import Cancelled

#: ``callback(stage, done, total, message)``; ``total`` is 0 when unknown.
ProgressCallback = Callable[[str, int, int, str], None]


def _ignore(stage: str, done: int, total: int, message: str) -> None:
    return None


@dataclass
class Reporter:
    """Carries the progress callback and the cancel event through the stages."""

    callback: ProgressCallback = _ignore
    cancel: threading.Event = field(default_factory=threading.Event)

    def update(self, stage: str, done: int, total: int, message: str = "") -> None:
        """Report progress and raise :class:`Cancelled` if the user asked to stop."""
        if self.cancel.is_set():
            raise Cancelled(f"cancelled during {stage}; outputs of earlier runs are untouched")
        self.callback(stage, done, total, message)

    def check(self, stage: str) -> None:
        """Raise :class:`Cancelled` if the user asked to stop."""
        if self.cancel.is_set():
            raise Cancelled(f"cancelled during {stage}; outputs of earlier runs are untouched")


