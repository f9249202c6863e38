"""The terminal UI. ``launch`` is what ``termloom open`` calls."""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

from workbench.core.errors import EXIT_OK


@dataclass
class Opening:
    """What the app opens with: the study, the first view, and notes to show."""

    study_path: Path | None
    first_view: str = "answers"
    notes: list[str] = field(default_factory=list)


def prepare(study_path: Path | None, data_path: Path | None) -> Opening:
    """Resolve ``termloom open STUDY`` / ``termloom open DATAFILE`` before the screen is taken over.

    A data file gets a starter study beside it (``workbench.core.starter``),
    or the one written for it earlier; the app then opens on the Sources view
    so the guessed column roles are checked first. Errors a user can cause (a
    missing file, a bad study) raise :class:`~workbench.core.errors.TermloomError`
    here, so the CLI prints them as one line.
    """
    from workbench.core.settings import load_study

    opening = Opening(study_path)
    if study_path is None and data_path is not None:
        from workbench.core.starter import default_study_path, write_starter_study

        existing = default_study_path(Path(data_path))
        if existing.exists():
            opening = Opening(existing, "sources", [f"opened {existing.name}, the study written earlier for {Path(data_path).name}"])
        else:
            written, lines = write_starter_study(Path(data_path), None)
            notes = [f"wrote {written.name} with guessed column roles: check them here, ^s saves changes", *lines]
            opening = Opening(written, "sources", notes)
    if opening.study_path is not None:
        load_study(opening.study_path)
    return opening


def launch(study_path: Path | None, data_path: Path | None) -> int:
    """Open the app on a study file, or on a data file (see :func:`prepare`); returns the exit code."""
    opening = prepare(study_path, data_path)
    from workbench.ui.app import TermloomApp

    result = TermloomApp(opening.study_path, first_view=opening.first_view, notes=opening.notes).run()
    return EXIT_OK if result is None else int(result)
