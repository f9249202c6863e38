"""Keyword-in-context lines for the views, from the core's KWIC function."""

from __future__ import annotations

import pandas as pd

from workbench.ui.session import Session

KWIC_COLUMNS = ["answer_id", "left", "match", "right"]


def kwic_for(session: Session, term: str, language: str) -> tuple[pd.DataFrame | None, str]:
    """KWIC lines of ``term`` in the answers of ``language``; ``None`` and a reason when there are none."""
    outputs = session.outputs
    if outputs is None or outputs.terms is None:
        return None, "the terms stage has not run yet"
    try:
        from workbench.core import kwic
    except ImportError:
        return None, "keyword in context is not available in this version"
    lines = kwic.kwic_lines(outputs.answers, term, language, width=session.study.compare.kwic_width)
    return lines, ""
