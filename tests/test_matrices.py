"""Matrix files read back by reference readers: scipy.io.mmread/mminfo, scipy.sparse.load_npz,
pandas.read_parquet, and (when installed) R's Matrix::readMM."""

from __future__ import annotations

import shutil
import subprocess
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import scipy.io
import scipy.sparse as sp

from workbench.core.errors import InputError, OutputError
from workbench.core.matrices import (
    MM_HEADER,
    check_dense,
    long_form,
    read_lines,
    write_dense_csv,
    write_lines,
    write_long_parquet,
    write_mtx,
    write_npz,
)

# The coordinate example on the NIST Matrix Market format page
# (math.nist.gov/MatrixMarket/formats.html) [recalled from memory; matches a
# third-party copy of the page]: a 5x5 real general matrix with 8 entries.
NIST_EXAMPLE = """%%MatrixMarket matrix coordinate real general
%=================================================================================
%
% This ASCII file represents a sparse MxN matrix with L
% nonzeros in the following Matrix Market format:
%
%=================================================================================
5 5 8
1 1 1.000e+00
2 2 1.050e+01
3 3 1.500e-02
1 4 6.000e+00
4 2 2.505e+02
4 4 -2.800e+02
4 5 3.332e+01
5 5 1.200e+01
"""
NIST_DENSE = np.array(
    [
        [1.0, 0, 0, 6.0, 0],
        [0, 10.5, 0, 0, 0],
        [0, 0, 0.015, 0, 0],
        [0, 250.5, 0, -280.0, 33.32],
        [0, 0, 0, 0, 12.0],
    ]
)


def _parse_coordinate(text: str) -> tuple[str, tuple[int, int, int], np.ndarray]:
    """An independent reader of the coordinate format as the NIST page describes it: header line,
    '%' comments, size line 'M N L', then 'I J value' with 1-based indices."""
    lines = text.splitlines()
    header = lines[0]
    body = [line for line in lines[1:] if line and not line.startswith("%")]
    m, n, nnz = (int(x) for x in body[0].split())
    dense = np.zeros((m, n))
    for line in body[1:]:
        i, j, value = line.split()
        dense[int(i) - 1, int(j) - 1] += float(value)
    assert len(body) - 1 == nnz
    return header, (m, n, nnz), dense


def test_nist_example_reads_as_published(tmp_path: Path) -> None:
    """NIST Matrix Market format page, coordinate example [recalled from memory]; read by scipy.io.mmread."""
    path = tmp_path / "nist.mtx"
    path.write_text(NIST_EXAMPLE, encoding="ascii")
    assert scipy.io.mminfo(str(path)) == (5, 5, 8, "coordinate", "real", "general")
    np.testing.assert_array_equal(sp.csr_matrix(scipy.io.mmread(str(path))).toarray(), NIST_DENSE)


def test_nist_example_written_by_us_reads_back_identically(tmp_path: Path) -> None:
    """Our writer on the NIST example: same header, size line and entries (scipy.io.mminfo/mmread and
    an independent parser of the format described on the NIST page)."""
    path = write_mtx(tmp_path / "ours.mtx", sp.csr_matrix(NIST_DENSE), comment="two\nlines")
    text = path.read_text(encoding="utf-8")
    header, size, dense = _parse_coordinate(text)
    assert header == MM_HEADER == "%%MatrixMarket matrix coordinate real general"
    assert size == (5, 5, 8)
    np.testing.assert_array_equal(dense, NIST_DENSE)
    assert scipy.io.mminfo(str(path)) == (5, 5, 8, "coordinate", "real", "general")
    np.testing.assert_array_equal(sp.csr_matrix(scipy.io.mmread(str(path))).toarray(), NIST_DENSE)
    assert "% two\n% lines\n" in text


def test_symmetric_input_is_written_in_full(tmp_path: Path) -> None:
    """scipy.io.mmwrite detects symmetric matrices and writes one triangle unless symmetry='general'
    (SciPy docs, scipy.io.mmwrite); we must always write 'general' with every entry."""
    symmetric = sp.csr_matrix(np.array([[2.0, 1.0, 0.0], [1.0, 0.0, 3.0], [0.0, 3.0, 5.0]]))
    path = write_mtx(tmp_path / "sym.mtx", symmetric)
    text = path.read_text(encoding="utf-8")
    assert text.splitlines()[0] == "%%MatrixMarket matrix coordinate real general"
    _header, size, dense = _parse_coordinate(text)
    assert size == (3, 3, 6)
    np.testing.assert_array_equal(dense, symmetric.toarray())


def test_integer_counts_are_written_as_real(tmp_path: Path) -> None:
    counts = sp.csr_matrix(np.array([[3, 0], [0, 1]], dtype=np.int64))
    path = write_mtx(tmp_path / "c.mtx", counts)
    assert path.read_text(encoding="utf-8").splitlines()[0] == MM_HEADER
    assert scipy.io.mminfo(str(path))[4] == "real"


def test_values_round_trip_exactly_through_mtx_and_npz(tmp_path: Path) -> None:
    """Random TF-IDF-like values through scipy.io.mmread and scipy.sparse.load_npz equal the
    in-memory matrix within 1e-12 (in fact bit for bit)."""
    rng = np.random.default_rng(7)
    matrix = sp.random(40, 25, density=0.2, format="csr", random_state=rng) / 3.0
    mtx = write_mtx(tmp_path / "w.mtx", matrix)
    npz = write_npz(tmp_path / "w.npz", matrix)
    for back in (sp.csr_matrix(scipy.io.mmread(str(mtx))), sp.load_npz(npz)):
        assert back.shape == matrix.shape
        assert abs(back - matrix).max() <= 1e-12
    assert (sp.csr_matrix(scipy.io.mmread(str(mtx))) != matrix).nnz == 0


