"""Ingest: read every source of a study into the respondents and answers tables.

Each source is read in chunks by the reader its format needs
(:mod:`workbench.core.readers`); everything is read as text, so ``"NA"`` or
``"None"`` typed by a respondent is an answer, not a missing value. Then:

* **Respondents.** Every record read is a respondent (one row of the
  respondents table), even when all its text cells are empty. The id comes
  from ``columns.id`` (spaces trimmed); with no id column it is the 1-based
  record number. A blank id becomes ``row-<n>`` (flagged ``missing_id``). An id
  seen before keeps the first record's id and later ones become
  ``<id>#2``, ``<id>#3`` ... (flagged ``duplicate_id``) so that answer ids stay
  unique. With several sources, generated ids are prefixed with the source
  label (``answers.csv:17``, ``answers.csv:row-17``).
* **Answers.** One answer per non-empty text cell, keyed
  ``answer_key(respondent_id, question)`` with the text column's name as the
  question, in input order. Cells holding only whitespace are not answers
  (counted in the import report).
* **Cells over** :data:`MAX_CELL_CHARS` characters are truncated to that length
  and flagged ``cell_truncated`` — no survey answer is that long, and one
  pasted data dump should not stall every later stage.
* **Copied values.** Group columns become ``group:<column>`` (spaces trimmed,
  blank = missing), the weight column ``weight`` (float; a decimal comma as in
  ``1,25`` is read as a decimal; anything else that is not a number becomes NaN
  and is flagged ``bad_weight`` — validating weights is the weigh stage's job),
  the language-hint column ``hint`` (trimmed, lower case, blank = missing).
  Without a weight column every weight is 1.0.
* **Ledger.** Every record gets a row event (``kept``/``read``, or
  ``kept``/``no_text`` when all its text cells are empty) plus a ``flagged``
  event per problem; records that could not be read at all (a broken JSON line)
  get a ``dropped`` event keyed ``<source label>:<record>``. Every answer gets
  ``kept``/``read``. So rows in = rows accounted for and answers in = answers
  accounted for.

The respondents table holds every original column except the text columns
(their text lives in ``answers.raw_text``); an original column whose name
collides with ``respondent_id``, ``source`` or ``row`` is kept as
``column:<name>``.
"""

from __future__ import annotations

from collections import Counter
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.compute as pc

from workbench.core.corpus import (
    ANSWER_ID,
    HINT,
    QUESTION,
    RAW_TEXT,
    RESPONDENT_ID,
    ROW,
    SOURCE,
    WEIGHT,
    Corpus,
    ImportReport,
    group_column,
)
from workbench.core.errors import InputError, SettingsError, did_you_mean
from workbench.core.ledger import Ledger
from workbench.core.progress import Reporter
from workbench.core.readers import CHUNK_ROWS, Chunk, Opened, detect_format, open_source
from workbench.core.readers.textfolder import ID_COLUMN as TXT_ID, TEXT_COLUMN as TXT_TEXT
from workbench.core.settings import Source, Study

STAGE = "ingest"
#: Longest cell kept whole, in characters (1 MB of ASCII text).
MAX_CELL_CHARS = 1_000_000
_RESERVED = {RESPONDENT_ID, SOURCE, ROW}
_DECIMAL_COMMA = r"[+-]?\d+,\d+"


@dataclass(frozen=True)
class Roles:
    """Which column plays which part, as the study names them (``txt`` sources have fixed names)."""

    id: str | None
    text: list[str]
    groups: list[str]
    weight: str | None
    hint: str | None

    def named(self) -> list[tuple[str, str]]:
        """``(study key, column)`` for every column the study names."""
        pairs = [("columns.id", self.id)] if self.id else []
        pairs += [("columns.text", t) for t in self.text]
        pairs += [("columns.groups", g) for g in self.groups]
        pairs += [("columns.weight", self.weight)] if self.weight else []
        pairs += [("columns.language_hint", self.hint)] if self.hint else []
        return pairs


