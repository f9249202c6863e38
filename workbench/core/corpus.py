"""The tables that flow between stages, and the names of their columns.

Stages exchange two pandas tables:

``respondents`` — one row per kept input row:
    ``respondent_id`` (str), ``source`` (str), ``row`` (int, 1-based record
    number in its source), then every original column except the text
    columns (their text is ``answers.raw_text``) under its own name (group
    columns, weight, language hint...), as strings; an original column named
    ``respondent_id``, ``source`` or ``row`` is kept as ``column:<name>``.

``answers`` — one row per non-empty text cell, in input order:
    ``answer_id`` (str, ``"<respondent_id>|<question>"``), ``respondent_id``,
    ``question`` (the text column's name), ``source``, ``row``, ``raw_text``
    (never modified after ingest), then the columns each stage adds:

    clean:    ``clean_text`` (personal data already replaced by placeholders such
              as ``⟨email⟩``), ``masks`` (list of ``(type, start, end)``: where
              each placeholder stands in ``clean_text``), ``flags`` (list of
              reason codes), ``duplicate_of``
              (answer id or ``None``), ``enters_weighting`` (bool)
    identify: ``language`` (code or ``"und"``), ``confidence`` (float in [0, 1]),
              ``language_source`` (``detector`` / ``hint`` / ``default`` /
              ``decision``), ``mixed`` (bool), ``second_language``
    terms:    ``terms`` (list of str, in order)

Group, weight and hint values are copied onto the answers as
``group:<column>``, ``weight`` and ``hint`` so later stages need only one table
(groups and hint: str, missing = NA; weight: float, 1.0 without a weight column,
NaN where the value is not a number).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import pandas as pd

ANSWER_ID = "answer_id"
RESPONDENT_ID = "respondent_id"
QUESTION = "question"
SOURCE = "source"
ROW = "row"
RAW_TEXT = "raw_text"
CLEAN_TEXT = "clean_text"
MASKS = "masks"
FLAGS = "flags"
DUPLICATE_OF = "duplicate_of"
ENTERS_WEIGHTING = "enters_weighting"
LANGUAGE = "language"
CONFIDENCE = "confidence"
LANGUAGE_SOURCE = "language_source"
MIXED = "mixed"
SECOND_LANGUAGE = "second_language"
TERMS = "terms"
WEIGHT = "weight"
HINT = "hint"
GROUP_PREFIX = "group:"


def answer_key(respondent_id: str, question: str) -> str:
    """The answer id of one cell."""
    return f"{respondent_id}|{question}"


def group_column(name: str) -> str:
    return f"{GROUP_PREFIX}{name}"


@dataclass
class ImportReport:
    """What ingest decided about one source, shown to the user and kept in the manifest."""

    source: str
    path: str
    format: str
    encoding: str | None = None
    delimiter: str | None = None
    sheet: str | None = None
    rows: int = 0
    columns: list[str] = field(default_factory=list)
    sha256: str = ""
    notes: list[str] = field(default_factory=list)

    def as_dict(self) -> dict[str, Any]:
        return dict(self.__dict__)


@dataclass
class Corpus:
    """Everything the stages hand on: the two tables and the import reports."""

    respondents: pd.DataFrame
    answers: pd.DataFrame
    reports: list[ImportReport] = field(default_factory=list)
