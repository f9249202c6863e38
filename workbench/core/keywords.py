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
from workbench.core.tfidf import document_frequency

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


def term_statistics(counts: Counts, weighted: sp.csr_matrix, idf: np.ndarray) -> pd.DataFrame:
    """Every term's figures (columns of :data:`KEYWORD_COLUMNS` except ranking, rank, examples).

    Computed from the column indices of the CSR arrays with ``np.bincount``.
    """
    matrix = counts.matrix
    n_terms = matrix.shape[1]
    w = np.asarray(counts.weights, dtype=np.float64)
    total_weight = float(w.sum())
    w_count_entry = np.repeat(w, np.diff(matrix.indptr))
    w_weight_entry = np.repeat(w, np.diff(weighted.indptr))
    df_weighted = document_frequency(matrix, w)
    frame = pd.DataFrame(
        {
            "term": counts.terms,
            "mean_weight": np.bincount(weighted.indices, weights=weighted.data * w_weight_entry, minlength=n_terms)
            / total_weight,
            "doc_share": df_weighted / total_weight,
            "df": document_frequency(matrix).astype(np.int64),
            "df_weighted": df_weighted,
            "total_count": np.bincount(matrix.indices, weights=matrix.data, minlength=n_terms).astype(np.int64),
            "total_count_weighted": np.bincount(
                matrix.indices, weights=matrix.data * w_count_entry, minlength=n_terms
            ),
            "idf": np.asarray(idf, dtype=np.float64),
        }
    )
    return frame


def _top(scores: np.ndarray, top_k: int) -> np.ndarray:
    """Column indices of the ``top_k`` positive scores, highest first, ties by column (= term) order."""
    candidates = np.flatnonzero(scores > 0)
    order = np.lexsort((candidates, -scores[candidates]))
    return candidates[order[:top_k]]


def _examples(
    weighted: sp.csr_matrix, counts: sp.csr_matrix, columns: np.ndarray, row_ids: np.ndarray, n: int
) -> dict[int, str]:
    """Up to ``n`` answer ids per column where the weight (else the count) is highest; ties in row order."""
    result: dict[int, str] = {}
    if len(columns) == 0:
        return result
    by_weight = weighted[:, columns].tocsc()
    by_count = counts[:, columns].tocsc()
    for position, column in enumerate(columns):
        source = by_weight if by_weight.indptr[position + 1] > by_weight.indptr[position] else by_count
        start, stop = source.indptr[position], source.indptr[position + 1]
        values = source.data[start:stop]
        rows = source.indices[start:stop]
        if len(values) > n:
            # Only entries at or above the n-th largest value can be chosen; sort just those.
            threshold = np.partition(values, len(values) - n)[len(values) - n]
            chosen = values >= threshold
            values, rows = values[chosen], rows[chosen]
        order = np.lexsort((rows, -values))[:n]
        result[int(column)] = EXAMPLE_SEPARATOR.join(str(row_ids[r]) for r in rows[order])
    return result


def keyword_table(
    counts: Counts, weighted: sp.csr_matrix, idf: np.ndarray, top_k: int, n_examples: int = 3
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

    Returns
    -------
    pandas.DataFrame
        Columns :data:`KEYWORD_COLUMNS`; first the ``mean_weight`` ranking,
        then the ``doc_share`` ranking, each ranked 1..k. Scores are
        mean_weight_j = Σ_i w_i x_ij / Σ_i w_i and
        doc_share_j = Σ_{i: c_ij > 0} w_i / Σ_i w_i.
    """
    stats = term_statistics(counts, weighted, idf)
    parts = []
    chosen = {ranking: _top(stats[ranking].to_numpy(), top_k) for ranking in RANKINGS}
    needed = np.unique(np.concatenate(list(chosen.values()))) if chosen else np.empty(0, dtype=np.int64)
    examples = _examples(weighted, counts.matrix, needed, counts.row_ids, n_examples)
    for ranking in RANKINGS:
        columns = chosen[ranking]
        part = stats.iloc[columns].copy()
        part.insert(0, "rank", np.arange(1, len(columns) + 1, dtype=np.int64))
        part.insert(0, "ranking", ranking)
        part["examples"] = [examples.get(int(c), "") for c in columns]
        parts.append(part)
    table = pd.concat(parts, ignore_index=True) if parts else pd.DataFrame(columns=list(KEYWORD_COLUMNS))
    return table[list(KEYWORD_COLUMNS)]