def roles_for(study: Study, fmt: str) -> Roles:
    """The column roles for one source; a folder of .txt files has ``file`` and ``text``."""
    c = study.columns
    if fmt == "txt":
        roles = Roles(c.id or TXT_ID, c.text or [TXT_TEXT], list(c.groups), c.weight, c.language_hint)
    else:
        roles = Roles(c.id, list(c.text), list(c.groups), c.weight, c.language_hint)
    seen: dict[str, str] = {}
    for key, name in roles.named():
        if name in seen:
            if key == seen[name]:
                raise SettingsError(f"column '{name}' is listed twice in {key}; list it once")
            raise SettingsError(
                f"column '{name}' is named in both {seen[name]} and {key}; a column plays one part — fix the study's [columns]"
            )
        seen[name] = key
    return roles


def source_labels(study: Study) -> list[str]:
    """Ledger/corpus label of each source: ``label`` or the file name; must be distinct."""
    labels = [s.label or Path(s.path).name for s in study.sources]
    for number, label in enumerate(labels, start=1):
        if labels.index(label) != number - 1:
            raise SettingsError(
                f"sources {labels.index(label) + 1} and {number} are both labelled '{label}'; "
                "give each [[sources]] table a distinct label = '...'"
            )
    return labels


def _check_not_study(study: Study, number: int, source: Source) -> None:
    if study.study_path and Path(source.path).resolve() == Path(study.study_path).resolve():
        raise SettingsError(
            f"{study.study_path}: sources[{number}].path points at the study file itself; name the data file instead"
        )


def _listing(columns: list[str]) -> str:
    # a "column name" can be a whole data line when the header is missing; keep the message one readable line
    shown = ", ".join(c if len(c) <= 60 else c[:57] + "..." for c in columns[:30])
    return shown + (f" ... ({len(columns) - 30} more)" if len(columns) > 30 else "")


def _looks_like_data(columns: list[str]) -> bool:
    def datum(name: str) -> bool:
        return name.replace(".", "", 1).replace("-", "", 1).isdigit() or len(name) > 60

    return bool(columns) and sum(map(datum, columns)) * 2 >= len(columns)


def check_columns(roles: Roles, columns: list[str], duplicated: dict[str, list[int]], path: Path) -> None:
    """Raise a one-line error naming the first column the study needs that the source lacks."""
    if not roles.text:
        raise SettingsError(
            f"the study names no text column; set columns.text to the open-ended question column(s) of {path.name} "
            f"(columns found: {_listing(columns)})"
        )
    for key, name in roles.named():
        if name not in columns:
            hint = did_you_mean(name, columns)
            if not hint:
                folded = [c for c in columns if c.casefold() == name.casefold()]
                hint = f" (did you mean '{folded[0]}'?)" if folded else ""
            if not name.strip():
                hint = " (a name of only spaces: header cells without a name are read as column_<position>)"
            header = " — the first line looks like data, but the file needs a header row" if _looks_like_data(columns) else ""
            raise SettingsError(
                f"{path} has no column '{name}' (named in {key}){hint}; columns found: {_listing(columns)}{header}; "
                f"fix {key} in the study"
            )
        if name in duplicated:
            where = ", ".join(map(str, duplicated[name]))
            raise InputError(
                f"{path}: column '{name}' (named in {key}) appears {len(duplicated[name])} times (positions {where}); "
                "rename the copies so the study can tell them apart"
            )


# --------------------------------------------------------------------------- assembling


@dataclass
class _Parts:
    """Everything collected chunk by chunk, joined once at the end."""

    labels: list[str] = field(default_factory=list)
    label_of_chunk: list[int] = field(default_factory=list)
    originals: list[pd.DataFrame] = field(default_factory=list)
    ids: list[pd.Series] = field(default_factory=list)
    missing: list[np.ndarray] = field(default_factory=list)
    rows: list[np.ndarray] = field(default_factory=list)
    no_text: list[np.ndarray] = field(default_factory=list)
    weights: list[np.ndarray] = field(default_factory=list)
    hints: list[pd.Series] = field(default_factory=list)
    groups: dict[str, list[pd.Series]] = field(default_factory=dict)
    #: answers, in input order: respondent position, question index, text, original length if truncated (else 0)
    a_pos: list[np.ndarray] = field(default_factory=list)
    a_q: list[np.ndarray] = field(default_factory=list)
    a_text: list[pd.Series] = field(default_factory=list)
    a_cut: list[np.ndarray] = field(default_factory=list)
    #: row events found while reading: (respondent position, code, message)
    flags: list[tuple[int, str, str]] = field(default_factory=list)
    #: events of records that never became respondents
    dropped: list[tuple[str, str, str, int, str, str, str, str]] = field(default_factory=list)
    questions: dict[str, int] = field(default_factory=dict)
    count: int = 0


