"""The weighting arithmetic: every tf/idf/norm option against a dense implementation of the written formulas, SMART parsing, filters."""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.sparse as sp
from hypothesis import given, settings
from hypothesis import strategies as st

from workbench.core.errors import SettingsError
from workbench.core.settings import Weigh
from workbench.core.tfidf import (
    IDF_KINDS,
    NORM_KINDS,
    TF_KINDS,
    TfidfWeighting,
    VocabularyFilter,
    WeightingScheme,
    document_frequency,
    idf_from_df,
    row_reduce,
    weight_matrix,
)

LOGS = {"e": np.log, "2": np.log2, "10": np.log10}


def dense_reference(counts: np.ndarray, scheme: WeightingScheme, weights: np.ndarray, lengths: np.ndarray) -> np.ndarray:
    """The formulas of Manning, Raghavan & Schütze (2008) Fig. 6.15 and the scikit-learn TfidfTransformer docs, written out densely."""
    log = LOGS[scheme.base]
    c = counts.astype(float)
    present = c > 0
    tf = np.zeros_like(c)
    with np.errstate(divide="ignore", invalid="ignore"):
        if scheme.tf == "raw":
            tf = c.copy()
        elif scheme.tf == "relative":
            tf = np.where(present, c / lengths[:, None], 0.0)
        elif scheme.tf == "log":
            tf = np.where(present, 1 + log(c), 0.0)
        elif scheme.tf == "binary":
            tf = present.astype(float)
        elif scheme.tf == "augmented":
            tf = np.where(present, 0.5 + 0.5 * c / c.max(axis=1, keepdims=True), 0.0)
        elif scheme.tf == "logave":
            average = c.sum(axis=1, keepdims=True) / present.sum(axis=1, keepdims=True)
            tf = np.where(present, (1 + log(c)) / (1 + log(average)), 0.0)
        n = weights.sum()
        df = (present * weights[:, None]).sum(axis=0)
        if scheme.idf == "none":
            idf = np.ones(c.shape[1])
        elif scheme.idf == "log":
            idf = np.where(df > 0, log(n / df), 0.0)
        elif scheme.idf == "smooth":
            idf = np.where(df > 0, np.log((1 + n) / (1 + df)) + 1, 0.0)
        else:
            idf = np.where((df > 0) & (df < n), np.maximum(0, log((n - df) / df)), 0.0)
        x = tf * (idf + scheme.idf_add)
        if scheme.norm == "l2":
            size = np.sqrt((x**2).sum(axis=1, keepdims=True))
        elif scheme.norm == "l1":
            size = np.abs(x).sum(axis=1, keepdims=True)
        else:
            size = np.ones((c.shape[0], 1))
        return np.where(size > 0, x / np.where(size > 0, size, 1), x)


@st.composite
def count_matrices(draw: st.DrawFn) -> tuple[np.ndarray, np.ndarray]:
    rows = draw(st.integers(1, 7))
    cols = draw(st.integers(1, 6))
    cells = draw(st.lists(st.integers(0, 5), min_size=rows * cols, max_size=rows * cols))
    counts = np.array(cells).reshape(rows, cols)
    weights = np.array(draw(st.lists(st.sampled_from([0.0, 0.5, 1.0, 2.0, 3.7]), min_size=rows, max_size=rows)))
    if weights.sum() == 0:
        weights[0] = 1.0
    return counts, weights


