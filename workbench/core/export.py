"""Write one run's outputs into an output folder that R, Python, Stata and spreadsheets open as is.

Layout of the output folder (formats from ``study.export.formats``; a stage
that did not run writes nothing)::

    manifest.json                 written last: settings, versions, inputs, counts,
                                  timings, notes, size + SHA-256 of every file below
    ledger.csv  ledger.parquet    every event of every input row and answer
    corpus/
      answers.parquet             one row per answer: ids, question, source, row,
      answers.csv                 raw and cleaned text, masks, flags, language,
                                  confidence, terms, in_matrix (entered a matrix)...
      respondents.dta             Stata 14+ (format 118, UTF-8): one row per respondent,
      respondents.parquet         answer counts, one 0/1 variable per flag code, one
      respondents.csv             0/1 variable per glossary concept; merge on respondent_id
    matrices/                     per language code and ``pooled`` (see matrices.py):
      <lang>.terms.txt  <lang>.rows.txt
      <lang>.weights.mtx  <lang>.counts.mtx  <lang>.weights.npz  <lang>.counts.npz
      <lang>.parquet              long form: row_id, term, weight, count
      <lang>.dense.csv            only with export.dense_csv, under export.dense_limit
    terms/
      vocabulary__<lang>.csv/.json, stop_words_removed__<lang>.csv/.json, terms.xlsx
    keywords/
      <lang>.csv  <lang>.json     top keywords per language and pooled (weigh stage)
      keywords.xlsx               a "contents" sheet, then one sheet per table
    compare/
      <name>.csv  <name>.json     keyness, group keywords, concepts, stability, KWIC...
      compare.xlsx                a "contents" sheet (full names, descriptions), one sheet per table
    charts/
      keywords-<lang>.png/.svg    top keywords per language and pooled
      keywords-<grouping>-<group>.png/.svg   top keywords of each group (in its main language)
      concepts.png/.svg           concepts across languages (with a glossary)

File names made from table names, languages or group values are sanitised by
:func:`safe_name`: no path separators, no ``..``, no control characters, at
most 100 bytes, unique even on case-insensitive file systems.

Workbooks are for reading: a sheet of a term-by-term table (keyness,
vocabulary, stop words removed — sorted by G² or frequency, most telling
first) holds its first :data:`XLSX_TERM_ROWS` rows plus any further
significant keyness rows; its CSV and JSON files hold every row, and the
workbook's contents sheet says so. (Writing a spreadsheet cell costs about
three microseconds, compressed; a 100,000-answer study has 1.4 million of
them in such tables, most far below any significance.)

A table written both as CSV and into a workbook is made spreadsheet-safe
once (see :func:`workbench.core.tables.spreadsheet_frame`).

Every file is written atomically (see :mod:`workbench.core.atomic`). CSV and
XLSX text cells are protected against formula injection (see
:mod:`workbench.core.tables`); Parquet, JSON and the matrix files keep the
exact text.

Re-running into the same folder replaces each file atomically. Files the
previous run listed in its manifest that this run does not write are deleted
(they were termloom's own outputs and would otherwise be mistaken for current
ones); files termloom never listed are left alone, and ``verify`` reports them
as extra. The manifest lists exactly what this run wrote.
"""

from __future__ import annotations

import re
import time
import unicodedata
from collections.abc import Callable, Iterable
from pathlib import Path, PurePosixPath
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd
import scipy.sparse as sp

from workbench.core import corpus as C
from workbench.core.atomic import TEMP_PREFIX, atomic_path, deferred_dir_sync, describe_os_error, remove_stale_temps
from workbench.core.charts import concept_chart, concept_matrix, keyword_chart, save_figure_as, top_terms
from workbench.core.errors import InputError, OutputError
from workbench.core.manifest import MANIFEST_NAME, read_manifest, run_content, write_manifest
from workbench.core.matrices import (
    check_dense,
    load_matrix,
    write_dense_csv,
    write_lines,
    write_long_parquet,
    write_mtx,
    write_npz,
)
from workbench.core.progress import Reporter
from workbench.core.tables import (
    CSV_SLICE_ROWS,
    spreadsheet_frame,
    to_jsonable,
    write_csv,
    write_json_table,
    write_stata,
    write_xlsx,
)

if TYPE_CHECKING:
    from workbench.core.pipeline import RunOutputs

__all__ = ["load_matrix", "safe_name", "write_run"]

STAGE = "export"
POOLED = "pooled"

