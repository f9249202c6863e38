"""Keyword-in-context lines for the views, from the core's KWIC function and the terms stage's termers."""

from __future__ import annotations

import pandas as pd

from workbench.core.decisions import Decisions
from workbench.core.errors import TermloomError
from workbench.core.kwic import KWIC_COLUMNS, kwic_lines, termer_spans
from workbench.core.profiles import load_profile
from workbench.core.settings import Study
from workbench.core.terms import make_termer

#: Termers built for KWIC, keyed by (study, decisions, language) identity; a handful is plenty.
_TERMERS: dict[tuple[int, int, str], object] = {}


def _termers(study: Study, decisions: Decisions, languages: list[str]) -> dict[str, object]:
    found = {}
    for language in languages:
        key = (id(study), id(decisions), language)
        if key not in _TERMERS:
            if len(_TERMERS) > 16:
                _TERMERS.clear()
            try:
                _TERMERS[key] = make_termer(language, load_profile(language), study, decisions)
            except TermloomError:
                continue  # kwic_lines falls back to a whole-word search for this language
        found[language] = _TERMERS[key]
    return found


def kwic_for(
    answers: pd.DataFrame, study: Study, decisions: Decisions, targets: list[tuple[str | None, str]]
) -> pd.DataFrame:
    """KWIC lines of the answers holding any ``(language, term)`` target (language ``None``: any language).

    Safe to call from a worker thread; the result has :data:`workbench.core.kwic.KWIC_COLUMNS`.
    """
    if not targets:
        return pd.DataFrame(columns=KWIC_COLUMNS)
    languages = sorted({lang for lang, _ in targets if lang} or set(study.languages.expected))
    if any(lang is None for lang, _ in targets):
        languages = sorted(set(languages) | set(study.languages.expected))
    spans = termer_spans(_termers(study, decisions, languages))
    return kwic_lines(answers, targets, width=study.compare.kwic_width, spans=spans)