@settings(max_examples=150, deadline=None)
@given(
    data=count_matrices(),
    tf=st.sampled_from(TF_KINDS),
    idf=st.sampled_from(IDF_KINDS),
    norm=st.sampled_from(NORM_KINDS),
    base=st.sampled_from(["e", "2", "10"]),
    weighted=st.booleans(),
    extra=st.integers(0, 3),
)
def test_every_option_matches_the_written_formulas(data, tf, idf, norm, base, weighted, extra) -> None:
    """Every tf × idf × norm × base combination, with and without respondent weights, equals the dense formulas (1e-12).

    Sources of the formulas: Manning, Raghavan & Schütze 2008, Fig. 6.15;
    scikit-learn ``TfidfTransformer`` docstring (smoothed idf). ``lengths``
    exceed the row sums by ``extra`` terms removed before weighting.
    """
    counts, w = data
    weights = w if weighted else np.ones(len(w))
    lengths = counts.sum(axis=1) + extra
    scheme = WeightingScheme(tf=tf, idf=idf, norm=norm, base=base)
    matrix = sp.csr_matrix(counts)
    fitted = TfidfWeighting(scheme).fit(matrix, weights if weighted else None)
    ours = fitted.transform(matrix, lengths).toarray()
    expected = dense_reference(counts, scheme, weights, np.where(lengths > 0, lengths, 1))
    np.testing.assert_allclose(ours, expected, rtol=1e-12, atol=1e-12)
    assert fitted.n_documents_ == pytest.approx(weights.sum())


def test_relative_tf_divides_by_the_answer_length_before_filters() -> None:
    """Relative frequency = count ÷ number of terms in the answer (the issue's definition), not ÷ the terms left after filters."""
    matrix = sp.csr_matrix(np.array([[2, 1], [0, 3]]))
    lengths = np.array([5, 3])
    weighted = weight_matrix(matrix, WeightingScheme("relative", "none", "none"), np.ones(2), lengths).toarray()
    np.testing.assert_allclose(weighted, [[2 / 5, 1 / 5], [0, 1]])
    without = weight_matrix(matrix, WeightingScheme("relative", "none", "none"), np.ones(2)).toarray()
    np.testing.assert_allclose(without, [[2 / 3, 1 / 3], [0, 1]])


def test_row_reduce_handles_empty_rows_anywhere() -> None:
    """``np.add.reduceat`` returns the next element for an empty segment; row sums must be 0 there."""
    dense = np.array([[0, 0], [1, 2], [0, 0], [0, 0], [3, 0], [0, 0]], dtype=float)
    matrix = sp.csr_matrix(dense)
    np.testing.assert_array_equal(row_reduce(matrix, matrix.data, np.add), dense.sum(axis=1))
    np.testing.assert_array_equal(row_reduce(matrix, matrix.data, np.maximum, empty=-1), [-1, 2, -1, -1, 3, -1])
    normalised = weight_matrix(matrix, WeightingScheme("raw", "none", "l2"), np.ones(2)).toarray()
    np.testing.assert_allclose(np.linalg.norm(normalised, axis=1), [0, 1, 0, 0, 1, 0])


def test_document_frequency_from_indices_weighted_and_ignoring_stored_zeros() -> None:
    """df_j counts rows with c_ij > 0 (or sums their weights); an explicitly stored zero is not an occurrence."""
    matrix = sp.csr_matrix((np.array([1, 0, 2, 5]), np.array([0, 1, 1, 2]), np.array([0, 2, 4])), shape=(2, 3))
    np.testing.assert_array_equal(document_frequency(matrix), [1, 1, 1])
    np.testing.assert_array_equal(document_frequency(matrix, np.array([2.0, 0.5])), [2.0, 0.5, 0.5])


def test_idf_edge_cases() -> None:
    """df = 0 gives idf 0 for every kind; prob idf is 0 for df >= N/2 (max(0, log((N - df)/df))); smooth stays positive."""
    df = np.array([0.0, 1.0, 2.0, 4.0])
    assert idf_from_df(df, 4, WeightingScheme(idf="log", base="2")).tolist() == [0.0, 2.0, 1.0, 0.0]
    assert idf_from_df(df, 4, WeightingScheme(idf="prob", base="e"))[[0, 2, 3]].tolist() == [0.0, 0.0, 0.0]
    assert idf_from_df(df, 4, WeightingScheme(idf="prob", base="e"))[1] == pytest.approx(math.log(3))
    smooth = idf_from_df(df, 4, WeightingScheme(idf="smooth"))
    assert smooth[0] == 0.0 and smooth[3] == pytest.approx(1.0)