#: Answers-table columns in the order the corpus export writes them; other columns follow.
ANSWER_COLUMNS: tuple[str, ...] = (
    C.ANSWER_ID,
    C.RESPONDENT_ID,
    C.QUESTION,
    C.SOURCE,
    C.ROW,
    C.RAW_TEXT,
    C.CLEAN_TEXT,
    C.MASKS,
    C.FLAGS,
    C.DUPLICATE_OF,
    C.ENTERS_WEIGHTING,
    C.LANGUAGE,
    C.CONFIDENCE,
    C.LANGUAGE_SOURCE,
    C.MIXED,
    C.SECOND_LANGUAGE,
    C.TERMS,
)
IN_MATRIX = "in_matrix"

_WINDOWS_RESERVED = frozenset(
    {"con", "prn", "aux", "nul", *(f"com{i}" for i in range(1, 10)), *(f"lpt{i}" for i in range(1, 10))}
)
_NAME_MAX_BYTES = 100


# --------------------------------------------------------------------------- names


def safe_name(text: object, used: set[str] | None = None, max_bytes: int = _NAME_MAX_BYTES) -> str:
    """A file-name part made from ``text``: safe on every common file system, unique within ``used``.

    Letters and digits of any script are kept (after Unicode NFC); every other
    character (path separators, spaces, colons, control characters...) becomes
    ``-``; runs of dots and dashes collapse to one ``-`` so no ``..`` remains;
    leading/trailing dots and dashes go; Windows device names get a ``_``; the result is cut to
    ``max_bytes`` bytes of UTF-8. ``used`` holds case-folded names already
    taken; a clash gets ``-2``, ``-3``... and the new name is added to it.
    """
    name = unicodedata.normalize("NFC", str(text))
    name = "".join(ch if ch.isalnum() or ch in "._+-" else "-" for ch in name)
    # Any run of dots and dashes holding a dash, and any run of 2+ dots, becomes one dash: no "..".
    name = re.sub(r"[-.]*-[-.]*|\.{2,}", "-", name).strip("-._") or "x"
    stem, dot, rest = name.partition(".")
    if stem.lower() in _WINDOWS_RESERVED:  # "CON.txt" is CON too, so the mark goes on the stem
        name = f"{stem}_{dot}{rest}"
    name = _cut_bytes(name, max_bytes)
    if used is None:
        return name
    candidate, number = name, 2
    while candidate.casefold() in used:
        suffix = f"-{number}"
        candidate = _cut_bytes(name, max_bytes - len(suffix)) + suffix
        number += 1
    used.add(candidate.casefold())
    return candidate


def _cut_bytes(text: str, limit: int) -> str:
    encoded = text.encode("utf-8")
    if len(encoded) <= limit:
        return text
    return encoded[:limit].decode("utf-8", errors="ignore").rstrip("-.") or "x"


# --------------------------------------------------------------------------- folder


def prepare_folder(out_dir: Path) -> Path:
    """Create ``out_dir`` if needed and prove it is writable; one-line :class:`OutputError` otherwise."""
    out_dir = Path(out_dir)
    try:  # exists() itself raises on a name too long for the file system
        if out_dir.exists() and not out_dir.is_dir():
            raise OutputError(f"output folder {out_dir} is a file; give the path of a folder (it is created if missing)")
        out_dir.mkdir(parents=True, exist_ok=True)
        probe = out_dir / f"{TEMP_PREFIX}probe"
        probe.write_bytes(b"")
        probe.unlink()
    except OSError as exc:
        raise OutputError(describe_os_error(exc, out_dir)) from None
    remove_stale_temps(out_dir)
    return out_dir


def _previous_files(out_dir: Path) -> set[str]:
    """Files the previous run in this folder listed, as safe relative POSIX paths."""
    if not (out_dir / MANIFEST_NAME).is_file():
        return set()
    try:
        manifest = read_manifest(out_dir)
    except (InputError, OSError):
        # A damaged old manifest only means nothing is deleted; verify lists the leftovers.
        return set()
    found = set()
    for entry in manifest["files"]:
        text = entry.get("path") if isinstance(entry, dict) else None
        if isinstance(text, str) and text:
            path = PurePosixPath(text)
            if not path.is_absolute() and ".." not in path.parts and "\\" not in text:
                found.add(path.as_posix())
    return found