def test_empty_and_zero_row_matrices(tmp_path: Path) -> None:
    """Edge cases: a language whose terms were all filtered (no columns) and a matrix with no entries."""
    for shape in ((0, 3), (3, 0), (2, 2)):
        path = write_mtx(tmp_path / f"e{shape[0]}{shape[1]}.mtx", sp.csr_matrix(shape))
        assert scipy.io.mminfo(str(path))[:3] == (*shape, 0)


def test_companion_lists_align_and_keep_empty_entries(tmp_path: Path) -> None:
    entries = ["café", "", "ελληνικά", "x y", "line\nbreak"]
    path, changed = write_lines(tmp_path / "t.txt", entries)
    assert changed == 1
    assert read_lines(path) == ["café", "", "ελληνικά", "x y", "line break"]
    path, changed = write_lines(tmp_path / "empty.txt", [])
    assert read_lines(path) == [] and changed == 0


def test_long_form_parquet_matches_the_matrices(tmp_path: Path) -> None:
    """pandas.read_parquet of the long form gives back every non-zero weight and count at its (row, term)."""
    counts = sp.csr_matrix(np.array([[2, 0, 1], [0, 0, 0], [1, 3, 0]], dtype=np.int64))
    weights = sp.csr_matrix(np.array([[0.8, 0, 0.0], [0, 0, 0], [0.1, 0.9, 0]]))  # idf 0 for the last term
    terms, rows = ["=sum", "straße", "all"], ["r1|q", "r2|q", "r3|q"]
    path = write_long_parquet(tmp_path / "l.parquet", weights, counts, terms, rows)
    frame = pd.read_parquet(path)
    assert frame.columns.tolist() == ["row_id", "term", "weight", "count"]
    assert frame["count"].dtype == np.int64
    rebuilt_w = np.zeros((3, 3))
    rebuilt_c = np.zeros((3, 3))
    for row in frame.itertuples(index=False):
        rebuilt_w[rows.index(row.row_id), terms.index(row.term)] = row.weight
        rebuilt_c[rows.index(row.row_id), terms.index(row.term)] = row.count
    np.testing.assert_allclose(rebuilt_w, weights.toarray(), atol=1e-12)
    np.testing.assert_array_equal(rebuilt_c, counts.toarray())
    assert "=sum" in frame["term"].tolist()  # exact text, no neutralisation
    assert len(frame) == 4  # the union of non-zeros: the count-only cell is kept with weight 0


def test_long_form_checks_alignment() -> None:
    with pytest.raises(ValueError, match="does not match"):
        long_form(sp.csr_matrix((2, 2)), None, ["a"], ["r1", "r2"])


def test_dense_csv_refuses_above_the_limit_stating_the_size() -> None:
    with pytest.raises(OutputError) as caught:
        check_dense("de", (1200, 3400), 2_000_000)
    message = str(caught.value)
    assert "1,200 x 3,400 = 4,080,000 cells" in message and "export.dense_limit = 2,000,000" in message


def test_dense_csv_content(tmp_path: Path) -> None:
    matrix = sp.csr_matrix(np.array([[0.5, 0.0], [0.0, -1.25], [3.0, 0.0]]))
    path = write_dense_csv(tmp_path / "d.dense.csv", matrix, ["+term", "b"], ["r1", "-r2", "r3"], limit=6, block_rows=2)
    frame = pd.read_csv(path, encoding="utf-8-sig")
    assert frame.columns.tolist() == ["row_id", "'+term", "b"]
    assert frame["row_id"].tolist() == ["r1", "'-r2", "r3"]
    np.testing.assert_array_equal(frame[["'+term", "b"]].to_numpy(), matrix.toarray())
    with pytest.raises(OutputError):
        write_dense_csv(tmp_path / "big.dense.csv", matrix, ["a", "b"], ["1", "2", "3"], limit=5)
    assert not (tmp_path / "big.dense.csv").exists()


def test_load_matrix_reports_a_missing_language(tmp_path: Path) -> None:
    from workbench.core.matrices import load_matrix

    (tmp_path / "matrices").mkdir()
    with pytest.raises(InputError, match="no weights matrix for 'xx'"):
        load_matrix(tmp_path, "xx")


@pytest.mark.skipif(shutil.which("Rscript") is None, reason="R (Rscript) is not installed")
def test_r_matrix_readmm_reads_our_file(tmp_path: Path) -> None:
    """R's Matrix::readMM (reference reader of the Matrix Market format in R) reads our file with the
    same dimensions, entries and values."""
    matrix = sp.csr_matrix(NIST_DENSE)
    path = write_mtx(tmp_path / "r.mtx", matrix, comment="written for R")
    script = (
        f"m <- Matrix::readMM('{path.as_posix()}'); "
        "s <- Matrix::summary(as(m, 'TsparseMatrix')); "
        "cat(nrow(m), ncol(m), nrow(s), sprintf('%.17g', sum(m)), sprintf('%.17g', m[4, 4]), sep = ' ')"
    )
    result = subprocess.run(["Rscript", "-e", script], capture_output=True, text=True, timeout=120)
    if "no package called" in result.stderr:
        pytest.skip("R is installed without the Matrix package")
    assert result.returncode == 0, result.stderr
    rows, cols, entries, total, m44 = result.stdout.split()
    assert (int(rows), int(cols), int(entries)) == (5, 5, 8)
    assert float(total) == pytest.approx(NIST_DENSE.sum(), abs=1e-12)
    assert float(m44) == -280.0
