"""Keyness statistics checked against published values and SciPy."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import scipy.sparse as sp
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.stats import chi2, chi2_contingency, false_discovery_control

from workbench.core.counts import Counts
from workbench.core.keyness import (
    benjamini_hochberg,
    by_respondent,
    critical_value,
    group_sums,
    keyness_arrays,
    keyness_tables,
    kish_effective_n,
    log_likelihood_g2,
    log_ratio,
    p_value,
)

# Dunning (1993), "Accurate methods for the statistics of surprise and
# coincidence", Computational Linguistics 19(1):61-74, Table 1:
# (-2 log lambda as published, k11, k12, k21, k22).
DUNNING_TABLE_1 = [
    (270.72, 110, 2442, 111, 29114),
    (263.90, 29, 13, 123, 31612),
    (256.84, 31, 23, 139, 31584),
    (167.23, 10, 0, 3, 31764),
    (157.21, 76, 104, 2476, 29121),
    (146.80, 9, 0, 5, 31763),
    (104.53, 10, 9, 41, 31717),
    (57.44, 4, 11, 1, 31761),
    (36.98, 3, 10, 5, 31759),
]


@pytest.mark.parametrize(("published", "k11", "k12", "k21", "k22"), DUNNING_TABLE_1)
def test_g2_matches_dunning_1993_table_1(published: float, k11: int, k12: int, k21: int, k22: int) -> None:
    """Dunning (1993), Table 1: the nine published -2 log λ values, to the published two decimals."""
    assert round(float(log_likelihood_g2(k11, k12, k21, k22)), 2) == pytest.approx(published, abs=1e-9)


def test_g2_vectorised_over_dunning_rows() -> None:
    """Dunning (1993), Table 1, all nine rows in one vectorised call (same values as one by one)."""
    rows = np.array(DUNNING_TABLE_1)
    g2 = log_likelihood_g2(rows[:, 1], rows[:, 2], rows[:, 3], rows[:, 4])
    np.testing.assert_allclose(g2, rows[:, 0], atol=0.005)


_cell = st.integers(min_value=0, max_value=200_000)


@settings(max_examples=300, deadline=None)
@given(_cell, _cell, _cell, _cell)
def test_g2_equals_scipy_log_likelihood(k11: int, k12: int, k21: int, k22: int) -> None:
    """SciPy reference: scipy.stats.chi2_contingency(t, lambda_="log-likelihood", correction=False).statistic."""
    table = np.array([[k11, k12], [k21, k22]], dtype=float)
    if (table.sum(axis=0) == 0).any() or (table.sum(axis=1) == 0).any():
        # SciPy refuses tables with an empty row or column; G² is 0 there.
        assert float(log_likelihood_g2(k11, k12, k21, k22)) == 0.0
        return
    expected = chi2_contingency(table, lambda_="log-likelihood", correction=False).statistic
    assert float(log_likelihood_g2(k11, k12, k21, k22)) == pytest.approx(expected, rel=1e-9, abs=1e-7)


@pytest.mark.parametrize(
    ("alpha", "published"), [(0.05, 3.84), (0.01, 6.63), (0.001, 10.83), (0.0001, 15.13)]
)
def test_critical_values(alpha: float, published: float) -> None:
    """Critical values of χ² with one degree of freedom as tabulated for keyness (3.84, 6.63, 10.83,
    15.13; e.g. Rayson & Garside 2000) against scipy.stats.chi2.isf; the table truncates 15.1367 to 15.13."""
    assert critical_value(alpha) == pytest.approx(chi2.isf(alpha, 1))
    assert abs(critical_value(alpha) - published) < 0.01
    assert float(p_value(critical_value(alpha))) == pytest.approx(alpha)


def test_log_ratio_hardie_example() -> None:
    """Hardie (2014), "Log Ratio – an informal introduction" (CASS blog): 0.0006 vs 0.0002 -> 1.585."""
    assert float(log_ratio(6, 10_000, 2, 10_000)) == pytest.approx(1.585, abs=5e-4)
    assert float(log_ratio(2, 10_000, 6, 10_000)) == pytest.approx(-1.585, abs=5e-4)
    assert float(log_ratio(5, 100, 5, 100)) == 0.0


def test_log_ratio_zero_rule() -> None:
    """Zero rule (common practice, documented in keyness.log_ratio): a zero frequency becomes 0.5."""
    assert float(log_ratio(0, 100, 4, 100)) == pytest.approx(np.log2(0.5 / 4))
    assert float(log_ratio(8, 100, 0, 200)) == pytest.approx(np.log2((8 / 100) / (0.5 / 200)))
    assert np.isfinite(log_ratio(0, 100, 0, 100))


def test_benjamini_hochberg_equals_scipy() -> None:
    """SciPy reference: scipy.stats.false_discovery_control(p, method="bh"); NaN entries stay NaN."""
    rng = np.random.default_rng(7)
    p = np.concatenate([rng.uniform(0, 0.01, 20), rng.uniform(0, 1, 200)])
    np.testing.assert_allclose(benjamini_hochberg(p), false_discovery_control(p, method="bh"))
    with_nan = p.copy()
    with_nan[[3, 50]] = np.nan
    out = benjamini_hochberg(with_nan)
    assert np.isnan(out[[3, 50]]).all()
    keep = ~np.isnan(with_nan)
    np.testing.assert_allclose(out[keep], false_discovery_control(with_nan[keep], method="bh"))


def test_benjamini_hochberg_by_hand() -> None:
    """Benjamini & Hochberg (1995) step-up rule worked by hand: p = (0.01, 0.02, 0.03, 0.5), m = 4
    -> adjusted (0.04, 0.04, 0.04, 0.5) (4·0.01/1, min(4·0.02/2, 4·0.03/3), 4·0.03/3, 0.5)."""
    np.testing.assert_allclose(benjamini_hochberg(np.array([0.03, 0.01, 0.5, 0.02])), [0.04, 0.04, 0.5, 0.04])


def test_kish_effective_n() -> None:
    """Kish (1965), Survey Sampling: n_eff = (Σw)²/Σw²; equal weights give n, weights (1,1,2,2) give 36/10."""
    assert kish_effective_n(np.ones(40)) == pytest.approx(40)
    assert kish_effective_n(np.full(40, 2.5)) == pytest.approx(40)
    assert kish_effective_n(np.array([1, 1, 2, 2.0])) == pytest.approx(3.6)
    assert kish_effective_n(np.zeros(3)) == 0.0


def test_keyness_arrays_broadcast_groups() -> None:
    """Vectorised over (groups, terms): each cell equals SciPy's G² on its own 2×2 table
    (scipy.stats.chi2_contingency, lambda_="log-likelihood", correction=False)."""
    a = np.array([[10.0, 3.0, 0.0], [1.0, 8.0, 5.0]])
    n_a = np.array([[50.0], [40.0]])
    b = np.array([[4.0, 9.0, 6.0], [13.0, 4.0, 1.0]])
    n_b = np.array([[40.0], [50.0]])
    out = keyness_arrays(a, n_a, b, n_b)
    for g in range(2):
        for t in range(3):
            table = np.array([[a[g, t], b[g, t]], [n_a[g, 0] - a[g, t], n_b[g, 0] - b[g, t]]])
            ref = chi2_contingency(table, lambda_="log-likelihood", correction=False)
            assert out.g2[g, t] == pytest.approx(ref.statistic)
            assert out.p[g, t] == pytest.approx(ref.pvalue)


def _counts(rows: list[dict[str, int]], row_ids: list[str], weights: list[float] | None = None) -> Counts:
    terms = sorted({t for r in rows for t in r})
    col = {t: j for j, t in enumerate(terms)}
    data, ri, ci = [], [], []
    for i, r in enumerate(rows):
        for t, c in r.items():
            data.append(c)
            ri.append(i)
            ci.append(col[t])
    matrix = sp.csr_matrix((data, (ri, ci)), shape=(len(rows), len(terms)), dtype=np.float64)
    w = np.ones(len(rows)) if weights is None else np.asarray(weights, dtype=float)
    return Counts(matrix=matrix, terms=np.array(terms, dtype=object), row_ids=np.array(row_ids, dtype=object), weights=w, language="de")


def test_respondents_count_once_tokens_count_all() -> None:
    """Counting units: a respondent with two answers naming 'preis' three times is one mention, three tokens."""
    counts = _counts(
        [{"preis": 2}, {"preis": 1, "lieferung": 1}, {"lieferung": 1}],
        ["r1|q1", "r1|q2", "r2|q1"],
    )
    rc = by_respondent(counts, np.array(["r1", "r1", "r2"], dtype=object))
    assert list(rc.respondent_ids) == ["r1", "r2"]
    j = list(rc.terms).index("preis")
    assert rc.tokens[0, j] == 3
    assert rc.mentions[0, j] == 1
    assert rc.mentions.sum() == 3  # r1: preis, lieferung; r2: lieferung


def _survey(seed: int = 3, n: int = 400) -> tuple[Counts, np.ndarray, np.ndarray]:
    """Invented counts: group A mentions 'alpha' often, both groups mention 'beta' alike."""
    rng = np.random.default_rng(seed)
    groups = np.where(np.arange(n) < n // 2, "A", "B")
    rows = []
    for g in groups:
        row = {}
        if rng.random() < (0.4 if g == "A" else 0.1):
            row["alpha"] = int(rng.integers(1, 3))
        if rng.random() < 0.3:
            row["beta"] = 1
        if rng.random() < 0.05:
            row["gamma"] = 1
        rows.append(row)
    ids = np.array([f"r{i}" for i in range(n)], dtype=object)
    return _counts(rows, [f"{i}|q" for i in ids]), ids, groups


def test_keyness_table_equals_scipy_on_respondent_crosstab() -> None:
    """End to end against scipy.stats.chi2_contingency(lambda_="log-likelihood", correction=False)
    on a pandas crosstab of 'mentions alpha' × group built independently from the term lists."""
    counts, ids, groups = _survey()
    rc = by_respondent(counts, ids)
    sums = group_sums(rc, groups, ["A", "B"], "respondents")
    table = keyness_tables(sums, rc.terms, targets=[0], min_freq=1)[0].table.set_index("term")
    mentions = (counts.matrix[:, list(counts.terms).index("alpha")].toarray().ravel() > 0)
    cross = pd.crosstab(mentions, groups).to_numpy(dtype=float)  # rows: False/True; cols: A/B
    ref = chi2_contingency(cross, lambda_="log-likelihood", correction=False)
    assert table.loc["alpha", "g2"] == pytest.approx(ref.statistic)
    assert table.loc["alpha", "p"] == pytest.approx(ref.pvalue)
    assert table.loc["alpha", "direction"] == "over"
    assert table.loc["alpha", "share_group"] == pytest.approx(cross[1, 0] / 200)
    assert (table["counting"] == "respondents").all()
    np.testing.assert_allclose(table["p_adj"], false_discovery_control(table["p"].to_numpy(), method="bh"))


def test_tokens_counting_uses_token_table() -> None:
    """Token counting: the 2×2 table is occurrences vs all other tokens of each side (checked with SciPy)."""
    counts, ids, groups = _survey()
    rc = by_respondent(counts, ids)
    sums = group_sums(rc, groups, ["A", "B"], "tokens")
    table = keyness_tables(sums, rc.terms, targets=[0], min_freq=1)[0].table.set_index("term")
    j = list(rc.terms).index("alpha")
    tok = rc.tokens.toarray()
    in_a = groups == "A"
    a, b = tok[in_a, j].sum(), tok[~in_a, j].sum()
    na, nb = tok[in_a].sum(), tok[~in_a].sum()
    ref = chi2_contingency(np.array([[a, b], [na - a, nb - b]]), lambda_="log-likelihood", correction=False)
    assert table.loc["alpha", "g2"] == pytest.approx(ref.statistic)
    assert table.loc["alpha", "freq_group"] == a
    assert (table["counting"] == "tokens").all()


def test_equal_weights_give_unweighted_significance() -> None:
    """Kish rescaling: constant weights (here 3) have n_eff = n, so G² equals the unweighted G²
    while frequencies are tripled (Kish 1965, n_eff = (Σw)²/Σw²)."""
    counts, ids, groups = _survey()
    rc = by_respondent(counts, ids)
    plain = keyness_tables(group_sums(rc, groups, ["A", "B"], "respondents"), rc.terms, targets=[0], min_freq=1)[0]
    rc.weights = np.full(len(rc.weights), 3.0)
    heavy = keyness_tables(group_sums(rc, groups, ["A", "B"], "respondents"), rc.terms, targets=[0], min_freq=1)[0]
    np.testing.assert_allclose(heavy.table["g2"], plain.table["g2"])
    np.testing.assert_allclose(heavy.table["freq_group"], 3 * plain.table["freq_group"])
    assert heavy.table["weighted"].all() and not plain.table["weighted"].any()


def test_unequal_weights_shrink_significance() -> None:
    """Kish rescaling: unequal weights lower n_eff below n, so G² drops while shares stay weighted shares."""
    counts, ids, groups = _survey()
    rc = by_respondent(counts, ids)
    plain = keyness_tables(group_sums(rc, groups, ["A", "B"], "respondents"), rc.terms, targets=[0], min_freq=1)[0]
    rc.weights = np.where(np.arange(len(rc.weights)) % 2 == 0, 0.5, 1.5)
    weighted = keyness_tables(group_sums(rc, groups, ["A", "B"], "respondents"), rc.terms, targets=[0], min_freq=1)[0]
    g_plain = plain.table.set_index("term").loc["alpha", "g2"]
    g_w = weighted.table.set_index("term").loc["alpha", "g2"]
    assert g_w < g_plain
    # Weighted share by hand.
    j = list(rc.terms).index("alpha")
    men = rc.mentions.toarray()[:, j]
    in_a = groups == "A"
    share = (rc.weights[in_a] * men[in_a]).sum() / rc.weights[in_a].sum()
    assert weighted.table.set_index("term").loc["alpha", "share_group"] == pytest.approx(share)


def test_min_freq_filter_and_reference_group() -> None:
    """Minimum frequency (common practice: 5) drops rare terms; a reference group replaces 'the rest'."""
    counts, ids, groups = _survey()
    groups = groups.copy()
    groups[:50] = "C"
    rc = by_respondent(counts, ids)
    sums = group_sums(rc, groups, ["A", "B", "C"], "respondents")
    raw_total = sums.freq_raw.sum(axis=0)
    rare = set(rc.terms[raw_total < 25])
    tables = keyness_tables(sums, rc.terms, targets=[0, 2], reference=1, min_freq=25)
    assert [t.target for t in tables] == ["A", "C"]
    assert all(t.reference == "B" for t in tables)
    for t in tables:
        assert not rare & set(t.table["term"])
    # Against the reference group only: recompute alpha for C vs B by hand with SciPy.
    j = list(rc.terms).index("alpha")
    men = rc.mentions.toarray()[:, j]
    c_n, b_n = (groups == "C").sum(), (groups == "B").sum()
    c_a, b_a = men[groups == "C"].sum(), men[groups == "B"].sum()
    assert c_a + b_a >= 25
    ref = chi2_contingency(np.array([[c_a, b_a], [c_n - c_a, b_n - b_a]]), lambda_="log-likelihood", correction=False)
    assert tables[1].table.set_index("term").loc["alpha", "g2"] == pytest.approx(ref.statistic)


def test_table_order_is_pandas_sort_by_g2_then_term() -> None:
    """Reference library: pandas ``DataFrame.sort_values(["g2", "term"], ascending=[False, True],
    kind="stable")``. Terms with equal counts tie on G² (several tie at 0: the same share on both
    sides) and must come in code-point order of the term, including non-ASCII and upper-case terms."""
    rng = np.random.default_rng(11)
    terms = ["zeta", "Äpfel", "alpha", "beta", "Zug", "éte", "a", "ab", "b", "ß"]
    n = 240
    groups = np.where(np.arange(n) < n // 2, "A", "B")
    rows = []
    for i in range(n):
        # Pairs of terms share the same mention pattern, so their G² ties exactly.
        row = {t: 1 for j, t in enumerate(terms) if (i + j // 2) % (2 + j // 2) == 0}
        if groups[i] == "A" and rng.random() < 0.3:
            row["zeta"] = 1
        rows.append(row)
    ids = np.array([f"r{i}" for i in range(n)], dtype=object)
    counts = _counts(rows, [f"{i}|q" for i in ids])
    rc = by_respondent(counts, ids)
    table = keyness_tables(group_sums(rc, groups, ["A", "B"], "respondents"), rc.terms, targets=[0], min_freq=1)[0].table
    assert table["g2"].duplicated().any()
    expected = table.sort_values(["g2", "term"], ascending=[False, True], kind="stable").reset_index(drop=True)
    pd.testing.assert_frame_equal(table, expected)
    assert list(table.index) == list(range(len(table)))
