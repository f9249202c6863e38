"""Sparse matrices on disk: Matrix Market, SciPy ``.npz``, long-form Parquet, dense CSV.

One matrix *set* is one language (or the pooled corpus): a weighted matrix
and/or a count matrix with the same rows (answers) and columns (terms). On disk,
in one folder, with ``<stem>`` the language code or ``pooled``::

    <stem>.terms.txt        one term per line, column j of the matrices is line j+1
    <stem>.rows.txt         one answer id per line, row i is line i+1
    <stem>.weights.mtx      Matrix Market, coordinate real general, 1-based
    <stem>.counts.mtx
    <stem>.weights.npz      scipy.sparse.save_npz (CSR)
    <stem>.counts.npz
    <stem>.parquet          long form: row_id, term, weight, count (one row per non-zero)
    <stem>.dense.csv        only on request and under export.dense_limit cells

Matrix Market (NIST, math.nist.gov/MatrixMarket/formats.html): the first line
is always ``%%MatrixMarket matrix coordinate real general``; ``scipy.io.mmwrite``
is called with ``symmetry='general'`` because it otherwise detects a symmetric
matrix and writes only one triangle, which some readers expand and some do not.
Integer counts are written with ``field='real'`` so every file has the same header.

Term and row lists are UTF-8 text, one entry per line (``\\n``). An entry
holding a line break would shift every line after it, so line breaks inside
an entry are replaced by a space and a note says so; the Parquet long form
keeps the exact ids.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from pathlib import Path
from typing import Literal

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
import scipy.io
import scipy.sparse as sp

from workbench.core.atomic import atomic_open, atomic_path
from workbench.core.errors import InputError, OutputError
from workbench.core.tables import neutralise

MM_HEADER = "%%MatrixMarket matrix coordinate real general"

Values = Literal["weights", "counts"]


def _one_line(entries: Sequence[str]) -> tuple[list[str], int]:
    fixed, changed = [], 0
    for entry in entries:
        text = str(entry)
        if "\n" in text or "\r" in text:
            text = text.replace("\r\n", " ").replace("\r", " ").replace("\n", " ")
            changed += 1
        fixed.append(text)
    return fixed, changed


def write_lines(path: Path, entries: Sequence[str]) -> tuple[Path, int]:
    """Write one entry per line (UTF-8, ``\\n``); returns the path and how many entries had line breaks."""
    fixed, changed = _one_line(entries)
    with atomic_open(path, "w", encoding="utf-8", newline="\n") as handle:
        for entry in fixed:
            handle.write(entry)
            handle.write("\n")
    return path, changed


def read_lines(path: Path) -> list[str]:
    """Read a list written by :func:`write_lines` (empty entries kept)."""
    text = path.read_text(encoding="utf-8")
    if not text:
        return []
    return text[:-1].split("\n") if text.endswith("\n") else text.split("\n")


def _canonical(matrix: sp.spmatrix | sp.sparray) -> sp.csr_matrix:
    """CSR with summed duplicates and no stored zeros (a copy; the caller's matrix is untouched)."""
    out = sp.csr_matrix(matrix, dtype=np.float64, copy=True)
    out.sum_duplicates()
    out.eliminate_zeros()
    return out


def write_mtx(path: Path, matrix: sp.spmatrix | sp.sparray, comment: str = "") -> Path:
    """Write ``matrix`` in Matrix Market coordinate format, always ``real general``.

    Values are written in the shortest form that reads back as the same
    float64 (scipy's default), so a round trip is exact.
    """
    canonical = _canonical(matrix)
    text = "\n".join(f" {line}" for line in comment.splitlines()) if comment else ""
    with atomic_path(path) as tmp:
        scipy.io.mmwrite(str(tmp), canonical, comment=text, field="real", symmetry="general")
    return path


def write_npz(path: Path, matrix: sp.spmatrix | sp.sparray) -> Path:
    """Write ``matrix`` as CSR with ``scipy.sparse.save_npz`` (compressed)."""
    with atomic_path(path) as tmp:
        sp.save_npz(str(tmp), sp.csr_matrix(matrix), compressed=True)
    return path


def long_form(
    weights: sp.spmatrix | sp.sparray | None,
    counts: sp.spmatrix | sp.sparray | None,
    terms: Sequence[str],
    row_ids: Sequence[str],
) -> pa.Table:
    """One row per cell that is non-zero in either matrix: ``row_id, term, weight, count``.

    Rows are ordered by matrix row, then column. A cell present in only one
    matrix gets 0 in the other (a count with weight 0 happens when the
    weighting gives a term no weight, e.g. idf = 0).
    """
    shape = (len(row_ids), len(terms))
    present = [m for m in (weights, counts) if m is not None]
    if not present:
        raise ValueError("long_form needs a weight or a count matrix")
    for matrix in present:
        if matrix.shape != shape:
            raise ValueError(f"matrix shape {matrix.shape} does not match {shape[0]} row ids x {shape[1]} terms")
    coo = [_canonical(m).tocoo() for m in present]
    n_cols = np.int64(max(shape[1], 1))
    keys = [c.row.astype(np.int64) * n_cols + c.col.astype(np.int64) for c in coo]
    # Canonical CSR gives strictly increasing keys; when both matrices hold the same cells (the
    # usual case) those keys are the union and each matrix's values are already in its order.
    increasing = all(bool(np.all(k[1:] > k[:-1])) for k in keys)
    same = increasing and all(np.array_equal(k, keys[0]) for k in keys[1:])
    union = keys[0] if same else np.unique(np.concatenate(keys)) if len(keys) > 1 else np.sort(keys[0])

    def values_at(position: int) -> np.ndarray:
        if same:
            return coo[position].data.astype(np.float64, copy=False)
        out = np.zeros(len(union), dtype=np.float64)
        order = np.argsort(keys[position], kind="stable")
        out[np.searchsorted(union, keys[position][order])] = coo[position].data[order]
        return out

    rows = union // n_cols
    cols = union % n_cols
    columns: dict[str, pa.Array] = {
        "row_id": pa.array([str(r) for r in row_ids], type=pa.string()).take(pa.array(rows)),
        "term": pa.array([str(t) for t in terms], type=pa.string()).take(pa.array(cols)),
    }
    position = 0
    if weights is not None:
        columns["weight"] = pa.array(values_at(position))
        position += 1
    else:
        columns["weight"] = pa.nulls(len(union), type=pa.float64())
    if counts is not None:
        values = values_at(position)
        integral = bool(np.all(np.isfinite(values)) and np.all(values == np.round(values)))
        columns["count"] = pa.array(values.astype(np.int64) if integral else values)
    else:
        columns["count"] = pa.nulls(len(union), type=pa.int64())
    return pa.table(columns)


def write_long_parquet(
    path: Path,
    weights: sp.spmatrix | sp.sparray | None,
    counts: sp.spmatrix | sp.sparray | None,
    terms: Sequence[str],
    row_ids: Sequence[str],
) -> Path:
    """Write :func:`long_form` as Parquet (exact text, float64 weights)."""
    table = long_form(weights, counts, terms, row_ids)
    with atomic_path(path) as tmp:
        pq.write_table(table, str(tmp), compression="zstd")
    return path


def check_dense(name: str, shape: tuple[int, int], limit: int) -> None:
    """Raise :class:`OutputError` when a dense CSV of ``shape`` would exceed ``limit`` cells."""
    cells = shape[0] * shape[1]
    if cells > limit:
        raise OutputError(
            f"dense CSV of matrix '{name}' would hold {shape[0]:,} x {shape[1]:,} = {cells:,} cells, above "
            f"export.dense_limit = {limit:,}; raise the limit, set export.dense_csv = false, "
            "or use the .mtx/.npz/.parquet outputs"
        )


def write_dense_csv(
    path: Path,
    matrix: sp.spmatrix | sp.sparray,
    terms: Sequence[str],
    row_ids: Sequence[str],
    limit: int,
    block_rows: int = 2_000,
) -> Path:
    """Write a dense CSV (``row_id`` then one column per term) for spreadsheet users.

    Refuses above ``limit`` cells; densifies ``block_rows`` rows at a time so
    memory stays bounded. Text (ids, terms) is neutralised as in every CSV.
    """
    name = path.name.split(".")[0]
    check_dense(name, matrix.shape, limit)
    csr = sp.csr_matrix(matrix)
    with atomic_open(path, "w", encoding="utf-8-sig", newline="") as handle:
        # Quote every text cell (OWASP "CSV Injection"); numbers stay bare.
        handle.write(",".join(_quoted(neutralise(str(t))) for t in ["row_id", *terms]) + "\r\n")
        for start in range(0, csr.shape[0], block_rows):
            block = csr[start : start + block_rows].toarray()
            for offset, values in enumerate(block):
                cells = [_quoted(neutralise(str(row_ids[start + offset])))]
                cells.extend(_number(v) for v in values)
                handle.write(",".join(cells) + "\r\n")
    return path


def _quoted(text: str) -> str:
    return '"' + text.replace('"', '""') + '"'


def _number(value: float) -> str:
    if value == 0:
        return "0"
    if math.isfinite(value) and value == int(value) and abs(value) < 2**53:
        return str(int(value))
    return repr(float(value))


def load_matrix(
    out_dir: Path | str, language: str, values: Values = "weights"
) -> tuple[sp.csr_matrix, list[str], list[str]]:
    """Load one matrix of a run folder for modelling: ``(matrix, terms, row_ids)``.

    Parameters
    ----------
    out_dir
        The run's output folder (the one holding ``manifest.json``).
    language
        A language code, or ``"pooled"``.
    values
        ``"weights"`` (the TF-IDF matrix as weighted by the study) or ``"counts"``
        (raw term counts, e.g. for topic models).

    Returns
    -------
    The CSR matrix (rows = answers, columns = terms), the term of each column,
    and the answer id of each row. Reads ``.npz`` when present, else ``.mtx``.

    Examples
    --------
    >>> X, terms, rows = load_matrix("runs/wave1", "de")          # doctest: +SKIP
    >>> from sklearn.decomposition import TruncatedSVD            # doctest: +SKIP
    >>> TruncatedSVD(50).fit_transform(X)                         # doctest: +SKIP
    """
    folder = Path(out_dir) / "matrices"
    if values not in ("weights", "counts"):
        raise InputError(f"values must be 'weights' or 'counts', not {values!r}")
    terms_path = folder / f"{language}.terms.txt"
    rows_path = folder / f"{language}.rows.txt"
    npz = folder / f"{language}.{values}.npz"
    mtx = folder / f"{language}.{values}.mtx"
    if not terms_path.is_file() or not rows_path.is_file() or not (npz.is_file() or mtx.is_file()):
        available = sorted({p.name.split(".")[0] for p in folder.glob("*.terms.txt")}) if folder.is_dir() else []
        raise InputError(
            f"no {values} matrix for '{language}' in {folder}; matrices there: "
            f"{', '.join(available) or 'none'} (was 'npz' or 'mtx' in export.formats?)"
        )
    matrix = sp.load_npz(npz) if npz.is_file() else scipy.io.mmread(mtx)
    matrix = sp.csr_matrix(matrix)
    terms = read_lines(terms_path)
    rows = read_lines(rows_path)
    if matrix.shape != (len(rows), len(terms)):
        raise InputError(
            f"{language} matrix in {folder} is {matrix.shape[0]}x{matrix.shape[1]} but lists "
            f"{len(rows)} rows and {len(terms)} terms; the folder was changed after the run (try 'termloom verify')"
        )
    return matrix, terms, rows
