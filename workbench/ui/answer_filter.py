"""Filtering the answers table for the Answers view, as vectorised pandas/numpy operations.

An :class:`AnswerIndex` is built once per run (it caches the lower-cased text
and one boolean mask per flag), so a filter keystroke over 100,000 answers
costs a few array operations, never a Python loop over rows.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import numpy as np
import pandas as pd

from workbench.core import corpus as C

#: Pseudo-flags offered beside the real flag codes.
SUSPECT = "suspect language"
FALLBACK = "language by fallback"
UNFLAGGED = "no flag"
EXCLUDED = "excluded"
ANY_FLAG = "any flag"
#: Detector labels in this lower share of the range between the study's confidence
#: bar and 1 count as suspect (bar 0.6: below 0.8).
SUSPECT_SHARE = 0.5


@dataclass(frozen=True)
class AnswerQuery:
    """What the user asked to see; empty strings mean "all"."""

    language: str = ""
    flag: str = ""
    #: ``"<group column>=<value>"``, e.g. ``"country=Norland"``.
    group: str = ""
    question: str = ""
    text: str = ""
    order: Literal["input", "confidence"] = "input"


class AnswerIndex:
    """One answers table prepared for repeated filtering."""

    def __init__(self, answers: pd.DataFrame, min_confidence: float = 0.0, excluded: set[str] | None = None) -> None:
        self.frame = answers.reset_index(drop=True)
        self.size = len(self.frame)
        self.min_confidence = min_confidence
        self.ids = self.frame[C.ANSWER_ID].to_numpy()
        excluded = excluded or set()
        self._excluded = self.frame[C.ANSWER_ID].isin(excluded).to_numpy() if excluded else np.zeros(self.size, bool)
        self._lower: pd.Series | None = None
        self._flag_masks: dict[str, np.ndarray] = {}
        self._suspect: np.ndarray | None = None
        self._fallback: np.ndarray | None = None
        self._strings: dict[str, np.ndarray] = {}
        self._position = {answer_id: i for i, answer_id in enumerate(self.ids)}
        # Built now rather than on the first keystroke of a filter, which must stay quick.
        self._text()
        for column in (C.LANGUAGE, C.QUESTION):
            if column in self.frame:
                self._strings_of(column)

    # ------------------------------------------------------------------ choices for the filter bar

    def languages(self) -> list[str]:
        if C.LANGUAGE not in self.frame:
            return []
        return sorted(self.frame[C.LANGUAGE].dropna().astype(str).unique())

    def questions(self) -> list[str]:
        return sorted(self.frame[C.QUESTION].dropna().astype(str).unique())

    def flag_codes(self) -> list[str]:
        if C.FLAGS not in self.frame:
            return []
        codes: set[str] = set()
        for flags in self.frame[C.FLAGS]:
            if flags is not None and len(flags):
                codes.update(str(flag) for flag in flags)
        return sorted(codes)

    def groups(self) -> list[str]:
        """Every ``column=value`` choice over the group columns (at most 50 values per column)."""
        choices = []
        for column in self.frame.columns:
            if isinstance(column, str) and column.startswith(C.GROUP_PREFIX):
                name = column.removeprefix(C.GROUP_PREFIX)
                values = self.frame[column].dropna().astype(str).unique()
                choices.extend(f"{name}={value}" for value in sorted(values)[:50])
        return choices

    def position(self, answer_id: str) -> int | None:
        return self._position.get(answer_id)

    # ------------------------------------------------------------------ masks

    def _text(self) -> pd.Series:
        if self._lower is None:
            column = C.CLEAN_TEXT if C.CLEAN_TEXT in self.frame else C.RAW_TEXT
            self._lower = self.frame[column].fillna("").astype(str).str.lower()
        return self._lower

    def _flag(self, code: str) -> np.ndarray:
        if code not in self._flag_masks:
            if C.FLAGS not in self.frame:
                self._flag_masks[code] = np.zeros(self.size, bool)
            elif code == ANY_FLAG:
                self._flag_masks[code] = np.fromiter(
                    (flags is not None and len(flags) > 0 for flags in self.frame[C.FLAGS]), bool, self.size
                )
            else:
                self._flag_masks[code] = np.fromiter(
                    (flags is not None and code in flags for flags in self.frame[C.FLAGS]), bool, self.size
                )
        return self._flag_masks[code]

    def suspect(self) -> np.ndarray:
        """Answers whose detected language deserves a second look.

        Suspect means the detector labelled the answer but with a confidence in
        the lower half between the study's bar and 1 (bar 0.6: below 0.8), or
        against the language-hint column; or the answer mixes languages, or
        stays undetermined. Answers already decided by the user, and junk
        (non-answers, mash...), which never enters weighting, are left out. The
        halfway line is this view's own rule of thumb, not a published threshold.
        """
        if self._suspect is None:
            self._suspect = self._find_suspects()
        return self._suspect

    def fallback(self) -> np.ndarray:
        """Answers labelled by the fallback (hint column or study default), not junk, not decided.

        These are too short or too unsure for the detector; the fallback is
        usually right, but an answer written in another language than the
        questionnaire's gets the questionnaire's.
        """
        if self._fallback is None:
            source = self._strings_of(C.LANGUAGE_SOURCE) if C.LANGUAGE_SOURCE in self.frame else None
            if source is None:
                self._fallback = np.zeros(self.size, bool)
            else:
                self._fallback = np.isin(source, ["hint", "default"]) & ~self._junk()
        return self._fallback

    def _junk(self) -> np.ndarray:
        from workbench.core.nonanswer import JUNK_CODES  # here, not at import: nonanswer loads emoji

        if "_junk" not in self._flag_masks:
            if C.FLAGS not in self.frame:
                self._flag_masks["_junk"] = np.zeros(self.size, bool)
            else:
                self._flag_masks["_junk"] = np.fromiter(
                    (flags is not None and any(str(f) in JUNK_CODES for f in flags) for flags in self.frame[C.FLAGS]),
                    bool,
                    self.size,
                )
        return self._flag_masks["_junk"]

    def _strings_of(self, column: str) -> np.ndarray:
        """A column as a NumPy array of str, built once (comparisons on it take a few ms for 100k rows)."""
        if column not in self._strings:
            self._strings[column] = self.frame[column].astype(str).to_numpy(dtype=object).astype(str)
        return self._strings[column]

    def _find_suspects(self) -> np.ndarray:
        frame = self.frame
        if C.LANGUAGE not in frame:
            return np.zeros(self.size, bool)
        language = self._strings_of(C.LANGUAGE)
        source = self._strings_of(C.LANGUAGE_SOURCE) if C.LANGUAGE_SOURCE in frame else np.full(self.size, "detector")
        detected = source == "detector"
        mask = language == "und"
        if C.MIXED in frame:
            mask |= frame[C.MIXED].fillna(False).astype(bool).to_numpy()
        if C.CONFIDENCE in frame:
            confidence = frame[C.CONFIDENCE].fillna(0.0).to_numpy(float)
            line = self.min_confidence + SUSPECT_SHARE * (1.0 - self.min_confidence)
            mask |= detected & (confidence < line)
        if C.HINT in frame:
            hint = frame[C.HINT].fillna("").astype(str).str.strip().str.lower().to_numpy(dtype=object).astype(str)
            mask |= detected & (hint != "") & (hint != language)
        return mask & (source != "decision") & ~self._junk()

    def excluded(self) -> np.ndarray:
        return self._excluded

    def select(self, query: AnswerQuery) -> np.ndarray:
        """Row positions matching ``query``, in the asked order."""
        frame = self.frame
        mask = np.ones(self.size, bool)
        if query.language and C.LANGUAGE in frame:
            mask &= self._strings_of(C.LANGUAGE) == query.language
        if query.question:
            mask &= self._strings_of(C.QUESTION) == query.question
        if query.group and "=" in query.group:
            name, value = query.group.split("=", 1)
            column = C.group_column(name)
            if column in frame:
                mask &= self._strings_of(column) == value
        if query.flag == SUSPECT:
            mask &= self.suspect()
        elif query.flag == FALLBACK:
            mask &= self.fallback()
        elif query.flag == EXCLUDED:
            mask &= self._excluded
        elif query.flag == UNFLAGGED:
            mask &= ~self._flag(ANY_FLAG)
        elif query.flag:
            mask &= self._flag(query.flag)
        needle = query.text.strip().lower()
        if needle:
            # Only search rows still in play: cheap when other filters narrowed the table.
            candidates = np.flatnonzero(mask)
            text = self._text() if len(candidates) == self.size else self._text().iloc[candidates]
            hits = text.str.contains(needle, regex=False).to_numpy()
            mask = np.zeros(self.size, bool)
            mask[candidates[hits]] = True
        positions = np.flatnonzero(mask)
        if query.order == "confidence" and C.CONFIDENCE in frame and len(positions):
            confidence = frame[C.CONFIDENCE].fillna(0.0).to_numpy(float)[positions]
            positions = positions[np.argsort(confidence, kind="stable")]
        return positions