def study_inputs(study: Any) -> dict[Path, str]:
    """The study's own files (resolved) and what names each: an export must never write over one."""
    found: dict[Path, str] = {}
    for number, source in enumerate(study.sources, start=1):
        found[Path(source.path).resolve()] = f"sources[{number}].path"
    if study.study_path is not None:
        found[Path(study.study_path).resolve()] = "the study file"
        found[Path(study.decisions_path).resolve()] = "the study's decision store"
    if study.compare.glossary is not None:
        found[Path(study.compare.glossary).resolve()] = "compare.glossary"
    for path in study.compare.dictionaries:
        found[Path(path).resolve()] = "compare.dictionaries"
    return found


def _input_at(path: Path, inputs: dict[Path, str]) -> str:
    """What names ``path`` (or a folder source holding it) among ``inputs``, or ``""``."""
    if not inputs:
        return ""
    target = path.resolve()
    for candidate in (target, *target.parents):
        what = inputs.get(candidate)
        if what and (candidate == target or candidate.is_dir()):
            return f"{candidate} ({what})"
    return ""


class _Sink:
    """Collects what the export wrote and the notes it made; knows the requested formats."""

    def __init__(
        self, root: Path, formats: Iterable[str], reporter: Reporter, total: int, inputs: dict[Path, str] | None = None
    ) -> None:
        self.root = root
        self.formats = set(formats)
        self.reporter = reporter
        self.files: list[Path] = []
        self.notes: list[str] = []
        self.total = total
        self.inputs = inputs or {}
        #: The step being written, for progress reports from inside a step.
        self.step = 0

    def progress(self, message: str) -> None:
        """Report progress inside the current step (and stop here if the user cancelled)."""
        self.reporter.update(STAGE, self.step, self.total, message)

    def wants(self, *formats: str) -> bool:
        return bool(self.formats.intersection(formats))

    def path(self, *parts: str) -> Path:
        path = self.root.joinpath(*parts)
        clash = _input_at(path, self.inputs)
        if clash:
            raise OutputError(
                f"writing {path} would overwrite {clash}, an input of this study; choose an output folder "
                "that holds none of the study's files (--out)"
            )
        try:
            path.parent.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise OutputError(describe_os_error(exc, path.parent)) from None
        return path

    def add(self, path: Path, notes: Iterable[str] = ()) -> None:
        self.files.append(path)
        self.notes.extend(notes)


# --------------------------------------------------------------------------- entry point


def write_run(out_dir: Path, run: RunOutputs, reporter: Reporter) -> list[Path]:
    """Write every output of ``run`` into ``out_dir``; return the files written, manifest last.

    Parameters
    ----------
    out_dir
        The output folder; created if missing. See the module docstring for
        its layout.
    run
        What the pipeline produced; stages that did not run (``None``) are
        skipped, and what exists is written.
    reporter
        Progress and cancellation. A cancelled export leaves every file either
        old or new, and no new manifest.

    Raises
    ------
    OutputError
        The folder is a file, cannot be written, the disk filled up, or a
        requested dense CSV would be too large. Temporary files are removed.
    """
    begin = time.perf_counter()
    _check_dense_sizes(run)
    out_dir = prepare_folder(Path(out_dir))
    previous = _previous_files(out_dir)
    answers = _answers_for_export(run)
    table_notes = getattr(run.compared, "table_notes", None) if run.compared is not None else None
    steps: list[tuple[str, Callable[[_Sink], None]]] = [
        ("the ledger", lambda sink: _write_ledger(sink, run)),
        ("the corpus", lambda sink: _write_corpus(sink, answers)),
        ("respondents", lambda sink: _write_respondents(sink, run, answers)),
        ("matrices", lambda sink: _write_matrices(sink, run)),
        ("term tables", lambda sink: _write_table_group(sink, "terms", _term_tables(run))),
        ("keyword tables", lambda sink: _write_table_group(sink, "keywords", _keyword_tables(run))),
        ("compare tables", lambda sink: _write_table_group(sink, "compare", _compare_tables(run), dict(table_notes or {}))),
        ("charts", lambda sink: _write_charts(sink, run)),
    ]
    inputs = study_inputs(run.study)
    sink = _Sink(out_dir, run.study.export.formats, reporter, total=len(steps) + 1, inputs=inputs)
    try:
        # Folders are synced once each before the manifest is written (see atomic.py).
        with deferred_dir_sync():
            for number, (label, write) in enumerate(steps):
                sink.step = number
                reporter.update(STAGE, number, sink.total, f"writing {label}")
                write(sink)
        reporter.update(STAGE, len(steps), sink.total, "writing the manifest")
        written = {p.resolve().relative_to(out_dir.resolve()).as_posix() for p in sink.files}
        removed = _remove_stale(out_dir, previous - written - {MANIFEST_NAME}, inputs)
        content = run_content(run, sink.notes, removed, time.perf_counter() - begin)
        manifest = write_manifest(out_dir, content, sink.files)
    except OSError as exc:
        where = Path(exc.filename) if getattr(exc, "filename", None) else out_dir
        raise OutputError(describe_os_error(exc, where)) from None
    reporter.update(STAGE, sink.total, sink.total, f"wrote {len(sink.files) + 1} files")
    return [*sink.files, manifest]


