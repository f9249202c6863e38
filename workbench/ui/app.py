"""The termloom terminal app: opens a study, records decisions, recomputes in a worker.

Views never run stages themselves: they call :meth:`TermloomApp.decide`, which
stores the decision at once and schedules a (debounced) recomputation from the
earliest stage it touches, through :class:`~workbench.ui.session.Session`.
"""

from __future__ import annotations

import asyncio
import dataclasses
import threading
import time
import traceback
from collections.abc import Callable
from pathlib import Path
from typing import ClassVar

from textual import events, work
from textual.app import App
from textual.binding import Binding, BindingType
from textual.css.query import NoMatches
from textual.message import Message
from textual.timer import Timer
from textual.widgets import Input
from textual.worker import WorkerCancelled, WorkerFailed

from workbench.core.decisions import Decisions, Kind
from workbench.core.errors import Cancelled, TermloomError
from workbench.core.pipeline import STAGES, RunOutputs
from workbench.core.progress import Reporter
from workbench.core.settings import Study
from workbench.ui.commands import ActionCommands
from workbench.ui.keymap import KeyAction, collect
from workbench.ui.screens.help_screen import HelpScreen
from workbench.ui.screens.prompt_screen import PromptScreen
from workbench.ui.screens.workbench_screen import VIEW_CLASSES, WorkbenchScreen
from workbench.ui.session import Session
from workbench.ui.stray_keys import reroute_stray_key
from workbench.ui.widgets.decisions_panel import describe
from workbench.ui.widgets.frame_grid import FrameGrid


#: Stages after which partial results are shown while the rest runs: the answers
#: once languages are known, the keyword lists once weighting is done (the first
#: terms run loads lemma tables; compare runs the bootstrap).
PHASES: tuple[str, ...] = ("identify", "weigh", "compare")


class Progress(Message):
    """Posted from the worker thread by the reporter's callback."""

    def __init__(self, stage: str, done: int, total: int, text: str) -> None:
        super().__init__()
        self.stage, self.done, self.total, self.text = stage, done, total, text