def _strings(values: object) -> pd.Series:
    """An Arrow array (or anything pyarrow takes) as a pandas ``str`` Series."""
    array = values if isinstance(values, pa.Array | pa.ChunkedArray) else pa.array(values, type=pa.large_string())
    return array.to_pandas().reset_index(drop=True)


def _chunk_into(parts: _Parts, chunk: Chunk, roles: Roles, label: str, multi: bool, report: ImportReport, tally: Counter) -> None:
    """Take one chunk of records into ``parts``: problems, cells, ids, answers and copied values."""
    frame = chunk.frame
    n = len(frame)
    start = parts.count
    _take_problems(parts, chunk, label, report, tally)
    report.rows += n
    if n == 0:
        return
    for _key, name in roles.named():
        if name not in frame.columns:  # JSON Lines: a key absent from every object of this chunk
            frame[name] = ""
    cut_lengths = _truncate(parts, frame, roles, start, tally)
    ids, missing = _ids(frame, chunk.rows, roles, label, multi, tally)
    any_text = _take_answers(parts, frame, roles, start, cut_lengths, tally)
    weight = _weights(parts, frame, roles, start, tally)
    if roles.hint:
        hint = frame[roles.hint].str.strip().str.lower()
        hint = hint.where(hint.str.len() > 0).reset_index(drop=True)
    else:
        hint = pd.Series(np.full(n, np.nan), dtype=str)
    for name in roles.groups:
        values = frame[name].str.strip()
        parts.groups.setdefault(name, []).append(values.where(values.str.len() > 0).reset_index(drop=True))

    keep = [c for c in frame.columns if c not in roles.text]
    originals = frame[keep].reset_index(drop=True)
    originals.columns = [f"column:{c}" if c in _RESERVED else c for c in keep]
    if label not in parts.labels:
        parts.labels.append(label)
    parts.label_of_chunk.append(parts.labels.index(label))
    parts.originals.append(originals)
    parts.ids.append(ids)
    parts.missing.append(missing)
    parts.rows.append(chunk.rows.astype(np.int64))
    parts.no_text.append(~any_text)
    parts.weights.append(weight)
    parts.hints.append(hint)
    parts.count += n


def _take_problems(parts: _Parts, chunk: Chunk, label: str, report: ImportReport, tally: Counter) -> None:
    start = parts.count
    for problem in chunk.problems:
        tally[problem.code] += 1
        if problem.index is not None:
            parts.flags.append((start + problem.index, problem.code, problem.message))
        elif problem.status == "dropped":
            report.rows += 1
            parts.dropped.append(("row", f"{label}:{problem.row}", label, int(problem.row), STAGE,
                                  problem.status, problem.code, problem.message))
        else:
            parts.flags.append((_delivered(parts, label, problem.row), problem.code, problem.message))


def _truncate(parts: _Parts, frame: pd.DataFrame, roles: Roles, start: int, tally: Counter) -> dict[str, np.ndarray]:
    """Cut cells over MAX_CELL_CHARS; return the original lengths of cut text cells (0 = not cut)."""
    cut_lengths: dict[str, np.ndarray] = {}
    for name in frame.columns:
        lengths = frame[name].str.len().to_numpy(dtype=np.int64, na_value=0)
        over = lengths > MAX_CELL_CHARS
        if not over.any():
            continue
        frame.loc[over, name] = frame.loc[over, name].str.slice(0, MAX_CELL_CHARS)
        tally["cell_truncated"] += int(over.sum())
        if name in roles.text:
            cut_lengths[name] = np.where(over, lengths, 0)
        else:
            for index in np.flatnonzero(over).tolist():
                parts.flags.append((start + index, "cell_truncated",
                                    f"cell '{name}' held {lengths[index]:,} characters; kept the first {MAX_CELL_CHARS:,}"))
    return cut_lengths