def _check_dense_sizes(run: RunOutputs) -> None:
    settings = run.study.export
    if not settings.dense_csv or run.weighed is None:
        return
    for name, matrix in _weighted_matrices(run.weighed).items():
        check_dense(name, matrix.shape, settings.dense_limit)


def _remove_stale(out_dir: Path, stale: set[str], inputs: dict[Path, str] | None = None) -> list[str]:
    removed = []
    for relative in sorted(stale):
        path = out_dir / relative
        if path.is_file() and not _input_at(path, inputs or {}):  # an old manifest may list a file now used as input
            path.unlink()
            removed.append(relative)
            parent = path.parent
            while parent != out_dir and parent.is_dir() and not any(parent.iterdir()):
                parent.rmdir()
                parent = parent.parent
    return removed


# --------------------------------------------------------------------------- ledger and corpus


def _write_ledger(sink: _Sink, run: RunOutputs) -> None:
    frame = run.ledger.frame()
    if sink.wants("csv"):
        sink.add(write_csv(sink.path("ledger.csv"), frame))
    if sink.wants("parquet"):
        sink.add(_write_parquet(sink.path("ledger.parquet"), frame, sink.notes))


def _matrix_rows(run: RunOutputs) -> set[str] | None:
    weighed = run.weighed
    if weighed is None:
        return None
    rows: set[str] = set()
    for counts in (getattr(weighed, "counts", None) or {}).values():
        rows.update(str(r) for r in counts.row_ids)
    return rows


def _answers_for_export(run: RunOutputs) -> pd.DataFrame | None:
    try:
        answers = run.answers
    except ValueError:
        answers = run.corpus.answers if run.corpus is not None else None
    if answers is None:
        return None
    answers = answers.copy()
    rows = _matrix_rows(run)
    if rows is not None and C.ANSWER_ID in answers:
        answers[IN_MATRIX] = answers[C.ANSWER_ID].astype(str).isin(rows)
    first = [c for c in ANSWER_COLUMNS if c in answers.columns]
    if IN_MATRIX in answers.columns:
        first.append(IN_MATRIX)
    return answers[first + [c for c in answers.columns if c not in first]]


def _masks_as_records(value: Any) -> Any:
    if isinstance(value, (list, tuple, np.ndarray)):
        out = []
        for item in value:
            if isinstance(item, (list, tuple)) and len(item) == 3:
                out.append({"type": str(item[0]), "start": int(item[1]), "end": int(item[2])})
            elif isinstance(item, dict):
                out.append(item)
        return out
    return value


def _write_corpus(sink: _Sink, answers: pd.DataFrame | None) -> None:
    if answers is None:
        return
    if sink.wants("parquet"):
        frame = answers.copy()
        if C.MASKS in frame:
            frame[C.MASKS] = frame[C.MASKS].map(_masks_as_records)
        sink.add(_write_parquet(sink.path("corpus", "answers.parquet"), frame, sink.notes))
    if sink.wants("csv"):
        sink.add(write_csv(sink.path("corpus", "answers.csv"), answers))