def test_no_dense_corpus_matrix_is_ever_built() -> None:
    """A 100,000 × 2,000,000 matrix would need 1.6 TB dense; weighting it must stay sparse."""
    rng = np.random.default_rng(7)
    rows, cols, nnz = 100_000, 2_000_000, 300_000
    matrix = sp.csr_matrix(
        (rng.integers(1, 4, nnz), (rng.integers(0, rows, nnz), rng.integers(0, cols, nnz))), shape=(rows, cols)
    )
    matrix.sum_duplicates()
    for scheme in (WeightingScheme("log", "smooth", "l2"), WeightingScheme("augmented", "prob", "l1", "10")):
        weighted = TfidfWeighting(scheme).fit_transform(matrix)
        assert sp.issparse(weighted) and weighted.nnz <= matrix.nnz
    with pytest.raises(TypeError, match="never weights a dense"):
        TfidfWeighting(WeightingScheme()).fit(np.ones((2, 2)))


# ---------------------------------------------------------------- SMART letters


@pytest.mark.parametrize(
    ("letters", "tf", "idf", "norm"),
    [
        ("nnn", "raw", "none", "none"),
        ("ltc", "log", "log", "l2"),
        ("lnc", "log", "none", "l2"),
        ("atn", "augmented", "log", "none"),
        ("bpc", "binary", "prob", "l2"),
        ("Ltc", "logave", "log", "l2"),
    ],
)
def test_smart_letters_follow_manning_fig_6_15(letters: str, tf: str, idf: str, norm: str) -> None:
    """Manning, Raghavan & Schütze 2008, Fig. 6.15: n/l/a/b/L for tf, n/t/p for idf, n/c for normalisation; base 10 as in the book's examples."""
    scheme = WeightingScheme.from_smart(letters)
    assert (scheme.tf, scheme.idf, scheme.norm, scheme.base, scheme.smart) == (tf, idf, norm, "10", letters)
    assert "Fig. 6.15" in scheme.describe()


def test_smart_formulas_in_describe() -> None:
    """The description states each formula: 'ltc' = 1 + log10(c), log10(N / df), cosine (Manning et al. 2008, Fig. 6.15)."""
    text = WeightingScheme.from_smart("ltc").describe()
    assert "1 + log10(c)" in text and "log10(N / df)" in text and "sqrt(sum of x^2" in text
    assert "max(0, log10((N - df) / df))" in WeightingScheme.from_smart("npn").describe()


@pytest.mark.parametrize(
    ("letters", "message"),
    [
        ("xtc", "unknown term-frequency letter 'x'; valid: 'n'"),
        ("lfc", "unknown document-frequency letter 'f'; valid: 'n'"),
        ("ltu", "unknown normalisation letter 'u' (pivoted 'u' and byte-size 'b' normalisation are not offered)"),
        ("lt", "must be three letters"),
        ("lnc.ltc", "give only the document triple, e.g. 'lnc'"),
    ],
)
def test_bad_smart_letters_are_settings_errors_listing_valid_letters(letters: str, message: str) -> None:
    """An unknown SMART letter names itself and lists the valid letters with their formulas."""
    with pytest.raises(SettingsError) as caught:
        WeightingScheme.from_smart(letters)
    assert message in str(caught.value)
    assert "\n" not in str(caught.value)
    if "letter '" in message:
        assert "1 + log10(c)" in str(caught.value) or "log10(N / df)" in str(caught.value) or "cosine" in str(caught.value)


def test_scheme_validation_in_one_place() -> None:
    """Unknown tf/idf/norm/base values fail at construction with one SettingsError naming every problem."""
    with pytest.raises(SettingsError, match="unknown tf 'sqrt'.*unknown log base '3'"):
        WeightingScheme(tf="sqrt", base="3")
    assert WeightingScheme(base=10).base == "10" and WeightingScheme(base=math.e).base == "e"