class TermloomApp(App[int]):
    TITLE = "termloom"
    CSS_PATH = "app.tcss"
    COMMANDS = App.COMMANDS | {ActionCommands}

    BINDINGS: ClassVar[list[BindingType]] = [
        # Keys that move the focus are priority bindings: the app runs them the moment
        # it reads them, so the keys typed right after already go to the new place.
        Binding("1", "show_view('sources')", "Sources", show=False, priority=True, tooltip="Show the Sources view"),
        Binding("2", "show_view('answers')", "Answers", show=False, priority=True, tooltip="Show the Answers view"),
        Binding("3", "show_view('terms')", "Terms", show=False, priority=True, tooltip="Show the Terms view"),
        Binding("4", "show_view('keywords')", "Keywords", show=False, priority=True, tooltip="Show the Keywords view"),
        Binding("5", "show_view('export')", "Export", show=False, priority=True, tooltip="Show the Export view"),
        Binding("slash", "search", "Search", priority=True, tooltip="Search (Answers and Terms views)"),
        Binding("enter,escape", "leave_search", "Back to the table", show=False, priority=True, tooltip="Leave the search box (the filter stays)"),
        Binding("d", "toggle_decisions", "Decisions", tooltip="Show / hide the decisions panel"),
        Binding("ctrl+z", "undo", "Undo", tooltip="Undo the last decision"),
        Binding("ctrl+y", "redo", "Redo", tooltip="Redo the last undone decision"),
        Binding("escape", "cancel_work", "Cancel", tooltip="Cancel the running computation or export"),
        Binding("question_mark", "help", "Keys", tooltip="List every key"),
        Binding("ctrl+o", "open_study", "Open a study file", show=False),
        Binding("ctrl+q", "quit", "Quit", tooltip="Quit (decisions are already saved)"),
    ]

    def __init__(
        self,
        study_path: Path | None = None,
        *,
        debounce: float = 0.6,
        first_view: str = "answers",
        notes: list[str] | None = None,
    ) -> None:
        super().__init__()
        self.study_path = study_path
        self.debounce = debounce
        self.first_view = first_view
        self.notes = list(notes or [])
        self.session: Session | None = None
        self._reporter: Reporter | None = None
        self._timer: Timer | None = None
        self._last_progress = 0.0
        #: Set while no computation or export is running (see wait_until_idle).
        self._idle = asyncio.Event()
        self._idle.set()
        #: The stage the worker last reported, to name it in an error message.
        self._stage_running: str | None = None

    # ------------------------------------------------------------------ start

    async def on_mount(self) -> None:
        self._workbench = WorkbenchScreen()
        await self.push_screen(self._workbench)
        if self.first_view != "answers":
            self._workbench.show_view(self.first_view)
        for note in self.notes:
            self.notify(note, timeout=15)
        if self.study_path is not None:
            self.open_study(self.study_path)

    @property
    def workbench(self) -> WorkbenchScreen:
        return self._workbench

    def open_study(self, path: Path) -> None:
        try:
            session = Session.open(path)
        except TermloomError as exc:
            self.notify(str(exc), title="Cannot open study", severity="error", timeout=12)
            return
        if self.session is not None:
            self.session.close()
        self.session = session
        self.sub_title = session.study.study.name
        self.workbench.study_opened(session)
        self.refresh_decisions()
        self.start_compute()

    def reload_study(self) -> None:
        """Read the study file again (it was just edited) and recompute from ingest."""
        if self.session is None:
            return
        try:
            self.session.reload_study()
        except TermloomError as exc:
            self.notify(str(exc), title="Study not re-read", severity="error", timeout=12)
            return
        self.workbench.study_opened(self.session)
        self.schedule_compute()

    def on_unmount(self) -> None:
        if self._reporter is not None:
            self._reporter.cancel.set()
        if self.session is not None:
            self.session.close()

    # ------------------------------------------------------------------ decisions

    def decide(self, kind: Kind, target: str, value: str = "1", language: str = "") -> bool:
        """Store one decision now and schedule a recomputation; ``False`` if it could not be stored."""
        if self.session is None:
            self.notify("open a study first (press ^o)", severity="warning")
            return False
        try:
            self.session.record(kind, target, value, language)
        except TermloomError as exc:
            self.notify(str(exc), title="Decision not saved", severity="error", timeout=10)
            return False
        self.refresh_decisions()
        self.schedule_compute()
        return True

    def action_undo(self) -> None:
        self._undo_redo(undo=True)

    def action_redo(self) -> None:
        self._undo_redo(undo=False)

    def _undo_redo(self, undo: bool) -> None:
        if self.session is None:
            return
        decision = self.session.undo() if undo else self.session.redo()
        if decision is None:
            self.notify("nothing to undo" if undo else "nothing to redo", timeout=3)
            return
        self.notify(f"{'undone' if undo else 'redone'}: {describe(decision)}", timeout=4)
        self.refresh_decisions()
        self.workbench.decisions_changed()
        self.schedule_compute()

    def refresh_decisions(self) -> None:
        if self.session is not None:
            self.workbench.show_history(self.session.history())

    def active_decisions(self) -> Decisions:
        return self.session.active() if self.session is not None else Decisions()

    # ------------------------------------------------------------------ computing

    @property
    def computing(self) -> bool:
        return self._reporter is not None

    def schedule_compute(self) -> None:
        """Recompute after a quiet spell, so a burst of keys costs one run."""
        if self._reporter is not None:
            # The running computation is already out of date: stop it; it restarts when it ends.
            self._reporter.cancel.set()
        if self._timer is not None:
            self._timer.stop()
            self._timer = None
        if self.debounce <= 0:
            self.start_compute()
        else:
            self._timer = self.set_timer(self.debounce, self._debounced)

    def _debounced(self) -> None:
        self._timer = None
        self.start_compute()

    def start_compute(self) -> None:
        session = self.session
        if session is None or self._reporter is not None:
            return
        stage = session.take_stale()
        if stage is None:
            return
        self._reporter = Reporter(callback=self._progress_from_thread, cancel=threading.Event())
        self._idle.clear()
        self._stage_running = None
        self.workbench.status.start(stage)
        self.refresh_bindings()
        self._compute(session, stage, session.active(), session.study, self._reporter)

    @work(thread=True, group="pipeline", exit_on_error=False)
    def _compute(self, session: Session, stage: str, decisions: Decisions, study: Study, reporter: Reporter) -> None:
        try:
            outputs = None
            start = stage
            for end in PHASES:
                if STAGES.index(end) < STAGES.index(start):
                    continue
                outputs = session.compute(start, decisions, reporter, study, until=end, previous=outputs)
                if end == STAGES[-1]:
                    break
                self.call_from_thread(self._publish, session, outputs)
                start = STAGES[STAGES.index(end) + 1]
        except Cancelled:
            self.call_from_thread(self._compute_ended, session, stage, None, None)
        except TermloomError as exc:
            self.call_from_thread(self._compute_ended, session, stage, None, str(exc))
        except Exception as exc:  # a bug: say so in one line, keep the traceback in the log
            self.log.error(traceback.format_exc())
            where = self._stage_running or stage
            message = f"internal error in {where} ({type(exc).__name__}: {exc}); please report it with the study file"
            self.call_from_thread(self._compute_ended, session, stage, None, message)
        else:
            self.call_from_thread(self._compute_ended, session, stage, outputs, None)

    def _publish(self, session: Session, outputs: RunOutputs) -> None:
        """Results of the first stages, shown while the later ones run."""
        if session is self.session:
            session.outputs = outputs
            self.workbench.outputs_changed(session, final=False)

    def _progress_from_thread(self, stage: str, done: int, total: int, message: str) -> None:
        self._stage_running = stage
        now = time.perf_counter()
        if now - self._last_progress >= 0.1 or (total and done >= total):
            self._last_progress = now
            self.post_message(Progress(stage, done, total, message))

    def on_progress(self, message: Progress) -> None:
        try:
            status = self.workbench.status
        except NoMatches:  # a late message while the app closes
            return
        status.progress(message.stage, message.done, message.total, message.text)

    def _compute_ended(self, session: Session, stage: str, outputs: RunOutputs | None, error: str | None) -> None:
        self._reporter = None
        self._idle.set()
        self.refresh_bindings()
        if session is not self.session:
            return
        if outputs is None:
            session.mark_stale(stage)
            if error is not None:
                # Do not retry a failing run in a loop; the next decision or reload retries.
                session.stale_from = None if session.outputs is None else session.stale_from
                self.notify(error, title="Stopped", severity="error", timeout=15)
                self.workbench.status.finish(f"stopped: {error}"[:200])
                return
            if session.stale_from is not None and (self._timer is None):
                self.start_compute()
            else:
                self.workbench.status.finish("cancelled; earlier results are still shown")
            return
        session.outputs = outputs
        self.workbench.outputs_changed(session)
        if session.stale_from is not None and self._timer is None:
            self.start_compute()

    # ------------------------------------------------------------------ export

    def export(self, folder: Path, formats: list[str], done: Callable[[Path, list[Path] | None, str | None], None]) -> bool:
        """Write the results on screen to ``folder`` in a worker; ``done`` gets the files or an error."""
        session = self.session
        if session is None or session.outputs is None or session.outputs.compared is None:
            self.notify("nothing to export yet: wait until every stage has run", severity="warning")
            return False
        if self._reporter is not None or session.stale_from is not None or self._timer is not None:
            self.notify("results are being recomputed; export when the status line is quiet", severity="warning")
            return False
        study = session.study.model_copy(
            update={"export": session.study.export.model_copy(update={"formats": list(formats)})}
        )
        outputs = dataclasses.replace(session.outputs, study=study)
        self._reporter = Reporter(callback=self._progress_from_thread, cancel=threading.Event())
        self._idle.clear()
        self.workbench.status.start("export", "writing")
        self.refresh_bindings()
        self._export(outputs, folder, self._reporter, done)
        return True

    @work(thread=True, group="export", exit_on_error=False)
    def _export(self, outputs: RunOutputs, folder: Path, reporter: Reporter, done: Callable[..., None]) -> None:
        from workbench.core.export import write_run

        written: list[Path] | None = None
        error: str | None = None
        try:
            written = write_run(folder, outputs, reporter)
        except Cancelled:
            error = None
        except TermloomError as exc:
            error = str(exc)
        except Exception as exc:  # a bug: one line on screen, the traceback in the log
            self.log.error(traceback.format_exc())
            error = f"internal error while writing ({type(exc).__name__}: {exc}); please report it"
        self.call_from_thread(self._export_ended, folder, written, error, done)

    def _export_ended(self, folder: Path, written: list[Path] | None, error: str | None, done: Callable[..., None]) -> None:
        self._reporter = None
        self._idle.set()
        self.refresh_bindings()
        if error:
            self.notify(error, title="Export stopped", severity="error", timeout=15)
        self.workbench.status.finish()
        done(folder, written, error)
        if self.session is not None and self.session.stale_from is not None:
            self.start_compute()

    def action_cancel_work(self) -> None:
        if self._reporter is not None:
            self._reporter.cancel.set()
            if self._timer is not None:
                self._timer.stop()
                self._timer = None
            self.notify("cancelling…", timeout=3)

    def check_action(self, action: str, parameters: tuple[object, ...]) -> bool | None:
        if action == "cancel_work":
            return self._reporter is not None
        on_workbench = self.screen is getattr(self, "_workbench", None)
        typing = isinstance(self.focused, Input)
        if action == "show_view":
            return on_workbench and not typing
        if action == "search":
            return on_workbench and not typing and self.workbench.current_view().search_box() is not None
        if action == "leave_search":
            return on_workbench and typing and self.focused is self.workbench.current_view().search_box()
        return True

    def action_search(self) -> None:
        view = self.workbench.current_view()
        box = view.search_box()
        if box is not None:
            self.workbench.set_focus(box)

    def action_leave_search(self) -> None:
        target = self.workbench.current_view().main_widget()
        if target is not None:
            self.workbench.set_focus(target)

    async def wait_until_idle(self) -> None:
        """Wait until no computation or export runs or is scheduled, nor any other worker (tests, benchmarks).

        A pending debounce timer is fired at once rather than waited for.
        """
        while True:
            if self._timer is not None:
                self._timer.stop()
                self._timer = None
                self.start_compute()
            # Set by the main loop once a worker has handed over its result.
            await self._idle.wait()
            for worker in list(self.workers):
                if worker.is_running:
                    try:
                        await worker.wait()
                    except (WorkerCancelled, WorkerFailed):
                        continue  # the worker reported its own failure
            if self._reporter is None and self._timer is None:
                return

    # ------------------------------------------------------------------ actions

    def on_key(self, event: events.Key) -> None:
        # Runs before the app's binding check; a key whose table lost the focus goes to the focused widget.
        reroute_stray_key(self, event)

    def action_show_view(self, view: str) -> None:
        self.workbench.show_view(view)

    def action_toggle_decisions(self) -> None:
        self.workbench.toggle_decisions()

    def action_help(self) -> None:
        self.push_screen(HelpScreen(self.key_actions()))

    def action_open_study(self) -> None:
        def chosen(path: str | None) -> None:
            if path:
                self.open_study(Path(path).expanduser())

        self.push_screen(PromptScreen("Open which study file (*.study.toml)?", placeholder="path/to/name.study.toml"), chosen)

    def key_actions(self, with_navigation: bool = True) -> list[KeyAction]:
        """Every key, for the help screen; the palette leaves out table navigation."""
        scopes: list[tuple[str, str | None, type]] = [("Everywhere", None, type(self))]
        scopes += [(cls.TITLE, view, cls) for view, cls in VIEW_CLASSES.items()]
        actions = collect(scopes)
        if with_navigation:
            actions += collect([("Tables", None, FrameGrid)])
        return actions

    def run_key_action(self, action: KeyAction) -> None:
        """Run an action chosen in the command palette, in the view it belongs to."""
        if action.view is None:
            self.call_later(self.run_action, action.action)
            return
        view = self.workbench.show_view(action.view)
        self.call_after_refresh(view.run_action, action.action)