def _write_parquet(path: Path, frame: pd.DataFrame, notes: list[str]) -> Path:
    """Parquet with exact text; a column pyarrow cannot type is stored as text, with a note."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    frame = frame.reset_index(drop=True)
    frame.columns = [str(c) for c in frame.columns]
    arrays = {}
    for column in frame.columns:
        try:
            arrays[column] = pa.array(frame[column], from_pandas=True)
        except (pa.ArrowInvalid, pa.ArrowTypeError, pa.ArrowNotImplementedError):
            arrays[column] = pa.array(frame[column].map(_as_text), type=pa.string(), from_pandas=True)
            notes.append(f"{path.name}: column '{column}' holds mixed values and was stored as text (JSON for lists)")
    table = pa.table(arrays) if arrays else pa.table({})
    with atomic_path(path) as tmp:
        pq.write_table(table, str(tmp), compression="zstd")
    return path


def _as_text(value: Any) -> str | None:
    import json

    if value is None or (isinstance(value, float) and np.isnan(value)):
        return None
    if isinstance(value, str):
        return value
    return json.dumps(to_jsonable(value), ensure_ascii=False)


# --------------------------------------------------------------------------- respondents (Stata)

def respondent_table(run: RunOutputs, answers: pd.DataFrame | None) -> pd.DataFrame | None:
    """One row per respondent: answer counts, 0/1 per flag code, 0/1 per glossary concept.

    ``flag_<code>`` is 1 when any of the respondent's answers carries that flag.
    ``c_<concept>`` is 1 when any of the respondent's answers that entered a
    matrix (all answers when weighting did not run) contains a term the
    glossary maps to that concept in the answer's language.
    """
    base = run.corpus.respondents if run.corpus is not None else None
    if base is None and answers is None:
        return None
    if base is not None and C.RESPONDENT_ID in base:
        keep = [c for c in (C.RESPONDENT_ID, C.SOURCE, C.ROW) if c in base.columns]
        table = base[keep].copy()
    else:
        table = pd.DataFrame({C.RESPONDENT_ID: pd.unique(answers[C.RESPONDENT_ID])})
    table[C.RESPONDENT_ID] = table[C.RESPONDENT_ID].astype(str)
    if answers is None or C.RESPONDENT_ID not in answers:
        return table.reset_index(drop=True)
    ids = answers[C.RESPONDENT_ID].astype(str)
    # One code per distinct id over the table and the answers, so every per-respondent figure is a
    # bincount or a boolean array indexed by code (a row repeating an id gets that id's figures).
    codes, uniques = pd.factorize(pd.concat([table[C.RESPONDENT_ID], ids], ignore_index=True))
    row_code, answer_code = codes[: len(table)], codes[len(table) :]
    n_ids = len(uniques)
    table["n_answers"] = np.bincount(answer_code, minlength=n_ids)[row_code].astype(np.int32)
    if IN_MATRIX in answers:
        in_matrix = answers[IN_MATRIX].to_numpy(dtype=bool)
        table["n_in_matrix"] = np.bincount(answer_code[in_matrix], minlength=n_ids)[row_code].astype(np.int32)
    if C.LANGUAGE in answers:
        table["language"] = _main_language(answer_code, answers[C.LANGUAGE], n_ids)[row_code]
    if C.FLAGS in answers:
        flagged: dict[str, list[int]] = {}
        for code, flags in zip(answer_code.tolist(), answers[C.FLAGS], strict=True):
            for flag in _as_list(flags):
                flagged.setdefault(str(flag), []).append(code)
        for flag in sorted(flagged):
            table[f"flag_{flag}"] = _any_of(flagged[flag], n_ids)[row_code]
    mapping = getattr(run.glossary, "mapping", None) if run.glossary is not None else None
    if mapping and C.TERMS in answers and C.LANGUAGE in answers:
        use = answers[IN_MATRIX].to_numpy(dtype=bool) if IN_MATRIX in answers else np.ones(len(answers), bool)
        having: dict[str, list[int]] = {str(c): [] for c in sorted(set(mapping.values()), key=str)}
        for code, language, terms, ok in zip(answer_code.tolist(), answers[C.LANGUAGE], answers[C.TERMS], use, strict=True):
            if not ok:
                continue
            for term in _as_list(terms):
                concept = mapping.get((language, term))
                if concept is not None:
                    having[str(concept)].append(code)
        for concept, members in having.items():
            table[f"c_{concept}"] = _any_of(members, n_ids)[row_code]
    return table.reset_index(drop=True)


def _any_of(codes: list[int], size: int) -> np.ndarray:
    """0/1 per id code: 1 for the codes listed."""
    out = np.zeros(size, dtype=np.int8)
    out[np.asarray(codes, dtype=np.int64)] = 1
    return out


def _main_language(answer_code: np.ndarray, languages: pd.Series, size: int) -> np.ndarray:
    """Per id code, the language most of its answers carry (ties: the smallest code; none: "")."""
    values = languages.to_numpy(dtype=object)
    usable = np.fromiter((isinstance(v, str) and bool(v) for v in values), dtype=bool, count=len(values))
    counts = (
        pd.DataFrame({"code": answer_code[usable], "language": values[usable].astype(str)})
        .groupby(["code", "language"], sort=False)
        .size()
        .reset_index(name="n")
        .sort_values(["code", "n", "language"], ascending=[True, False, True], kind="stable")
        .drop_duplicates("code")
    )
    out = np.full(size, "", dtype=object)
    out[counts["code"].to_numpy()] = counts["language"].to_numpy(dtype=object)
    return out


def _as_list(value: Any) -> list[Any]:
    if isinstance(value, (list, tuple, np.ndarray)):
        return list(value)
    return []


def _write_respondents(sink: _Sink, run: RunOutputs, answers: pd.DataFrame | None) -> None:
    if not sink.wants("dta", "csv", "parquet"):
        return
    table = respondent_table(run, answers)
    if table is None:
        return
    if sink.wants("parquet"):
        sink.add(_write_parquet(sink.path("corpus", "respondents.parquet"), table, sink.notes))
    if sink.wants("csv"):
        sink.add(write_csv(sink.path("corpus", "respondents.csv"), table))
    if sink.wants("dta"):
        stamp = run.finished or run.started
        sink.add(write_stata(sink.path("corpus", "respondents.dta"), table, str(run.study.study.name), stamp))


# --------------------------------------------------------------------------- matrices


def _weighted_matrices(weighed: Any) -> dict[str, sp.csr_matrix]:
    out = dict(getattr(weighed, "weighted", None) or {})
    pooled = getattr(weighed, "pooled_weighted", None)
    if pooled is not None:
        out[POOLED] = pooled
    return out


def _matrix_sets(weighed: Any) -> list[tuple[str, Any, Any]]:
    """``(name, Counts or None, weighted CSR or None)`` per language, then pooled."""
    counts = dict(getattr(weighed, "counts", None) or {})
    weighted = dict(getattr(weighed, "weighted", None) or {})
    sets = [(lang, counts.get(lang), weighted.get(lang)) for lang in sorted(set(counts) | set(weighted))]
    pooled_counts = getattr(weighed, "pooled", None)
    pooled_weighted = getattr(weighed, "pooled_weighted", None)
    if pooled_counts is not None or pooled_weighted is not None:
        sets.append((POOLED, pooled_counts, pooled_weighted))
    return sets


def _mtx_comment(run: RunOutputs, name: str, values: str, stem: str) -> str:
    scheme = getattr(run.weighed, "scheme", None)
    described = scheme.describe() if hasattr(scheme, "describe") else (str(scheme) if scheme is not None else "")
    what = "term counts" if values == "counts" else f"weights ({described})" if described else "weights"
    return (
        f"termloom: matrix '{name}' of study '{run.study.study.name}': {what}\n"
        f"rows = answers in {stem}.rows.txt, columns = terms in {stem}.terms.txt (same order)"
    )


def _write_matrices(sink: _Sink, run: RunOutputs) -> None:
    weighed = run.weighed
    if weighed is None:
        return
    study = run.study
    used: set[str] = set()
    for name, counts, weighted in _matrix_sets(weighed):
        sink.reporter.check(STAGE)
        if counts is None:
            sink.notes.append(f"matrix '{name}': no term list or row ids were handed on; it was not written")
            continue
        if weighted is not None and weighted.shape != counts.matrix.shape:
            sink.notes.append(
                f"matrix '{name}': weights are {weighted.shape[0]}x{weighted.shape[1]} but counts "
                f"{counts.matrix.shape[0]}x{counts.matrix.shape[1]}; only counts were written"
            )
            weighted = None
        stem = safe_name(name, used)
        terms = [str(t) for t in counts.terms]
        rows = [str(r) for r in counts.row_ids]
        if sink.wants("mtx", "npz") or study.export.dense_csv:
            for kind, entries in (("terms", terms), ("rows", rows)):
                path, changed = write_lines(sink.path("matrices", f"{stem}.{kind}.txt"), entries)
                sink.add(path)
                if changed:
                    sink.notes.append(
                        f"{path.name}: {changed} entr(y/ies) contained line breaks, written with spaces; "
                        f"matrices/{stem}.parquet keeps the exact text"
                    )
        for kind, matrix in (("weights", weighted), ("counts", counts.matrix)):
            if matrix is None:
                continue
            if sink.wants("mtx"):
                comment = _mtx_comment(run, name, kind, stem)
                sink.add(write_mtx(sink.path("matrices", f"{stem}.{kind}.mtx"), matrix, comment))
            if sink.wants("npz"):
                sink.add(write_npz(sink.path("matrices", f"{stem}.{kind}.npz"), matrix))
        if sink.wants("parquet"):
            path = sink.path("matrices", f"{stem}.parquet")
            sink.add(write_long_parquet(path, weighted, counts.matrix, terms, rows))
        if study.export.dense_csv:
            dense = weighted if weighted is not None else counts.matrix
            path = sink.path("matrices", f"{stem}.dense.csv")
            sink.add(write_dense_csv(path, dense, terms, rows, study.export.dense_limit))


# --------------------------------------------------------------------------- tables


def _keyword_tables(run: RunOutputs) -> dict[str, pd.DataFrame]:
    keywords = getattr(run.weighed, "keywords", None) if run.weighed is not None else None
    return {str(k): v for k, v in (keywords or {}).items() if isinstance(v, pd.DataFrame)}


def _compare_tables(run: RunOutputs) -> dict[str, pd.DataFrame]:
    tables = getattr(run.compared, "tables", None) if run.compared is not None else None
    return {str(k): v for k, v in (tables or {}).items() if isinstance(v, pd.DataFrame)}


def _term_tables(run: RunOutputs) -> dict[str, pd.DataFrame]:
    """Each language's vocabulary and removed stop words, from the terms stage."""
    terms = run.terms
    if terms is None:
        return {}
    out: dict[str, pd.DataFrame] = {}
    for attribute in ("vocabularies", "stop_hits"):
        label = "vocabulary" if attribute == "vocabularies" else "stop_words_removed"
        for language, frame in sorted((getattr(terms, attribute, None) or {}).items()):
            if isinstance(frame, pd.DataFrame):
                out[f"{label}__{language}"] = frame
    return out


