"""Bootstrap stability of top-k keyword lists: which keywords would survive another sample.

A keyword list of a small group is noisy: a term can reach the top 20 because
three respondents happened to use it. To show this, respondents are resampled
with replacement (the nonparametric bootstrap, Efron & Tibshirani 1993,
*An Introduction to the Bootstrap*), the list is recomputed, and for every term
of the original top k we report

* ``stay_share`` — the share of resamples in which the term is still in the top k;
* ``rank_low`` / ``rank_high`` — the 2.5th and 97.5th percentiles of its rank
  over the resamples (a 95 % percentile interval of the rank).

Ranks are competition ranks: 1 + the number of terms with a strictly larger
score, so tied terms share a rank and "in the top k" means rank ≤ k.

Resampling is stratified by group when a grouping is given (each group keeps
its size, as the design fixed it), and draws respondents, not answers, so the
answers of one respondent stay together. One resample costs one sparse
product per group: the multiplicities ``m`` (how often each respondent was
drawn) times the respondent weights, multiplied into the group's block of the
respondent × term matrix, give the group's resampled column sums
(``counts = (w · m) @ M``), one pass over the block's non-zero entries.
Resamples are processed in batches (a dense ``(members, batch)`` matrix of
multiplicities), so the Python overhead does not grow with their number.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
import pandas as pd
import scipy.sparse as sp

from workbench.core.keyness import label_codes
from workbench.core.progress import Reporter

#: ``score(sums, totals) -> scores``: ``sums`` is ``(..., groups, terms)``, ``totals`` ``(..., groups)``;
#: the leading axis, when present, runs over a batch of resamples.
ScoreFunction = Callable[[np.ndarray, np.ndarray], np.ndarray]


def share_score(sums: np.ndarray, totals: np.ndarray) -> np.ndarray:
    """Weighted share: column sum ÷ the group's total (share of respondents mentioning, or mean weight)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(totals[..., None] > 0, sums / totals[..., None], 0.0)


def top_k_indices(scores: np.ndarray, terms: np.ndarray, k: int) -> list[np.ndarray]:
    """Per row, the indices of the ``k`` largest positive scores; ties broken by term, ascending."""
    out = []
    term_text = np.asarray(terms).astype(str)
    for row in np.atleast_2d(scores):
        positive = np.flatnonzero(row > 0)
        order = positive[np.lexsort((term_text[positive], -row[positive]))]
        out.append(order[:k])
    return out


def competition_ranks(scores: np.ndarray, picks: list[np.ndarray]) -> list[np.ndarray]:
    """Rank (1 + number of strictly larger scores in the row) of each picked term."""
    ranks = []
    for row, chosen in zip(np.atleast_2d(scores), picks, strict=True):
        ordered = np.sort(row)
        ranks.append(len(row) - np.searchsorted(ordered, row[chosen], side="right") + 1)
    return ranks