def _ids(
    frame: pd.DataFrame, rows: np.ndarray, roles: Roles, label: str, multi: bool, tally: Counter
) -> tuple[pd.Series, np.ndarray]:
    """Respondent ids before de-duplication, and which were blank (and generated)."""
    if roles.id is None:
        ids = _strings(pa.array(rows).cast(pa.large_string()))
        return (f"{label}:" + ids if multi else ids), np.zeros(len(frame), dtype=bool)
    ids = frame[roles.id].fillna("").str.strip().reset_index(drop=True)
    missing = (ids.str.len() == 0).to_numpy(dtype=bool)
    if missing.any():
        tally["missing_id"] += int(missing.sum())
        prefix = f"{label}:row-" if multi else "row-"
        ids[missing] = [f"{prefix}{r}" for r in rows[missing].tolist()]
    return ids, missing


def _take_answers(
    parts: _Parts, frame: pd.DataFrame, roles: Roles, start: int, cut_lengths: dict[str, np.ndarray], tally: Counter
) -> np.ndarray:
    """Collect the non-empty text cells in input order (record, then question); return which records had any."""
    n = len(frame)
    any_text = np.zeros(n, dtype=bool)
    positions, questions, texts, cuts = [], [], [], []
    for name in roles.text:
        cells = frame[name]
        present = ((cells.str.len() > 0) & ~cells.str.isspace()).to_numpy(dtype=bool, na_value=False)
        any_text |= present
        tally["empty_cells"] += int(n - present.sum())
        index = np.flatnonzero(present)
        if index.size:
            positions.append(index)
            questions.append(np.full(index.size, parts.questions.setdefault(name, len(parts.questions)), dtype=np.int32))
            texts.append(cells.iloc[index])
            cut = cut_lengths.get(name)
            cuts.append(cut[index] if cut is not None else np.zeros(index.size, dtype=np.int64))
    if positions:
        pos = np.concatenate(positions)
        q = np.concatenate(questions)
        text = pd.concat(texts, ignore_index=True)
        cut = np.concatenate(cuts)
        if len(positions) > 1:
            order = np.lexsort((q, pos))
            pos, q, cut = pos[order], q[order], cut[order]
            text = text.iloc[order]
        parts.a_pos.append(start + pos)
        parts.a_q.append(q)
        parts.a_text.append(text.reset_index(drop=True))
        parts.a_cut.append(cut)
    return any_text


def _weights(parts: _Parts, frame: pd.DataFrame, roles: Roles, start: int, tally: Counter) -> np.ndarray:
    """Weights as floats; a decimal comma is read as a decimal; anything else unreadable is NaN and flagged."""
    if not roles.weight:
        return np.ones(len(frame), dtype=np.float64)
    raw = frame[roles.weight].fillna("").str.strip()
    try:  # Arrow's parser is far faster than pandas' and enough when every value is a plain number
        weight = pc.cast(pa.array(raw, type=pa.large_string()), pa.float64()).to_numpy(zero_copy_only=False).copy()
    except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
        weight = pd.to_numeric(raw, errors="coerce").to_numpy(dtype=np.float64, na_value=np.nan, copy=True)
    unread = np.isnan(weight)
    if not unread.any():
        return weight
    comma = unread & raw.str.fullmatch(_DECIMAL_COMMA).to_numpy(dtype=bool, na_value=False)
    if comma.any():
        fixed = pd.to_numeric(raw[comma].str.replace(",", ".", regex=False), errors="coerce")
        weight[comma] = fixed.to_numpy(dtype=np.float64, na_value=np.nan)
        tally["decimal_comma"] += int(comma.sum())
    for index in np.flatnonzero(np.isnan(weight)).tolist():
        value = raw.iloc[index]
        problem = "is blank" if not value else f"{value[:40]!r} is not a number"
        parts.flags.append((start + index, "bad_weight",
                            f"weight in column '{roles.weight}' {problem}; left empty (NaN) for the weigh stage"))
        tally["bad_weight"] += 1
    return weight


def _delivered(parts: _Parts, label: str, row: int) -> int:
    """Position of a record of ``label`` already taken in (a reader's late finding about it)."""
    code = parts.labels.index(label)
    end = parts.count
    for chunk in range(len(parts.rows) - 1, -1, -1):
        rows = parts.rows[chunk]
        end -= len(rows)
        if parts.label_of_chunk[chunk] == code:
            found = np.flatnonzero(rows == row)
            if found.size:
                return end + int(found[0])
    raise AssertionError(f"reader referred to record {row} of {label}, which was never delivered")


