"""A counted corpus: the sparse matrix every weighting, comparison and export starts from."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp


@dataclass
class Counts:
    """Term counts of one language (or the pooled corpus).

    ``matrix`` is CSR, rows aligned with ``row_ids`` (answer ids), columns with
    ``terms``; ``weights`` holds one respondent weight per row (all ones when
    the study has no weight column); ``lengths`` holds the number of terms of
    each answer before any document-frequency filter (``None`` means the row
    sums), the denominator of relative term frequency.
    """

    matrix: sp.csr_matrix
    terms: np.ndarray
    row_ids: np.ndarray
    weights: np.ndarray
    language: str
    lengths: np.ndarray | None = None

    def __post_init__(self) -> None:
        rows, cols = self.matrix.shape
        if rows != len(self.row_ids) or cols != len(self.terms) or rows != len(self.weights):
            raise ValueError(
                f"counts of '{self.language}' are misaligned: matrix {rows}x{cols}, "
                f"{len(self.row_ids)} row ids, {len(self.terms)} terms, {len(self.weights)} weights"
            )
        if self.lengths is not None and len(self.lengths) != rows:
            raise ValueError(f"counts of '{self.language}' are misaligned: {rows} rows, {len(self.lengths)} lengths")
