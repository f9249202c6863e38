"""The main screen: the five views as tabs, the decisions panel, the status line, the footer."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.containers import Horizontal
from textual.screen import Screen
from textual.widgets import Footer, Header, TabbedContent, TabPane

from workbench.core.decisions import Decision
from workbench.ui.session import Session
from workbench.ui.widgets.answers_view import AnswersView
from workbench.ui.widgets.decisions_panel import DecisionsPanel
from workbench.ui.widgets.export_view import ExportView
from workbench.ui.widgets.keywords_view import KeywordsView
from workbench.ui.widgets.run_status import RunStatus
from workbench.ui.widgets.sources_view import SourcesView
from workbench.ui.widgets.terms_view import TermsView
from workbench.ui.widgets.view_base import ViewBase

#: View id -> class, in tab order (keys 1 to 5).
VIEW_CLASSES: dict[str, type[ViewBase]] = {
    "sources": SourcesView,
    "answers": AnswersView,
    "terms": TermsView,
    "keywords": KeywordsView,
    "export": ExportView,
}


class WorkbenchScreen(Screen[None]):
    def compose(self) -> ComposeResult:
        yield Header()
        with Horizontal(id="body"):
            with TabbedContent(id="views", initial="tab-answers"):
                for number, (view_id, cls) in enumerate(VIEW_CLASSES.items(), start=1):
                    with TabPane(f"{number} {cls.TITLE}", id=f"tab-{view_id}"):
                        yield cls(id=f"view-{view_id}")
            yield DecisionsPanel(id="decisions")
        yield RunStatus(id="status")
        yield Footer()

    @property
    def status(self) -> RunStatus:
        return self.query_one(RunStatus)

    def views(self) -> list[ViewBase]:
        return list(self.query(ViewBase))

    def view(self, view_id: str) -> ViewBase:
        return self.query_one(f"#view-{view_id}", ViewBase)

    def current_view(self) -> ViewBase:
        active = self.query_one(TabbedContent).active or "tab-answers"
        return self.view(active.removeprefix("tab-"))

    def show_view(self, view_id: str) -> ViewBase:
        self.query_one(TabbedContent).active = f"tab-{view_id}"
        view = self.view(view_id)
        target = view.main_widget()
        if target is not None:
            self.set_focus(target)  # at once: keys typed right after the switch belong to the new view
        return view

    def on_tabbed_content_tab_activated(self, event: TabbedContent.TabActivated) -> None:
        view_id = (event.pane.id or "").removeprefix("tab-")
        if view_id in VIEW_CLASSES:
            target = self.view(view_id).main_widget()
            if target is not None:
                self.call_after_refresh(target.focus)

    def toggle_decisions(self) -> None:
        self.query_one(DecisionsPanel).toggle_class("-shown")

    def show_history(self, history: list[Decision]) -> None:
        self.query_one(DecisionsPanel).show_history(history)

    def study_opened(self, session: Session) -> None:
        for view in self.views():
            view.study_opened(session)

    def outputs_changed(self, session: Session, final: bool = True) -> None:
        for view in self.views():
            view.outputs_changed(session)
        if final:
            self.status.finish(summary(session))

    def decisions_changed(self) -> None:
        session = self.app.session  # type: ignore[attr-defined]
        if session is not None:
            for view in self.views():
                view.decisions_changed(session)


def summary(session: Session) -> str:
    """The idle status line: counts only, so screenshots of the same study are identical."""
    outputs = session.outputs
    if outputs is None:
        return "no results yet"
    answers = outputs.answers
    parts = [session.study.study.name, f"{len(answers):,} answers"]
    if "language" in answers:
        parts.append(f"{answers['language'].nunique()} languages")
    if "enters_weighting" in answers:
        parts.append(f"{int(answers['enters_weighting'].sum()):,} weighed")
    active = len(session.store.history())
    parts.append(f"{active} decision{'s' if active != 1 else ''}")
    parts.append("up to " + next((s for s in reversed(list(outputs.snapshots)) ), "—"))
    return " · ".join(parts)