def _unique_ids(keys: list[str], sources: np.ndarray, rows: np.ndarray) -> tuple[list[int], list[tuple[int, str, str]]]:
    """Make ``keys`` unique in place: the first record keeps its id, later ones get ``#2``, ``#3`` ...

    Suffixes already taken by another record are skipped. Returns the changed
    positions and their ledger flags.
    """
    taken = set(keys)
    if len(taken) == len(keys):
        return [], []
    repeated = pd.Series(keys, dtype=object).duplicated(keep=False).to_numpy()
    first_at: dict[str, int] = {}
    next_suffix: dict[str, int] = {}
    changed: list[int] = []
    flags = []
    for position in np.flatnonzero(repeated).tolist():
        base = keys[position]
        if base not in first_at:
            first_at[base] = position
            continue
        number = next_suffix.get(base, 2)
        candidate = f"{base}#{number}"
        while candidate in taken:
            number += 1
            candidate = f"{base}#{number}"
        next_suffix[base] = number + 1
        taken.add(candidate)
        keys[position] = candidate
        changed.append(position)
        original = first_at[base]
        flags.append((position, "duplicate_id",
                      f"respondent id '{base}' was already used by record {rows[original]} of {sources[original]}; "
                      f"this record's id became '{candidate}' so its answers stay separate"))
    return changed, flags


def _assemble(
    parts: _Parts, roles_by_label: dict[str, Roles], ledger: Ledger
) -> tuple[pd.DataFrame, pd.DataFrame, Counter]:
    """Join the chunks into the two tables and write the ledger; ``parts`` is emptied on the way.

    Also returns how many duplicate ids each source label had.
    """
    if not parts.ids:
        raise InputError("the study's sources hold no records")
    codes = np.repeat(np.asarray(parts.label_of_chunk, dtype=np.int64), [len(r) for r in parts.rows])
    sources = np.array(parts.labels, dtype=object)[codes]  # shares the label strings, no per-row copies
    rows = np.concatenate(parts.rows)
    ids = pd.concat(parts.ids, ignore_index=True)
    parts.ids.clear()
    keys = ids.tolist()
    changed, dup_flags = _unique_ids(keys, sources, rows)
    final = ids.copy()
    if changed:
        final.iloc[changed] = [keys[p] for p in changed]
    final_arrow = pa.array(final, type=pa.large_string())
    source_arrow = pc.take(pa.array(parts.labels, type=pa.large_string()), pa.array(codes))
    respondents = pd.concat(
        [pd.DataFrame({RESPONDENT_ID: _strings(final_arrow), SOURCE: _strings(source_arrow), ROW: rows}),
         pd.concat(parts.originals, ignore_index=True)],
        axis=1,
    )
    parts.originals.clear()

    pos = np.concatenate(parts.a_pos) if parts.a_pos else np.empty(0, dtype=np.int64)
    q = np.concatenate(parts.a_q) if parts.a_q else np.empty(0, dtype=np.int32)
    cut = np.concatenate(parts.a_cut) if parts.a_cut else np.empty(0, dtype=np.int64)
    text = pd.concat(parts.a_text, ignore_index=True) if parts.a_text else pd.Series([], dtype=str)
    parts.a_text.clear()
    names = list(parts.questions)
    take = pa.array(pos)
    respondent = pc.take(final_arrow, take)
    question = pc.take(pa.array(names, type=pa.large_string()), pa.array(q))
    answer_ids = pc.binary_join_element_wise(respondent, question, pa.scalar("|", type=pa.large_string()))
    answers = pd.DataFrame({
        ANSWER_ID: _strings(answer_ids),
        RESPONDENT_ID: _strings(respondent),
        QUESTION: _strings(question),
        SOURCE: _strings(pc.take(source_arrow, take)),
        ROW: rows[pos],
        RAW_TEXT: text,
        WEIGHT: np.concatenate(parts.weights)[pos],
        HINT: pd.concat(parts.hints, ignore_index=True).iloc[pos].reset_index(drop=True),
    })
    del text
    parts.hints.clear()
    for name, pieces in parts.groups.items():
        answers[group_column(name)] = pd.concat(pieces, ignore_index=True).iloc[pos].reset_index(drop=True)
        pieces.clear()

    # rows: one base event each, the dropped ones, then one flagged event per problem
    # Keys straight from the tables' id columns: the ledger keeps their Arrow buffers, no str per event.
    _emit(ledger, "row", lambda lo, hi: respondents[RESPONDENT_ID].array[lo:hi], sources, rows,
          np.concatenate(parts.no_text).astype(np.intp),
          np.array(["read", "no_text"], dtype=object),
          np.array(["read", "kept as a respondent; every text column is empty"], dtype=object))
    ledger.extend(parts.dropped)
    flags = list(parts.flags) + dup_flags
    for position in np.flatnonzero(np.concatenate(parts.missing)).tolist():
        column = roles_by_label[sources[position]].id
        flags.append((position, "missing_id",
                      f"record {rows[position]} has no id in column '{column}'; given the id '{ids.iloc[position]}'"))
    flags.sort(key=lambda f: f[0])
    ledger.extend([("row", keys[p], sources[p], int(rows[p]), STAGE, "flagged", code, message) for p, code, message in flags])

    # answers: one base event each, then the truncated ones
    _emit(ledger, "answer", lambda lo, hi: answers[ANSWER_ID].array[lo:hi], sources[pos], rows[pos], q,
          np.array(["read"] * len(names), dtype=object),
          np.array([f"read from column '{name}'" for name in names], dtype=object))
    for index in np.flatnonzero(cut).tolist():
        ledger.answer(answer_ids[index].as_py(), sources[pos[index]], int(rows[pos[index]]), STAGE, "flagged",
                      "cell_truncated", f"answer held {cut[index]:,} characters; kept the first {MAX_CELL_CHARS:,}")
    return respondents, answers, Counter(sources[p] for p, _code, _message in dup_flags)