def bootstrap_top_k(
    matrix: sp.csr_matrix,
    weights: np.ndarray,
    terms: np.ndarray,
    score: ScoreFunction,
    *,
    k: int,
    resamples: int,
    seed: int | list[int],
    labels: np.ndarray | None = None,
    values: list[object] | None = None,
    denominators: np.ndarray | None = None,
    reporter: Reporter | None = None,
) -> pd.DataFrame:
    """Top-k list of every group with its bootstrap stability.

    Parameters
    ----------
    matrix
        Respondents × terms (counts, mentions or weights), CSR.
    weights
        Respondent weights (ones when unweighted).
    score
        Turns column sums ``S_gt = Σ_i m_i w_i x_it`` (over the group's
        respondents, ``m_i`` the multiplicity in the resample, 1 for the
        original sample) and totals ``T_g = Σ_i m_i w_i d_i`` into term scores.
    k, resamples, seed
        List length, number of bootstrap resamples (0 skips the bootstrap:
        ``stay_share`` and the rank interval are then empty), and the seed of
        ``numpy.random.default_rng`` (an int or a list of ints, e.g. the
        study seed and a list number); the same seed gives the same figures.
    labels, values
        Group of each respondent and the groups to list (respondents with a
        label not in ``values`` are left out). ``None`` treats all respondents
        as one group named ``"all"``.
    denominators
        ``d_i`` per respondent (default 1): e.g. the number of answers of each
        respondent, so that ``S / T`` is a mean over answers.

    Returns
    -------
    pandas.DataFrame
        One row per (group, listed term): ``group``, ``rank``, ``term``,
        ``score``, ``stay_share``, ``rank_low``, ``rank_high``, ``resamples``.
    """
    n = matrix.shape[0]
    if labels is None:
        labels = np.zeros(n, dtype=np.int64)
        values = [0]
        names: list[object] = ["all"]
    else:
        assert values is not None
        names = list(values)
    group_of = label_codes(labels, list(values)).astype(np.int64)
    members = np.flatnonzero(group_of >= 0)
    # Respondents sorted by group, so each group is one contiguous block to draw from.
    members = members[np.argsort(group_of[members], kind="stable")]
    g_sorted = group_of[members]
    sizes = np.bincount(g_sorted, minlength=len(names))
    starts = np.concatenate([[0], np.cumsum(sizes)[:-1]])
    w_sorted = np.asarray(weights, dtype=np.float64)[members]
    d_sorted = np.ones(len(members)) if denominators is None else np.asarray(denominators, dtype=np.float64)[members]
    mx = sp.csr_matrix(matrix, dtype=np.float64)[members]
    ends = starts + sizes
    n_groups, n_terms, n_members = len(names), mx.shape[1], len(members)
    # One transposed block per group: the column sums of group g for a whole batch of
    # resamples are one sparse × dense product, block_g @ (w · m)ᵀ, a single pass over
    # the block's entries per resample, with no Python loop over resamples.
    blocks = [sp.csr_matrix(mx[a:b].T) for a, b in zip(starts, ends, strict=True)]
    onehot = np.zeros((n_members, n_groups))
    onehot[np.arange(n_members), g_sorted] = 1.0

    def evaluate(multiplicity: np.ndarray) -> np.ndarray:
        """Scores ``(batch, groups, terms)`` for multiplicities ``(batch, members)``."""
        wm = w_sorted * multiplicity
        sums = np.empty((len(wm), n_groups, n_terms))
        for g, (a, b) in enumerate(zip(starts, ends, strict=True)):
            sums[:, g, :] = np.asarray(blocks[g] @ wm[:, a:b].T).T
        totals = (wm * d_sorted) @ onehot
        return score(sums, totals)

    original = evaluate(np.ones((1, n_members)))[0]
    picks = top_k_indices(original, terms, k)
    ranks = [np.empty((resamples, len(p)), dtype=np.int64) for p in picks]
    rng = np.random.default_rng(seed)
    # Resamples per batch: bounded so the score array and the rank comparisons stay small.
    batch = int(max(1, min(resamples, 250_000 // max(1, n_groups * n_terms))))
    member_start = starts[g_sorted]
    member_size = sizes[g_sorted].astype(np.float64)
    for first in range(0, resamples, batch):
        if reporter is not None:
            reporter.update("compare", first, resamples, "bootstrap stability")
        size = min(batch, resamples - first)
        # Uniform draw within each respondent's own group: stratified bootstrap. The
        # draws are u * size in [0, size), so truncation is the floor.
        draws = rng.random((size, n_members))
        draws *= member_size
        flat = draws.astype(np.int64)
        del draws
        flat += member_start
        flat += (np.arange(size, dtype=np.int64) * n_members)[:, None]
        counts = np.bincount(flat.ravel(), minlength=size * n_members).reshape(size, n_members)
        del flat
        scores = evaluate(counts)  # w · m below turns the integer counts into floats exactly
        # Competition rank: 1 + the number of terms scoring strictly higher, read off each
        # row sorted once (one vectorised sort for the batch, then a binary search per row).
        ordered = np.sort(scores, axis=-1)
        for g, chosen in enumerate(picks):
            if len(chosen):
                target = scores[:, g, chosen]
                for r in range(size):
                    ranks[g][first + r] = n_terms - np.searchsorted(ordered[r, g], target[r], side="right") + 1
    frames = []
    for g, chosen in enumerate(picks):
        if len(chosen) == 0:
            continue
        columns: dict[str, object] = {
            "group": names[g],
            "rank": competition_ranks(original[g : g + 1], [chosen])[0],
            "term": np.asarray(terms)[chosen],
            "score": original[g, chosen],
        }
        if resamples > 0:
            columns["stay_share"] = (ranks[g] <= k).mean(axis=0)
            columns["rank_low"], columns["rank_high"] = np.percentile(ranks[g], [2.5, 97.5], axis=0)
        else:
            columns["stay_share"] = columns["rank_low"] = columns["rank_high"] = np.nan
        columns["resamples"] = resamples
        frames.append(pd.DataFrame(columns))
    if not frames:
        return pd.DataFrame(columns=["group", "rank", "term", "score", "stay_share", "rank_low", "rank_high", "resamples"])
    return pd.concat(frames, ignore_index=True)