#: Rows of a term-by-term table shown in a workbook sheet (see the module docstring).
XLSX_TERM_ROWS = 1_000
_TERM_TABLES = ("keyness__", "vocabulary__", "stop_words_removed__")

_DESCRIPTIONS = {
    "keywords": "top terms of the language (or all languages pooled), one block of rows per ranking "
    "(mean_weight: respondent-weighted mean TF-IDF; doc_share: weighted share of answers containing the term)",
    "vocabulary": "every term of the language after stop-word removal: total count (tf), answers holding it (df)",
    "stop_words_removed": "stop words removed from the language's answers, with their counts",
}


def _write_table_group(
    sink: _Sink, folder: str, tables: dict[str, pd.DataFrame], descriptions: dict[str, str] | None = None
) -> None:
    if not tables:
        return
    used: set[str] = set()
    stems: dict[str, str] = {}
    # Tables written to CSV and XLSX are made spreadsheet-safe once (small ones: a big one is made
    # safe in slices by write_csv, so its safe copy never exists whole).
    share = sink.wants("csv") and sink.wants("xlsx")
    safe: dict[str, pd.DataFrame] = {}
    for number, (name, frame) in enumerate(tables.items()):
        sink.progress(f"{folder} tables: {number + 1:,} of {len(tables):,}")
        stem = safe_name(name, used)
        # Where the whole table is, for a workbook sheet that shows only its top.
        stems[name] = f"{folder}/{stem}.csv" if sink.wants("csv") else f"{folder}/{stem}.json" if sink.wants("json") else ""
        if share and len(frame) <= CSV_SLICE_ROWS:
            safe[name] = spreadsheet_frame(frame)
        if sink.wants("csv"):
            if name in safe:
                sink.add(write_csv(sink.path(folder, f"{stem}.csv"), safe[name], prepared=True))
            else:
                sink.add(write_csv(sink.path(folder, f"{stem}.csv"), frame))
        if sink.wants("json"):
            sink.add(write_json_table(sink.path(folder, f"{stem}.json"), frame))
    if sink.wants("xlsx"):
        if descriptions is None:
            descriptions = {name: _DESCRIPTIONS.get(name.split("__")[0], _DESCRIPTIONS.get(folder, "")) for name in tables}
        shown, descriptions = _workbook_tables(tables, descriptions, stems)
        # A sheet shows a table's first rows: the same rows of its safe copy.
        shown = {name: safe[name].head(len(frame)) if name in safe else frame for name, frame in shown.items()}
        path, notes = write_xlsx(
            sink.path(folder, f"{folder}.xlsx"), shown, descriptions=descriptions, progress=sink.progress, prepared=set(safe)
        )
        sink.add(path, notes)


