"""Keyword tables: the top terms of one language (or the pooled corpus), with their evidence.

Two rankings, in one long table (column ``ranking``):

``mean_weight``
    The respondent-weighted mean TF-IDF weight of the term over all answers
    of the corpus (answers without the term count as 0)::

        mean_weight_j = Σ_i w_i x_ij / Σ_i w_i

``doc_share``
    The weighted share of answers that contain the term::

        doc_share_j = Σ_{i: c_ij > 0} w_i / Σ_i w_i

Each ranking keeps the ``top_k`` terms with a positive score, highest first,
ties broken by the term (alphabetical). Every row also carries
``df`` (answers containing the term, unweighted), ``df_weighted``
(Σ_{i: c_ij > 0} w_i), ``total_count`` (Σ_i c_ij), ``total_count_weighted``
(Σ_i w_i c_ij), the term's ``idf`` and ``examples``: up to three answer ids
where the term weighs most (ties in input order), joined by ``"; "``.
With all weights 1 the weighted and unweighted columns are equal.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import scipy.sparse as sp

from workbench.core.counts import Counts
from workbench.core.tfidf import column_sums, document_frequency

KEYWORD_COLUMNS: tuple[str, ...] = (
    "ranking",
    "rank",
    "term",
    "mean_weight",
    "doc_share",
    "df",
    "df_weighted",
    "total_count",
    "total_count_weighted",
    "idf",
    "examples",
)
RANKINGS: tuple[str, ...] = ("mean_weight", "doc_share")
EXAMPLE_SEPARATOR = "; "


def _figures(
    counts: Counts, weighted: sp.csr_matrix, idf: np.ndarray, df_weighted: np.ndarray | None
) -> dict[str, np.ndarray]:
    matrix = counts.matrix
    w = np.asarray(counts.weights, dtype=np.float64)
    total_weight = float(w.sum())
    if df_weighted is None:
        df_weighted = document_frequency(matrix, w)
    return {
        "mean_weight": column_sums(weighted, w) / total_weight,
        "doc_share": np.asarray(df_weighted, dtype=np.float64) / total_weight,
        "df": document_frequency(matrix).astype(np.int64),
        "df_weighted": np.asarray(df_weighted, dtype=np.float64),
        "total_count": column_sums(matrix).astype(np.int64),
        "total_count_weighted": column_sums(matrix, w),
        "idf": np.asarray(idf, dtype=np.float64),
    }


def term_statistics(
    counts: Counts, weighted: sp.csr_matrix, idf: np.ndarray, df_weighted: np.ndarray | None = None
) -> pd.DataFrame:
    """Every term's figures (columns of :data:`KEYWORD_COLUMNS` except ranking, rank, examples).

    Column sums over the CSR arrays (``tfidf.column_sums``); ``df_weighted``
    may be passed when the weighting already computed it.
    """
    return pd.DataFrame({"term": counts.terms, **_figures(counts, weighted, idf, df_weighted)})


def _top(scores: np.ndarray, top_k: int) -> np.ndarray:
    """Column indices of the ``top_k`` positive scores, highest first, ties by column (= term) order."""
    candidates = np.flatnonzero(scores > 0)
    if len(candidates) > top_k:
        # Only scores at or above the k-th largest can make the list; sort just those.
        threshold = np.partition(scores[candidates], len(candidates) - top_k)[len(candidates) - top_k]
        candidates = candidates[scores[candidates] >= threshold]
    order = np.lexsort((candidates, -scores[candidates]))
    return candidates[order[:top_k]]


def _best_rows(values: np.ndarray, rows: np.ndarray, n: int) -> np.ndarray:
    """The rows of the ``n`` highest values, ties in row order (``rows`` ascending)."""
    if len(values) > n:
        threshold = np.partition(values, len(values) - n)[len(values) - n]
        chosen = values >= threshold
        values, rows = values[chosen], rows[chosen]
    return rows[np.lexsort((rows, -values))[:n]]


def _examples(
    weighted: sp.csr_matrix, counts: sp.csr_matrix, columns: np.ndarray, row_ids: np.ndarray, n: int
) -> dict[int, str]:
    """Up to ``n`` answer ids per column where the weight (else the count) is highest; ties in row order."""
    result: dict[int, str] = {}
    remaining = np.zeros(weighted.shape[1], dtype=bool)
    remaining[columns] = True
    # Terms whose weights are all 0 (none stored) take their examples from the counts.
    for source in (weighted, counts):
        if not remaining.any():
            break
        hits = np.flatnonzero(remaining[source.indices])
        if hits.size == 0:
            continue
        rows = np.searchsorted(source.indptr, hits, side="right") - 1
        cols = source.indices[hits]
        values = source.data[hits].astype(np.float64)
        # Hits come in row order; a stable sort by column keeps it within each column.
        order = np.argsort(cols, kind="stable")
        cols, rows, values = cols[order], rows[order], values[order]
        starts = np.flatnonzero(np.r_[True, cols[1:] != cols[:-1]])
        for start, stop in zip(starts, np.r_[starts[1:], len(cols)]):
            column = int(cols[start])
            picked = _best_rows(values[start:stop], rows[start:stop], n)
            result[column] = EXAMPLE_SEPARATOR.join(str(row_ids[r]) for r in picked)
            remaining[column] = False
    return result


def keyword_table(
    counts: Counts,
    weighted: sp.csr_matrix,
    idf: np.ndarray,
    top_k: int,
    n_examples: int = 3,
    df_weighted: np.ndarray | None = None,
) -> pd.DataFrame:
    """Top terms by respondent-weighted mean weight and by weighted document share.

    Parameters
    ----------
    counts
        The (filtered) counts the weighted matrix was made from.
    weighted
        The weighted matrix, aligned with ``counts``.
    idf
        The idf of each column.
    top_k
        Terms per ranking.
    n_examples
        Answer ids per term in ``examples``.
    df_weighted
        Σ_{i: c_ij > 0} w_i if already known (computed otherwise).

    Returns
    -------
    pandas.DataFrame
        Columns :data:`KEYWORD_COLUMNS`; first the ``mean_weight`` ranking,
        then the ``doc_share`` ranking, each ranked 1..k. Scores are
        mean_weight_j = Σ_i w_i x_ij / Σ_i w_i and
        doc_share_j = Σ_{i: c_ij > 0} w_i / Σ_i w_i.
    """
    figures = _figures(counts, weighted, idf, df_weighted)
    chosen = [(ranking, _top(figures[ranking], top_k)) for ranking in RANKINGS]
    needed = np.unique(np.concatenate([columns for _, columns in chosen]))
    examples = _examples(weighted, counts.matrix, needed, counts.row_ids, n_examples)
    columns = np.concatenate([columns for _, columns in chosen]).astype(np.int64)
    # Only the chosen rows become a table: building a frame of the whole vocabulary costs more than the sums.
    table = pd.DataFrame(
        {
            "ranking": np.repeat([ranking for ranking, _ in chosen], [len(c) for _, c in chosen]).astype(object),
            "rank": np.concatenate([np.arange(1, len(c) + 1, dtype=np.int64) for _, c in chosen]),
            "term": counts.terms[columns].astype(object),
            **{name: values[columns] for name, values in figures.items()},
            "examples": np.array([examples.get(int(c), "") for c in columns], dtype=object),
        }
    )
    return table[list(KEYWORD_COLUMNS)]
