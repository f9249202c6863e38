"""What every view (a tab of the workbench) offers the screen that holds it."""

from __future__ import annotations

from typing import TYPE_CHECKING, ClassVar

from textual.containers import Vertical
from textual.widget import Widget

if TYPE_CHECKING:
    from workbench.ui.app import TermloomApp
    from workbench.ui.session import Session


class ViewBase(Vertical):
    """A tab: told when a study opens, when new results arrive and when decisions change."""

    TITLE: ClassVar[str] = "view"

    @property
    def termloom(self) -> TermloomApp:
        return self.app  # type: ignore[return-value]

    @property
    def session(self) -> Session | None:
        return self.termloom.session

    def study_opened(self, session: Session) -> None:
        """A study was opened (or re-read); results are not there yet."""

    def outputs_changed(self, session: Session) -> None:
        """A computation finished; ``session.outputs`` holds the new results."""

    def decisions_changed(self, session: Session) -> None:
        """Decisions were undone or redone (results follow after recomputation)."""

    def focus_now(self, widget: Widget) -> None:
        """Move the focus at once (``Widget.focus`` waits for the message queue, so keys
        typed right after a view switch or ``/`` would still reach the old widget)."""
        self.screen.set_focus(widget)

    def main_widget(self) -> Widget | None:
        """The widget that takes the focus when the view is shown."""
        return None

    def search_box(self) -> Widget | None:
        """The view's search box, which ``/`` focuses, if it has one."""
        return None