def _emit(
    ledger: Ledger, level: str, keys: Callable[[int, int], list[str]], sources: np.ndarray, rows: np.ndarray,
    pick: np.ndarray, codes: np.ndarray, messages: np.ndarray,
) -> None:
    """One ``kept`` event per entity; ``codes[pick[i]]`` and ``messages[pick[i]]`` describe entity i."""
    n = len(rows)
    ledger.bulk(level, keys(0, n), sources, rows, STAGE, "kept", codes[pick], messages[pick])


# --------------------------------------------------------------------------- the stage


_NOTES = {
    "ragged_row": "{n:,} records had more fields than the header (extra fields dropped; ledger code ragged_row)",
    "bad_json": "{n:,} lines were not JSON objects and were skipped (ledger code bad_json)",
    "lone_surrogate": "{n:,} lines held half a UTF-16 surrogate pair, replaced by U+FFFD (ledger code lone_surrogate)",
    "undecodable": "{n:,} files could not be decoded and were skipped (ledger code undecodable)",
    "unreadable": "{n:,} files could not be read and were skipped (ledger code unreadable)",
    "cell_truncated": "{n:,} cells over {limit:,} characters were truncated (ledger code cell_truncated)",
    "unclosed_quote": "warning: the last record's text runs to the end of the file; a quoted field probably never closes (ledger code unclosed_quote)",
    "empty_cells": "{n:,} empty text cells (not answers)",
    "decimal_comma": "{n:,} weights written with a decimal comma were read as decimals",
    "bad_weight": "{n:,} weights are blank or not numbers and were left empty (ledger code bad_weight)",
    "missing_id": "{n:,} records had no id and were given 'row-<record>' (ledger code missing_id)",
    "duplicate_id": "{n:,} records repeat an id used before and were given '<id>#2', '<id>#3' ... (ledger code duplicate_id)",
}


