"""Term lists -> sparse count matrices, per language and pooled.

Counting knows nothing about weighting (that is ``tfidf.py``). A count
matrix is CSR with one row per answer and one column per term; the
vocabulary is sorted (Python string order), so the same answers give the same
columns on every run and machine.

The tokens of all answers are flattened once and factorised with a hash table
(``pandas.factorize``); only the vocabulary is sorted, and the CSR arrays are
built from the codes and the answer lengths without a Python loop per token.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from itertools import chain

import numpy as np
import pandas as pd
import scipy.sparse as sp

from workbench.core.counts import Counts
from workbench.core.errors import InputError
from workbench.core.settings import POOLED  # re-exported: counting.POOLED is used across the core
from workbench.core.tfidf import VocabularyFilter, column_sums, document_frequency, row_reduce


#: Counts per answer never approach 2**31; 4 bytes per stored entry instead of 8.
COUNT_DTYPE = np.int32


def _index_dtype(n_columns: int) -> type:
    return np.int32 if n_columns < 2**31 - 1 else np.int64


def tag(language: str, term: str) -> str:
    """The pooled name of a term that no glossary concept covers: ``"de:preis"``."""
    return f"{language}:{term}"


def count_terms(
    term_lists: Sequence[Sequence[str]],
    row_ids: Sequence[str],
    language: str,
    weights: np.ndarray | None = None,
) -> Counts:
    """Count the terms of each answer into a CSR matrix with a sorted vocabulary.

    Parameters
    ----------
    term_lists
        One list of terms per answer (an empty list gives an empty row).
    row_ids
        The answer id of each row.
    language
        Label stored in the result.
    weights
        One respondent weight per answer; all ones when omitted.

    Returns
    -------
    Counts
        ``matrix[i, j]`` = c_ij, the number of times term j occurs in answer i;
        ``lengths[i]`` = Σ_j c_ij, the answer's number of terms.
    """
    n_rows = len(term_lists)
    lengths = np.fromiter(map(len, term_lists), dtype=np.int64, count=n_rows)
    flat = np.fromiter(chain.from_iterable(term_lists), dtype=object, count=int(lengths.sum()))
    codes, uniques = pd.factorize(flat, sort=False)
    _check_text(codes, uniques, lengths, row_ids)
    # Sorting the vocabulary (small) instead of the tokens (large): rank maps a
    # first-seen code to its place in sorted order.
    order = np.argsort(np.asarray(uniques, dtype=object), kind="stable")
    index_dtype = _index_dtype(len(uniques))
    rank = np.empty(len(uniques), dtype=index_dtype)
    rank[order] = np.arange(len(uniques), dtype=index_dtype)
    terms = np.asarray(uniques, dtype=object)[order]
    indptr = np.zeros(n_rows + 1, dtype=np.int64)
    np.cumsum(lengths, out=indptr[1:])
    del flat
    columns = rank[codes]
    del codes
    matrix = sp.csr_matrix((np.ones(len(columns), dtype=COUNT_DTYPE), columns, indptr), shape=(n_rows, len(terms)))
    matrix.sum_duplicates()
    ids = np.asarray(row_ids, dtype=object)
    w = np.ones(n_rows, dtype=np.float64) if weights is None else np.asarray(weights, dtype=np.float64)
    return Counts(matrix=matrix, terms=terms, row_ids=ids, weights=w, language=language, lengths=lengths)


def _check_text(codes: np.ndarray, uniques: np.ndarray, lengths: np.ndarray, row_ids: Sequence[str]) -> None:
    """Every token must be a string; checked on the vocabulary, not per token."""
    bad_codes = [code for code, value in enumerate(uniques) if not isinstance(value, str)]
    missing = codes < 0
    if not bad_codes and not missing.any():
        return
    bad = missing | np.isin(codes, bad_codes)
    first_token = int(np.flatnonzero(bad)[0])
    first_row = int(np.searchsorted(np.cumsum(lengths), first_token, side="right"))
    raise InputError(
        f"{int(bad.sum()):,} terms are not text (None, NaN or a number; first in answer "
        f"'{row_ids[first_row]}'); re-run the terms stage"
    )


def select_columns(counts: Counts, keep: np.ndarray) -> Counts:
    """The same answers restricted to the columns ``keep`` (ascending indices).

    Works on the CSR arrays: a monotone column map keeps every row's indices
    sorted, and the new ``indptr`` is the running count of kept entries.
    """
    matrix = counts.matrix
    index_dtype = _index_dtype(len(keep))
    column_map = np.full(matrix.shape[1], -1, dtype=index_dtype)
    column_map[keep] = np.arange(len(keep), dtype=index_dtype)
    new_indices = column_map[matrix.indices]
    kept = new_indices >= 0
    kept_per_row = row_reduce(matrix, kept.astype(np.int32), np.add).astype(np.int64)
    indptr = np.zeros(matrix.shape[0] + 1, dtype=np.int64)
    np.cumsum(kept_per_row, out=indptr[1:])
    selected = sp.csr_matrix((matrix.data[kept], new_indices[kept], indptr), shape=(matrix.shape[0], len(keep)))
    return Counts(
        matrix=selected,
        terms=counts.terms[keep],
        row_ids=counts.row_ids,
        weights=counts.weights,
        language=counts.language,
        lengths=counts.lengths if counts.lengths is not None else _row_sums(matrix),
    )


def _row_sums(matrix: sp.csr_matrix) -> np.ndarray:
    return row_reduce(matrix, matrix.data, np.add).astype(np.int64)


@dataclass(frozen=True)
class FilterReport:
    """What a vocabulary filter did to one matrix."""

    language: str
    terms_before: int
    terms_after: int
    only_zero_weight: int
    empty_rows: int
    first_empty: str | None


def filter_counts(counts: Counts, vocabulary: VocabularyFilter) -> tuple[Counts, FilterReport]:
    """Apply the document-frequency filters and the vocabulary cap to one count matrix.

    df for the filters is unweighted (answers containing the term). When some
    respondent weights are 0, a term that occurs only in zero-weight answers is
    dropped as well: its weighted df is 0, so it has no defined idf and adds
    nothing to any weighted figure. Rows are never dropped; an answer left
    without terms stays as an empty row.
    """
    matrix = counts.matrix
    df = document_frequency(matrix)
    totals = column_sums(matrix)
    keep = vocabulary.select(df, totals, matrix.shape[0])
    only_zero = 0
    if (counts.weights == 0).any():
        weighted_df = document_frequency(matrix, counts.weights)
        positive = weighted_df[keep] > 0
        only_zero = int((~positive).sum())
        keep = keep[positive]
    filtered = select_columns(counts, keep)
    row_nnz = np.diff(filtered.matrix.indptr)
    empty = np.flatnonzero(row_nnz == 0)
    report = FilterReport(
        language=counts.language,
        terms_before=matrix.shape[1],
        terms_after=len(keep),
        only_zero_weight=only_zero,
        empty_rows=len(empty),
        first_empty=str(counts.row_ids[empty[0]]) if len(empty) else None,
    )
    return filtered, report


def pool_counts(
    per_language: Mapping[str, Counts],
    concepts: Mapping[tuple[str, str], str] | None = None,
    positions: Mapping[str, np.ndarray] | None = None,
) -> Counts:
    """One count matrix over the answers of every language.

    Parameters
    ----------
    per_language
        Unfiltered counts of each language.
    concepts
        ``{(language, term): concept}``. A mapped term is counted under its
        concept, so ``("de", "preis")`` and ``("fr", "prix")`` mapped to
        ``"price"`` share one column (counts add up when one answer holds
        several terms of a concept). A term without a concept keeps its
        language tag, ``"de:preis"``; without ``concepts`` every term does.
    positions
        For each language, the pooled row of each of its rows (together a
        permutation of 0..n-1, e.g. the answers' places in the input); by
        default languages follow each other in sorted order.

    Returns
    -------
    Counts
        Language ``"pooled"``; vocabulary sorted; weights and lengths carried over.
    """
    languages = sorted(per_language)
    names_per_language = []
    for language in languages:
        terms = per_language[language].terms
        if concepts:
            names = [concepts.get((language, t), tag(language, t)) for t in terms]
        else:
            names = [tag(language, t) for t in terms]
        names_per_language.append(names)
    vocabulary_list = sorted({name for names in names_per_language for name in names})
    column_of = {name: i for i, name in enumerate(vocabulary_list)}
    vocabulary = np.asarray(vocabulary_list, dtype=object)

    index_dtype = _index_dtype(len(vocabulary))
    indptr_parts = [np.zeros(1, dtype=np.int64)]
    indices_parts, data_parts = [], []
    offset = 0
    for language, names in zip(languages, names_per_language):
        matrix = per_language[language].matrix
        column_map = np.fromiter((column_of[name] for name in names), dtype=index_dtype, count=len(names))
        indices_parts.append(column_map[matrix.indices])
        data_parts.append(matrix.data)
        indptr_parts.append(matrix.indptr[1:].astype(np.int64) + offset)
        offset += matrix.nnz
    n_rows = sum(per_language[lang].matrix.shape[0] for lang in languages)
    matrix = sp.csr_matrix(
        (
            np.concatenate(data_parts) if data_parts else np.empty(0, dtype=COUNT_DTYPE),
            np.concatenate(indices_parts) if indices_parts else np.empty(0, dtype=index_dtype),
            np.concatenate(indptr_parts),
        ),
        shape=(n_rows, len(vocabulary)),
    )
    del data_parts, indices_parts
    matrix.sum_duplicates()
    row_ids = _concat([per_language[lang].row_ids for lang in languages], object)
    weights = _concat([per_language[lang].weights for lang in languages], np.float64)
    lengths = _concat(
        [
            per_language[lang].lengths if per_language[lang].lengths is not None else _row_sums(per_language[lang].matrix)
            for lang in languages
        ],
        np.int64,
    )
    if positions is not None:
        destination = _concat([np.asarray(positions[lang]) for lang in languages], np.int64)
        source = np.full(n_rows, -1, dtype=np.int64)
        if len(destination) == n_rows and destination.min(initial=0) >= 0 and destination.max(initial=-1) < n_rows:
            source[destination] = np.arange(n_rows, dtype=np.int64)
        if (source < 0).any():
            raise ValueError("pooled row positions must be a permutation of 0..n-1 over all languages' rows")
        matrix = matrix[source]
        row_ids, weights, lengths = row_ids[source], weights[source], lengths[source]
    return Counts(matrix=matrix, terms=vocabulary, row_ids=row_ids, weights=weights, language=POOLED, lengths=lengths)


def _concat(parts: list[np.ndarray], dtype: type) -> np.ndarray:
    return np.concatenate(parts).astype(dtype, copy=False) if parts else np.empty(0, dtype=dtype)
