"""Run a study through every stage, in memory, and optionally write its outputs.

The CLI, the terminal UI and the tests call the same two functions:
:func:`run_study` (all stages up to a chosen one, in memory) and
:func:`rerun_from` (re-use the stages before a given one, e.g. after the user
overrides a language in the UI). :func:`run_to_folder` adds the export.

The per-text work of clean, identify and terms runs through a mapper
(``mapping.py``): in this process by default, on Dask workers when
``workbench.core.distributed`` passes its own.

Stage modules are imported lazily so ``termloom --help`` stays fast.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field, replace
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

import pandas as pd

from workbench.core.corpus import Corpus
from workbench.core.decisions import Decisions, load_decisions
from workbench.core.errors import SettingsError
from workbench.core.ledger import Ledger
from workbench.core.mapping import Mapper
from workbench.core.progress import Reporter
from workbench.core.settings import Study

#: The stages, in order. ``export`` is run by :func:`run_to_folder` only.
STAGES: tuple[str, ...] = ("ingest", "clean", "identify", "terms", "weigh", "compare")


@dataclass
class RunOutputs:
    """Everything one run produced, stage by stage (``None`` for stages not run)."""

    study: Study
    decisions: Decisions
    ledger: Ledger
    corpus: Corpus | None = None
    terms: Any = None
    weighed: Any = None
    compared: Any = None
    glossary: Any = None
    timings: dict[str, float] = field(default_factory=dict)
    #: Where the run ran, for the manifest: ``{"kind": "local"}`` or the Dask engine's description.
    engine: dict[str, Any] = field(default_factory=lambda: {"kind": "local"})
    started: datetime = field(default_factory=lambda: datetime.now(UTC))
    finished: datetime | None = None
    #: Answers table as it left each stage, and the ledger length before each
    #: stage, so a later stage can be re-run without repeating earlier ones.
    snapshots: dict[str, pd.DataFrame] = field(default_factory=dict, repr=False)
    ledger_marks: dict[str, int] = field(default_factory=dict, repr=False)

    @property
    def answers(self) -> pd.DataFrame:
        """The answers table after the last stage that ran."""
        for stage in reversed(STAGES):
            if stage in self.snapshots:
                return self.snapshots[stage]
        raise ValueError("no stage has run yet")


def _profiles_for(study: Study) -> dict[str, Any]:
    from workbench.core.profiles import load_profiles

    return load_profiles(list(study.languages.expected))


def _run_stage(stage: str, out: RunOutputs, reporter: Reporter, mapper: Mapper | None = None) -> None:
    reporter.update(stage, 0, 0, f"{stage} started")
    begin = time.perf_counter()
    out.ledger_marks[stage] = out.ledger.mark()
    study, decisions, ledger = out.study, out.decisions, out.ledger
    if stage == "ingest":
        from workbench.core.ingest import read_corpus

        out.corpus = read_corpus(study, ledger, reporter)
        out.snapshots["ingest"] = out.corpus.answers
    elif stage == "clean":
        from workbench.core.clean import clean_answers

        out.snapshots["clean"] = clean_answers(
            out.snapshots["ingest"], study, _profiles_for(study), decisions, ledger, reporter, mapper=mapper
        )
    elif stage == "identify":
        from workbench.core.identify import identify_answers

        out.snapshots["identify"] = identify_answers(
            out.snapshots["clean"], study, decisions, ledger, reporter, mapper=mapper
        )
    elif stage == "terms":
        from workbench.core.terms import extract_terms

        out.terms = extract_terms(
            out.snapshots["identify"], study, _profiles_for(study), decisions, ledger, reporter, mapper=mapper
        )
        out.snapshots["terms"] = out.terms.answers
    elif stage == "weigh":
        from workbench.core.weigh import weigh_corpus

        out.glossary = _load_glossary(study)
        mapping = out.glossary.mapping if out.glossary is not None else None
        out.weighed = weigh_corpus(out.snapshots["terms"], study, reporter, glossary=mapping)
        out.snapshots["weigh"] = out.snapshots["terms"]
    elif stage == "compare":
        from workbench.core.compare import compare_corpus

        out.compared = compare_corpus(out.snapshots["terms"], out.weighed, study, reporter)
        out.snapshots["compare"] = out.snapshots["terms"]
    else:
        raise SettingsError(f"unknown stage '{stage}'; stages are {', '.join(STAGES)}")
    out.timings[stage] = time.perf_counter() - begin


def _load_glossary(study: Study) -> Any:
    if study.compare.glossary is None:
        return None
    from workbench.core.glossary import read_glossary

    return read_glossary(study.compare.glossary, study.languages.expected)


def run_study(
    study: Study,
    reporter: Reporter | None = None,
    decisions: Decisions | None = None,
    until: str = "compare",
    *,
    mapper: Mapper | None = None,
) -> RunOutputs:
    """Run the stages from ingest up to and including ``until``, in memory.

    Decisions default to the active ones in the study's decision store;
    ``mapper`` runs the per-text work (default: in this process).
    """
    if until not in STAGES:
        raise SettingsError(f"unknown stage '{until}'; stages are {', '.join(STAGES)}")
    reporter = reporter or Reporter()
    if decisions is None:
        decisions = load_decisions(study.decisions_path if study.study_path else None)
    out = RunOutputs(study=study, decisions=decisions, ledger=Ledger())
    for stage in STAGES[: STAGES.index(until) + 1]:
        _run_stage(stage, out, reporter, mapper)
    out.finished = datetime.now(UTC)
    return out


def rerun_from(
    previous: RunOutputs,
    stage: str,
    reporter: Reporter | None = None,
    decisions: Decisions | None = None,
    until: str = "compare",
    study: Study | None = None,
    *,
    mapper: Mapper | None = None,
) -> RunOutputs:
    """Re-run ``stage`` and the stages after it, re-using what ran before it.

    ``previous`` is left untouched; the result shares the earlier stages' tables.
    """
    if stage not in STAGES or until not in STAGES:
        raise SettingsError(f"unknown stage; stages are {', '.join(STAGES)}")
    start, stop = STAGES.index(stage), STAGES.index(until)
    reporter = reporter or Reporter()
    mark = previous.ledger_marks.get(stage, previous.ledger.mark())
    out = replace(
        previous,
        study=study or previous.study,
        decisions=decisions if decisions is not None else previous.decisions,
        ledger=previous.ledger.truncated(mark),
        snapshots={s: previous.snapshots[s] for s in STAGES[:start] if s in previous.snapshots},
        ledger_marks={s: previous.ledger_marks[s] for s in STAGES[:start] if s in previous.ledger_marks},
        timings={s: previous.timings[s] for s in STAGES[:start] if s in previous.timings},
        started=datetime.now(UTC),
        finished=None,
    )
    for later, attribute in (("terms", "terms"), ("weigh", "weighed"), ("compare", "compared")):
        if STAGES.index(later) >= start:
            setattr(out, attribute, None)
    for current in STAGES[start : stop + 1]:
        _run_stage(current, out, reporter, mapper)
    out.finished = datetime.now(UTC)
    return out


def run_to_folder(study: Study, out_dir: Path, reporter: Reporter | None = None) -> tuple[RunOutputs, list[Path]]:
    """Run every stage and write the output folder; returns the outputs and the files written."""
    from workbench.core.export import write_run

    reporter = reporter or Reporter()
    outputs = run_study(study, reporter)
    begin = time.perf_counter()
    written = write_run(Path(out_dir), outputs, reporter)
    outputs.timings["export"] = time.perf_counter() - begin
    return outputs, written