def _read_one(
    study: Study, number: int, source: Source, label: str, multi: bool, parts: _Parts, reporter: Reporter,
    done_before: int, chunk_rows: int,
) -> tuple[ImportReport, Roles]:
    _check_not_study(study, number, source)
    fmt = detect_format(source)
    report = ImportReport(source=label, path=str(source.path), format=fmt)
    roles = roles_for(study, fmt)
    opened: Opened = open_source(source, report, text_columns=roles.text, chunk_rows=chunk_rows)
    path = Path(source.path)
    if opened.columns is not None:
        check_columns(roles, opened.columns, opened.duplicated, path)
    tally: Counter = Counter()
    seen: dict[str, None] = dict.fromkeys(opened.columns or [])
    kept_before = parts.count
    dropped_before = len(parts.dropped)
    try:
        for chunk in opened.chunks:
            seen.update(dict.fromkeys(chunk.frame.columns))
            _chunk_into(parts, chunk, roles, label, multi, report, tally)
            total = max(opened.expected_rows, report.rows)
            reporter.update(STAGE, done_before + report.rows, done_before + total, f"{label}: {report.rows:,} records read")
    finally:
        opened.chunks.close()  # type: ignore[attr-defined]
    if parts.count == kept_before:
        if report.rows:
            raise InputError(
                f"{path}: none of its {report.rows:,} records could be read (first problem: {parts.dropped[dropped_before][7]})"
            )
        if fmt == "jsonl":
            raise InputError(f"{path} holds no JSON objects, only blank lines; export the answers again")
        where = f"sheet '{report.sheet}' of {path}" if report.sheet else str(path)
        raise InputError(f"{where} has a header row but no data rows; export the answers with the header")
    if opened.columns is None:
        report.columns = list(seen)
        check_columns(roles, report.columns, {}, path)
    for code, count in tally.items():
        if code in _NOTES and count:
            report.notes.append(_NOTES[code].format(n=count, limit=MAX_CELL_CHARS))
    return report, roles


def read_corpus(study: Study, ledger: Ledger, reporter: Reporter, *, chunk_rows: int = CHUNK_ROWS) -> Corpus:
    """Read every source of ``study`` into a :class:`~workbench.core.corpus.Corpus`.

    Parameters
    ----------
    study
        The resolved study; ``sources`` and ``columns`` are used.
    ledger
        Receives one ``row`` event per input record and one ``answer`` event
        per answer (see the module docstring for codes).
    reporter
        Progress is reported per chunk as records read of an estimated total.
    chunk_rows
        Records per chunk; smaller chunks use less memory.

    Returns
    -------
    Corpus
        ``respondents`` (one row per record read), ``answers`` (one row per
        non-empty text cell, in input order) and one
        :class:`~workbench.core.corpus.ImportReport` per source.

    Raises
    ------
    InputError
        A source is missing, unreadable, empty, binary, undecodable or malformed.
    SettingsError
        The study names a column a source lacks, or contradicts itself.
    """
    labels = source_labels(study)
    multi = len(study.sources) > 1
    parts = _Parts()
    reports: list[ImportReport] = []
    roles_by_label: dict[str, Roles] = {}
    done = 0
    for number, (source, label) in enumerate(zip(study.sources, labels), start=1):
        report, roles = _read_one(study, number, source, label, multi, parts, reporter, done, chunk_rows)
        done += report.rows
        reports.append(report)
        roles_by_label[label] = roles
    reporter.update(STAGE, done, done, "building the answers table")
    respondents, answers, duplicates = _assemble(parts, roles_by_label, ledger)
    for report in reports:  # duplicates are only known once every source is in
        if duplicates[report.source]:
            report.notes.append(_NOTES["duplicate_id"].format(n=duplicates[report.source]))
    return Corpus(respondents=respondents, answers=answers, reports=reports)


def peek_source(path: Path, rows: int = 2000) -> tuple[pd.DataFrame, ImportReport]:
    """The first ``rows`` records of a data file or .txt folder, as strings, and what the reader decided.

    Used by ``termloom init``; skips whole-file passes so large files open fast.
    """
    source = Source(path=Path(path))
    fmt = detect_format(source)
    report = ImportReport(source=Path(path).name, path=str(path), format=fmt)
    opened = open_source(source, report, text_columns=[], chunk_rows=rows, full=False)
    frames = []
    count = 0
    try:
        for chunk in opened.chunks:
            frames.append(chunk.frame)
            count += len(chunk.frame)
            if count >= rows:
                break
    finally:
        opened.chunks.close()  # type: ignore[attr-defined]
    frame = pd.concat(frames, ignore_index=True).head(rows) if frames else pd.DataFrame(columns=opened.columns or [])
    frame = frame.fillna("")
    report.rows = len(frame)
    report.columns = list(frame.columns) if opened.columns is None else opened.columns
    return frame, report
