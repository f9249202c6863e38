"""Bootstrap stability of top-k lists."""

from __future__ import annotations

import numpy as np
import pytest
import scipy.sparse as sp

from workbench.core.stability import bootstrap_top_k, competition_ranks, share_score, top_k_indices


def _mentions(columns: list[np.ndarray]) -> sp.csr_matrix:
    return sp.csr_matrix(np.column_stack(columns).astype(float))


def test_competition_ranks_and_ties() -> None:
    """Competition ranking ("1224"): rank = 1 + number of strictly larger scores, ties share a rank."""
    scores = np.array([[0.5, 0.9, 0.5, 0.1]])
    assert list(competition_ranks(scores, [np.array([1, 0, 2, 3])])[0]) == [1, 2, 2, 4]
    assert list(top_k_indices(scores, np.array(["d", "a", "b", "c"]), 3)[0]) == [1, 2, 0]  # tie: 'b' before 'd'


def test_seeded_and_certain_terms() -> None:
    """Same seed -> identical figures; a term every respondent mentions stays first in every resample."""
    rng = np.random.default_rng(0)
    n = 120
    everyone = np.ones(n)
    some = (rng.random(n) < 0.3).astype(float)
    m = _mentions([everyone, some, (rng.random(n) < 0.1).astype(float)])
    terms = np.array(["all", "some", "few"], dtype=object)
    a = bootstrap_top_k(m, np.ones(n), terms, share_score, k=2, resamples=50, seed=[7, 1])
    b = bootstrap_top_k(m, np.ones(n), terms, share_score, k=2, resamples=50, seed=[7, 1])
    assert a.equals(b)
    first = a.set_index("term").loc["all"]
    assert (first["rank"], first["stay_share"], first["rank_low"], first["rank_high"]) == (1, 1.0, 1.0, 1.0)
    assert list(a["term"]) == ["all", "some"]


def test_stay_share_matches_direct_bootstrap() -> None:
    """Efron & Tibshirani (1993), An Introduction to the Bootstrap, ch. 6 (resampling the n units with
    replacement): the share of resamples in which term A (55 of 100 respondents) stays ahead of term B
    (45 of 100) in a top-1 list, compared with a direct bootstrap written out here with
    numpy.random.Generator.integers over respondent indices (independent draws; 4000 vs 2000 resamples,
    tolerance 0.04 ≈ 3 standard errors)."""
    n = 100
    a = np.r_[np.ones(55), np.zeros(45)]
    b = np.r_[np.zeros(50), np.ones(45), np.zeros(5)]
    m = _mentions([a, b])
    table = bootstrap_top_k(m, np.ones(n), np.array(["a", "b"], dtype=object), share_score, k=1, resamples=2000, seed=3)
    ours = table.set_index("term").loc["a", "stay_share"]
    rng = np.random.default_rng(11)
    idx = rng.integers(0, n, size=(4000, n))
    direct = np.mean(a[idx].sum(axis=1) >= b[idx].sum(axis=1))  # ties share rank 1: A stays
    assert ours == pytest.approx(direct, abs=0.04)
    assert 0.7 < ours < 0.999  # the gap is real but not certain


def test_stratified_resampling_keeps_group_sizes() -> None:
    """Stratified bootstrap: every resample keeps each group's size (Σ multiplicities per group = n_g)."""
    n = 90
    labels = np.array(["x"] * 20 + ["y"] * 70, dtype=object)
    m = _mentions([np.ones(n), (np.arange(n) % 3 == 0).astype(float)])
    seen: list[np.ndarray] = []

    def score(sums: np.ndarray, totals: np.ndarray) -> np.ndarray:
        seen.extend(np.atleast_2d(totals).copy())  # one row per resample of the batch
        return share_score(sums, totals)

    bootstrap_top_k(m, np.ones(n), np.array(["t", "u"], dtype=object), score, k=1, resamples=30, seed=1,
                    labels=labels, values=["x", "y"])  # fmt: skip
    assert len(seen) == 31
    for totals in seen:
        np.testing.assert_array_equal(totals, [20, 70])


def test_small_group_noise_shows_up() -> None:
    """A term that reaches a small group's top list through two respondents has a low stay share and a
    wide rank interval; the group's clear keyword does not."""
    rng = np.random.default_rng(5)
    n = 25
    clear = (rng.random(n) < 0.8).astype(float)
    noise = [np.isin(np.arange(n), rng.choice(n, 2, replace=False)).astype(float) for _ in range(15)]
    m = _mentions([clear, *noise])
    terms = np.array(["clear", *[f"n{i:02d}" for i in range(15)]], dtype=object)
    table = bootstrap_top_k(m, np.ones(n), terms, share_score, k=3, resamples=200, seed=2).set_index("term")
    assert table.loc["clear", "stay_share"] == 1.0
    others = table.drop(index="clear")
    assert (others["stay_share"] < 0.9).all()
    assert (others["rank_high"] - others["rank_low"] >= 3).all()


def test_zero_resamples() -> None:
    """bootstrap = 0 gives the plain top-k list with empty stability columns."""
    m = _mentions([np.ones(5), np.r_[1, 1, 0, 0, 0.0]])
    table = bootstrap_top_k(m, np.ones(5), np.array(["a", "b"], dtype=object), share_score, k=2, resamples=0, seed=1)
    assert list(table["term"]) == ["a", "b"]
    assert table["stay_share"].isna().all()