def _workbook_tables(
    tables: dict[str, pd.DataFrame], descriptions: dict[str, str], full_copies: dict[str, str]
) -> tuple[dict[str, pd.DataFrame], dict[str, str]]:
    """Term-by-term tables cut to their first XLSX_TERM_ROWS rows (and every significant row), described as such.

    A table is cut only when its CSV or JSON file holds every row.
    """
    shown: dict[str, pd.DataFrame] = {}
    described = dict(descriptions)
    for name, frame in tables.items():
        keep = len(frame)
        if name.startswith(_TERM_TABLES) and len(frame) > XLSX_TERM_ROWS and full_copies.get(name):
            significant = int(frame["significant"].astype(bool).sum()) if "significant" in frame.columns else 0
            keep = max(XLSX_TERM_ROWS, significant)
        if keep < len(frame):
            shown[name] = frame.head(keep)
            described[name] = (
                f"{descriptions.get(name, '')} — this sheet holds the first {keep:,} of {len(frame):,} rows "
                f"(most telling first); {full_copies[name]} holds them all"
            ).lstrip(" —")
        else:
            shown[name] = frame
    return shown, described


# --------------------------------------------------------------------------- charts

#: At most this many per-group charts are drawn (the group_keywords tables hold every group).
MAX_GROUP_CHARTS = 40


