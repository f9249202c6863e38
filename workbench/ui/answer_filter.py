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
UNFLAGGED = "no flag"
EXCLUDED = "excluded"
ANY_FLAG = "any flag"


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
        self._position = {answer_id: i for i, answer_id in enumerate(self.ids)}

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
        """Answers whose language deserves a second look, unless the user already decided it.

        Suspect means: undetermined, mixed, labelled by a fallback instead of the
        detector, below the study's confidence bar, or disagreeing with the
        language-hint column.
        """
        frame = self.frame
        if C.LANGUAGE not in frame:
            return np.zeros(self.size, bool)
        language = frame[C.LANGUAGE].astype(str)
        mask = (language == "und").to_numpy().copy()
        if C.MIXED in frame:
            mask |= frame[C.MIXED].fillna(False).astype(bool).to_numpy()
        if C.CONFIDENCE in frame:
            mask |= (frame[C.CONFIDENCE].fillna(0.0).to_numpy(float) < self.min_confidence)
        if C.LANGUAGE_SOURCE in frame:
            source = frame[C.LANGUAGE_SOURCE].astype(str)
            mask |= source.isin(["hint", "default"]).to_numpy()
            mask &= (source != "decision").to_numpy()
        if C.HINT in frame:
            hint = frame[C.HINT].fillna("").astype(str).str.strip().str.lower()
            disagree = ((hint != "") & (hint != language)).to_numpy().copy()
            if C.LANGUAGE_SOURCE in frame:
                disagree &= (frame[C.LANGUAGE_SOURCE].astype(str) != "decision").to_numpy()
            mask |= disagree
        return mask

    def excluded(self) -> np.ndarray:
        return self._excluded

    def select(self, query: AnswerQuery) -> np.ndarray:
        """Row positions matching ``query``, in the asked order."""
        frame = self.frame
        mask = np.ones(self.size, bool)
        if query.language and C.LANGUAGE in frame:
            mask &= (frame[C.LANGUAGE].astype(str) == query.language).to_numpy()
        if query.question:
            mask &= (frame[C.QUESTION].astype(str) == query.question).to_numpy()
        if query.group and "=" in query.group:
            name, value = query.group.split("=", 1)
            column = C.group_column(name)
            if column in frame:
                mask &= (frame[column].astype(str) == value).to_numpy()
        if query.flag == SUSPECT:
            mask &= self.suspect()
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
            hits = self._text().iloc[candidates].str.contains(needle, regex=False).to_numpy()
            mask = np.zeros(self.size, bool)
            mask[candidates[hits]] = True
        positions = np.flatnonzero(mask)
        if query.order == "confidence" and C.CONFIDENCE in frame and len(positions):
            confidence = frame[C.CONFIDENCE].fillna(0.0).to_numpy(float)[positions]
            positions = positions[np.argsort(confidence, kind="stable")]
        return positions