@pytest.mark.parametrize(("idf", "kind", "base"), [("log10", "log", "10"), ("ln", "log", "e"), ("log2", "log", "2"), ("smooth", "smooth", "e"), ("prob", "prob", "e"), ("none", "none", "e")])
def test_study_settings_resolve_to_a_scheme(idf: str, kind: str, base: str) -> None:
    """weigh.idf names the log base; tf 'log' uses the same base (sklearn's sublinear tf is 1 + ln tf with its ln idf)."""
    scheme = WeightingScheme.from_settings(Weigh(tf="log", idf=idf, norm="l1"))
    assert (scheme.tf, scheme.idf, scheme.norm, scheme.base) == ("log", kind, "l1", base)
    assert WeightingScheme.from_settings(Weigh(tf="raw", smart="bnn")).tf == "binary"


# ---------------------------------------------------------------- vocabulary filter


def test_filter_bounds_count_and_share_like_scikit_learn() -> None:
    """scikit-learn CountVectorizer semantics: int = answers, float = share of N; keep min <= df <= max."""
    df = np.array([1, 2, 5, 9, 10])
    totals = np.array([1, 2, 5, 9, 10])
    assert VocabularyFilter(min_df=2, max_df=0.9).select(df, totals, 10).tolist() == [1, 2, 3]
    assert VocabularyFilter(min_df=0.5, max_df=1.0).select(df, totals, 10).tolist() == [2, 3, 4]
    assert VocabularyFilter(min_df=1, max_df=5).select(df, totals, 10).tolist() == [0, 1, 2]


def test_max_terms_ties_break_by_term() -> None:
    """The vocabulary cap keeps the highest total counts; equal totals are decided alphabetically (column order)."""
    df = np.ones(5)
    totals = np.array([3, 7, 3, 7, 3])
    assert VocabularyFilter(max_terms=3).select(df, totals, 5).tolist() == [0, 1, 3]
    assert VocabularyFilter(max_terms=1).select(df, totals, 5).tolist() == [1]


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"min_df": -1}, "weigh.min_df = -1 must not be negative"),
        ({"max_df": 1.5}, "is a share and must lie in [0, 1]"),
        ({"min_df": 5, "max_df": 2}, "weigh.max_df = 2 is below weigh.min_df = 5"),
        ({"max_terms": 0}, "weigh.max_terms = 0 must be at least 1"),
        ({"min_df": "2"}, "must be a number"),
    ],
)
def test_bad_filters_are_settings_errors(kwargs: dict, message: str) -> None:
    """Each impossible filter setting is a one-line SettingsError saying what to change."""
    with pytest.raises(SettingsError) as caught:
        VocabularyFilter(**kwargs)
    assert message in str(caught.value)


@pytest.mark.parametrize("block", [1, 3, 7, 1 << 20])
def test_blockwise_passes_equal_the_whole_matrix_formulas(monkeypatch: pytest.MonkeyPatch, block: int) -> None:
    """The CSR passes work in blocks of rows; any block size (rows split anywhere, empty rows at block edges) gives the dense formulas."""
    import workbench.core.tfidf as tfidf

    monkeypatch.setattr(tfidf, "BLOCK_ENTRIES", block)
    rng = np.random.default_rng(11)
    counts = rng.integers(0, 4, size=(23, 6)) * (rng.random((23, 6)) < 0.4)
    counts[[0, 5, 6, 22]] = 0
    weights = rng.uniform(0, 2, 23)
    lengths = counts.sum(axis=1) + 1
    matrix = sp.csr_matrix(counts)
    for tf in TF_KINDS:
        for norm in NORM_KINDS:
            scheme = WeightingScheme(tf=tf, idf="prob", norm=norm, base="2")
            ours = TfidfWeighting(scheme).fit(matrix, weights).transform(matrix, lengths).toarray()
            np.testing.assert_allclose(ours, dense_reference(counts, scheme, weights, lengths), atol=1e-12)
    np.testing.assert_allclose(tfidf.column_sums(matrix, weights), weights @ counts)
    np.testing.assert_allclose(tfidf.column_sums(matrix, weights, binary=True), weights @ (counts > 0))
    np.testing.assert_array_equal(row_reduce(matrix, matrix.data.astype(float), np.add), counts.sum(axis=1))