def _group_charts(tables: dict[str, pd.DataFrame], top_k: int, notes: list[str]) -> list[tuple[str, Any]]:
    """One bar chart per group of every grouping, from the ``group_keywords__*`` tables.

    A group appears in one table per unit (each language, and the pooled
    corpus when compare writes it). The chart uses the pooled table when there
    is one (glossary pooling: concepts meet across languages), otherwise the
    language in which the group has the most respondents (``n_group``; ties
    by language code). The other lists stay in the tables. Each chart shows
    the table's first ranking.
    """
    best: dict[tuple[str, str], tuple[tuple[int, int, str], pd.DataFrame, str]] = {}
    for name, frame in tables.items():
        if not name.startswith("group_keywords") or "group" not in frame.columns or not len(frame):
            continue
        unit = str(frame["unit"].iloc[0]) if "unit" in frame.columns else POOLED
        grouping = str(frame["grouping"].iloc[0]) if "grouping" in frame.columns else name
        for group, part in frame.groupby(frame["group"].astype(str), sort=True):
            size = int(part["n_group"].max()) if "n_group" in part.columns else 0
            # Pooled first, then more respondents, then the smaller code; negate for max().
            rank = (int(unit == POOLED), size, "".join(chr(0x10FFFF - ord(c)) for c in unit))
            key = (grouping, group)
            if key not in best or rank > best[key][0]:
                best[key] = (rank, part, unit)
    found = []
    for (grouping, group), (rank, part, unit) in sorted(best.items()):
        top = top_terms(part, top_k)
        if top is None or not top[0]:
            continue
        where = "all languages" if unit == POOLED else unit
        size = f", {rank[1]:,} respondents" if rank[1] else ""
        found.append((f"keywords-{grouping}-{group}", _bar(top, f"Top keywords — {grouping} = {group} ({where}{size})")))
    if len(found) > MAX_GROUP_CHARTS:
        notes.append(
            f"{len(found)} groups have keywords; charts were drawn for the first {MAX_GROUP_CHARTS} "
            "(the group_keywords tables hold every group)"
        )
        found = found[:MAX_GROUP_CHARTS]
    return found


def _write_charts(sink: _Sink, run: RunOutputs) -> None:
    kinds = [k for k in ("png", "svg") if sink.wants(k)]
    if not kinds:
        return
    top_k = run.study.compare.top_k
    used: set[str] = set()
    charts: list[tuple[str, Callable[[], Any]]] = []
    for name, frame in _keyword_tables(run).items():
        top = top_terms(frame, top_k)
        if top is not None:
            charts.append((f"keywords-{name}", _bar(top, f"Top keywords — {name}")))
    compare_tables = _compare_tables(run)
    charts.extend(_group_charts(compare_tables, top_k, sink.notes))
    concepts = concept_matrix(compare_tables)
    if concepts is not None:
        xlabel, wide = concepts
        charts.append(("concepts", lambda: concept_chart(wide.head(top_k), "Concepts across languages", xlabel)))
    for number, (stem, make) in enumerate(charts):
        sink.progress(f"charts: {number + 1:,} of {len(charts):,}")
        figure = make()
        name = safe_name(stem, used)
        paths = [sink.path("charts", f"{name}.{kind}") for kind in kinds]
        notes = save_figure_as(figure, paths)
        for path in paths:
            sink.add(path)
        sink.notes.extend(notes)


def _bar(top: tuple[list[str], list[float], str], title: str) -> Callable[[], Any]:
    terms, values, column = top
    return lambda: keyword_chart(terms, values, title, column)
