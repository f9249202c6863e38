"""The terminal UI. ``launch`` is what ``termloom open`` calls."""

from __future__ import annotations

from pathlib import Path

from workbench.core.errors import EXIT_OK


def launch(study_path: Path | None, data_path: Path | None) -> int:
    """Open the app on a study file, or on a data file (a starter study is written beside it first).

    Returns the process exit code. Errors a user can cause (a missing file, a
    bad study) are raised as :class:`~workbench.core.errors.TermloomError`
    before the screen is taken over, so the CLI prints them as one line.
    """
    from workbench.core.settings import load_study

    if study_path is None and data_path is not None:
        from workbench.core.starter import write_starter_study

        study_path, _lines = write_starter_study(Path(data_path), None)
    if study_path is not None:
        load_study(study_path)  # fail here, as a one-line message, rather than inside the screen
    from workbench.ui.app import TermloomApp

    result = TermloomApp(study_path).run()
    return EXIT_OK if result is None else int(result)


