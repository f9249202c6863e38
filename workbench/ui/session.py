"""One open study in the terminal UI: settings, decision store, latest run, what needs recomputing.

This module holds no Textual code, so the app, the crash test and the
benchmark drive a study the same way. The UI never re-implements a stage: it
records a decision here, then asks :meth:`Session.compute` (which calls
:func:`workbench.core.pipeline.run_study` / :func:`rerun_from`) to rebuild
from the earliest stage the decisions touched.
"""

from __future__ import annotations

from pathlib import Path

from workbench.core.decisions import Decision, DecisionStore, Decisions, Kind
from workbench.core.pipeline import STAGES, RunOutputs, rerun_from, run_study
from workbench.core.progress import Reporter
from workbench.core.settings import Study, load_study

#: The first stage each kind of decision changes; recomputation starts there.
STAGE_FOR_KIND: dict[str, str] = {
    "language": "identify",
    "non_answer": "clean",
    "exclude": "clean",
    "stop_add": "terms",
    "stop_remove": "terms",
    "lemma": "terms",
}


def earliest(first: str | None, second: str | None) -> str | None:
    """The earlier of two stages (``None`` means nothing to do)."""
    if first is None:
        return second
    if second is None:
        return first
    return first if STAGES.index(first) <= STAGES.index(second) else second


class Session:
    """The study being worked on and everything the views read from it."""

    def __init__(self, study: Study) -> None:
        self.study = study
        self.store = DecisionStore(study.decisions_path)
        self.outputs: RunOutputs | None = None
        #: Earliest stage whose result is out of date (``"ingest"`` before the first run).
        self.stale_from: str | None = "ingest"

    @classmethod
    def open(cls, path: Path | str) -> Session:
        return cls(load_study(path))

    def close(self) -> None:
        self.store.close()

    # ------------------------------------------------------------------ decisions

    def record(self, kind: Kind, target: str, value: str = "1", language: str = "") -> int:
        """Store one decision now (committed before this returns) and mark its stage stale."""
        decision_id = self.store.record(kind, target, value, language)
        self.mark_stale(STAGE_FOR_KIND[kind])
        return decision_id

    def undo(self) -> Decision | None:
        decision = self.store.undo()
        if decision is not None:
            self.mark_stale(STAGE_FOR_KIND[decision.kind])
        return decision

    def redo(self) -> Decision | None:
        decision = self.store.redo()
        if decision is not None:
            self.mark_stale(STAGE_FOR_KIND[decision.kind])
        return decision

    def history(self) -> list[Decision]:
        return self.store.history(include_inactive=True)

    def active(self) -> Decisions:
        return self.store.active()

    def mark_stale(self, stage: str) -> None:
        self.stale_from = earliest(self.stale_from, stage)

    # ------------------------------------------------------------------ recomputing

    def take_stale(self) -> str | None:
        """Hand the stale stage to a computation and clear it (restore with :meth:`mark_stale` on failure)."""
        stage, self.stale_from = self.stale_from, None
        if stage is not None and self.outputs is None:
            stage = "ingest"
        return stage

    def compute(
        self,
        stage: str,
        decisions: Decisions,
        reporter: Reporter,
        study: Study | None = None,
        until: str = "compare",
        previous: RunOutputs | None = None,
    ) -> RunOutputs:
        """Run the pipeline from ``stage`` to ``until`` with ``decisions``; safe to call from a worker thread.

        Starts from ``previous`` (default: the session's outputs), which
        :func:`rerun_from` leaves untouched; the caller assigns the result.
        """
        study = study or self.study
        previous = previous if previous is not None else self.outputs
        if stage == "ingest" or previous is None:
            return run_study(study, reporter, decisions=decisions, until=until)
        return rerun_from(previous, stage, reporter, decisions=decisions, until=until, study=study)

    def reload_study(self) -> None:
        """Read the study file again (after the Sources view saved column roles)."""
        assert self.study.study_path is not None
        self.study = load_study(self.study.study_path)
        self.mark_stale("ingest")
