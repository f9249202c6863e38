"""TF-IDF weighting of a sparse count matrix: the pure arithmetic, no text.

Counting (``counting.py``) turns term lists into a CSR count matrix; this
module re-weights such a matrix, in the spirit of scikit-learn's split between
``CountVectorizer`` and ``TfidfTransformer``. Everything works on the CSR
arrays directly: document frequency from the column indices
(``np.bincount``), term-frequency transforms and idf by scaling ``data`` in
place, normalisation row by row through ``indptr``. Nothing densifies.

A weight is the product of three parts, applied in this order::

    w_ij = norm_i( tf(c_ij) * idf_j )

where ``c_ij`` is the count of term ``j`` in answer ``i``. Only stored
(non-zero) counts are transformed, so every formula below holds for
``c_ij > 0`` and an absent term keeps weight 0.

Term frequency (``tf``)
    ``raw``        c
    ``relative``   c / len_i, with len_i the number of terms of answer i
                   *before* document-frequency filters (its share of the answer)
    ``log``        1 + log_b(c)
    ``binary``     1
    ``augmented``  0.5 + 0.5 * c / max_j c_ij  (max over the answer's row)
    ``logave``     (1 + log_b c) / (1 + log_b avg_i), avg_i the mean count over
                   the answer's stored terms (SMART ``L``)

Inverse document frequency (``idf``), with N the number of answers and df_j
the number of answers containing term j — or, with respondent weights w_i,
N = sum_i w_i and df_j = sum_{i: c_ij > 0} w_i:
    ``none``    1
    ``log``     log_b(N / df)
    ``smooth``  ln((1 + N) / (1 + df)) + 1  (scikit-learn's ``smooth_idf=True``;
                always the natural logarithm)
    ``prob``    max(0, log_b((N - df) / df))  (0 when df >= N)

A term with df = 0 (no answer with positive weight contains it) gets idf 0.
``idf_add`` adds a constant to every idf (scikit-learn's
``smooth_idf=False`` is ``idf="log", base="e", idf_add=1``).

Normalisation (``norm``), per answer over its terms:
    ``l2``    x / sqrt(sum x^2)
    ``l1``    x / sum |x|
    ``none``  x
An answer with no terms stays a row of zeros.

The log base b is one per scheme (``base``: "e", "2" or "10"). From study
settings it follows the idf choice (``log10`` -> 10, ``log2`` -> 2, otherwise
e, matching scikit-learn's ``sublinear_tf``); the SMART shorthand uses base 10
as in the worked examples of Manning, Raghavan & Schütze (2008), ch. 6.

SMART letters (Manning, Raghavan & Schütze 2008, Fig. 6.15):
    tf:    ``n`` raw, ``l`` log, ``a`` augmented, ``b`` binary, ``L`` logave
    idf:   ``n`` none, ``t`` log (log N/df), ``p`` prob
    norm:  ``n`` none, ``c`` cosine (l2)
Other systems give the letters other formulas. gensim 4.4 ``TfidfModel``
(``smartirs``): every logarithm is base 2; its ``t`` is log2((N + 1) / df)
and its ``f`` is log2(N / df) (= our ``t`` in base 2); its ``x`` aliases
``n``; ``d`` (double log) and the pivoted norms ``u``/``b`` have no
counterpart here. Its default (``smartirs=None``) is raw tf × log2(N / df),
L2. gensim also leaves out of its output every entry whose idf is within
1e-12 of 0 (a term in every document) and every normalised weight within
1e-12 of 0; our matrices store no zero entries either but keep every term's
column.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Literal

import numpy as np
import scipy.sparse as sp

from workbench.core.errors import SettingsError
from workbench.core.settings import Weigh

TfKind = Literal["raw", "relative", "log", "binary", "augmented", "logave"]
IdfKind = Literal["none", "log", "smooth", "prob"]
NormKind = Literal["l2", "l1", "none"]
Base = Literal["e", "2", "10"]

TF_KINDS: tuple[str, ...] = ("raw", "relative", "log", "binary", "augmented", "logave")
IDF_KINDS: tuple[str, ...] = ("none", "log", "smooth", "prob")
NORM_KINDS: tuple[str, ...] = ("l2", "l1", "none")
BASES: tuple[str, ...] = ("e", "2", "10")

#: SMART letters as tabulated by Manning, Raghavan & Schütze (2008), Fig. 6.15.
SMART_TF: dict[str, str] = {"n": "raw", "l": "log", "a": "augmented", "b": "binary", "L": "logave"}
SMART_IDF: dict[str, str] = {"n": "none", "t": "log", "p": "prob"}
SMART_NORM: dict[str, str] = {"n": "none", "c": "l2"}

#: The study's ``weigh.idf`` choice -> (idf kind, log base).
SETTINGS_IDF: dict[str, tuple[str, str]] = {
    "none": ("none", "e"),
    "log10": ("log", "10"),
    "ln": ("log", "e"),
    "log2": ("log", "2"),
    "smooth": ("smooth", "e"),
    "prob": ("prob", "e"),
}


def _log_name(base: str) -> str:
    return {"e": "ln", "2": "log2", "10": "log10"}[base]


def tf_formula(kind: str, base: str = "e") -> str:
    """The formula of one term-frequency option, as text."""
    log = _log_name(base)
    return {
        "raw": "tf = c",
        "relative": "tf = c / len, len = number of terms in the answer before document-frequency filters",
        "log": f"tf = 1 + {log}(c) for c > 0",
        "binary": "tf = 1 if c > 0",
        "augmented": "tf = 0.5 + 0.5 * c / max c over the answer's terms",
        "logave": f"tf = (1 + {log}(c)) / (1 + {log}(mean c over the answer's terms))",
    }[kind]


def idf_formula(kind: str, base: str = "e", add: float = 0.0) -> str:
    """The formula of one inverse-document-frequency option, as text."""
    log = _log_name(base)
    text = {
        "none": "idf = 1",
        "log": f"idf = {log}(N / df)",
        "smooth": "idf = ln((1 + N) / (1 + df)) + 1",
        "prob": f"idf = max(0, {log}((N - df) / df))",
    }[kind]
    return f"{text} + {add:g}" if add else text


def norm_formula(kind: str) -> str:
    """The formula of one normalisation option, as text."""
    return {
        "l2": "w = x / sqrt(sum of x^2 over the answer's terms)",
        "l1": "w = x / sum of |x| over the answer's terms",
        "none": "w = x (no normalisation)",
    }[kind]


def _smart_valid(table: dict[str, str], part: str) -> str:
    if part == "tf":
        formulas = {k: tf_formula(v, "10").removeprefix("tf = ") for k, v in table.items()}
    elif part == "idf":
        formulas = {k: idf_formula(v, "10").removeprefix("idf = ") for k, v in table.items()}
    else:
        formulas = {"n": "none", "c": "cosine, x / sqrt(sum x^2)"}
    return ", ".join(f"'{k}' ({formulas[k]})" for k in table)


@dataclass(frozen=True)
class WeightingScheme:
    """One TF-IDF weighting scheme; every option is validated here and nowhere else.

    Parameters
    ----------
    tf
        Term-frequency transform: ``raw`` c; ``relative`` c / len (len = the
        answer's number of terms before df filters); ``log`` 1 + log_b c;
        ``binary`` 1; ``augmented`` 0.5 + 0.5·c / max c (row max);
        ``logave`` (1 + log_b c) / (1 + log_b mean c) (row mean over stored terms).
    idf
        ``none`` 1; ``log`` log_b(N / df); ``smooth`` ln((1 + N)/(1 + df)) + 1;
        ``prob`` max(0, log_b((N − df)/df)). N and df are sums of respondent
        weights when weights are given.
    norm
        ``l2`` x / sqrt(Σ x²); ``l1`` x / Σ|x|; ``none``.
    base
        Log base b of ``log``/``logave`` tf and ``log``/``prob`` idf: ``"e"``,
        ``"2"`` or ``"10"`` (numbers 2, 10 and ``math.e`` are accepted).
    idf_add
        Constant added to every idf (1 reproduces scikit-learn's unsmoothed idf
        ln(N/df) + 1 with ``idf="log", base="e"``).
    smart
        The SMART letters the scheme was parsed from, if any (for ``describe``).
    """

    tf: TfKind = "raw"
    idf: IdfKind = "smooth"
    norm: NormKind = "l2"
    base: Base = "e"
    idf_add: float = 0.0
    smart: str | None = field(default=None, compare=False)

    def __post_init__(self) -> None:
        base = self.base
        if isinstance(base, (int, float)) and not isinstance(base, bool):
            base = {2.0: "2", 10.0: "10", math.e: "e"}.get(float(base), str(base))
            object.__setattr__(self, "base", base)
        problems = []
        if self.tf not in TF_KINDS:
            problems.append(f"unknown tf '{self.tf}'; valid: {', '.join(TF_KINDS)}")
        if self.idf not in IDF_KINDS:
            problems.append(f"unknown idf '{self.idf}'; valid: {', '.join(IDF_KINDS)}")
        if self.norm not in NORM_KINDS:
            problems.append(f"unknown norm '{self.norm}'; valid: {', '.join(NORM_KINDS)}")
        if self.base not in BASES:
            problems.append(f"unknown log base '{self.base}'; valid: e, 2, 10")
        if not math.isfinite(self.idf_add):
            problems.append(f"idf_add must be a finite number, got {self.idf_add}")
        if problems:
            raise SettingsError("weighting scheme: " + "; ".join(problems))

    # ------------------------------------------------------------------ builders

    @classmethod
    def from_smart(cls, letters: str, base: str | float = "10") -> WeightingScheme:
        """Parse the three-letter SMART document triple (Manning et al. 2008, Fig. 6.15).

        tf letters: ``n`` c, ``l`` 1 + log c, ``a`` 0.5 + 0.5·c/max c,
        ``b`` 1 if c > 0, ``L`` (1 + log c)/(1 + log mean c);
        idf letters: ``n`` 1, ``t`` log(N/df), ``p`` max(0, log((N − df)/df));
        norm letters: ``n`` none, ``c`` cosine x / sqrt(Σ x²).
        Logarithms are base 10 as in the book's worked examples unless ``base``
        says otherwise. Pivoted (``u``) and byte-size (``b``) normalisation are
        not offered.

        Raises
        ------
        SettingsError
            On a wrong length, a query triple (``lnc.ltc``) or an unknown letter;
            the message lists the valid letters and their formulas.
        """
        text = str(letters).strip()
        if "." in text:
            raise SettingsError(
                f"weigh.smart = '{text}' names a document and a query scheme; "
                f"give only the document triple, e.g. '{text.split('.')[0][:3]}'"
            )
        if len(text) != 3:
            raise SettingsError(
                f"weigh.smart = '{text}' must be three letters (tf, idf, normalisation), e.g. 'ltc' or 'nnc'"
            )
        t, d, n = text
        if t not in SMART_TF:
            raise SettingsError(
                f"weigh.smart = '{text}': unknown term-frequency letter '{t}'; valid: {_smart_valid(SMART_TF, 'tf')}"
            )
        if d not in SMART_IDF:
            raise SettingsError(
                f"weigh.smart = '{text}': unknown document-frequency letter '{d}'; "
                f"valid: {_smart_valid(SMART_IDF, 'idf')}"
            )
        if n not in SMART_NORM:
            extra = " (pivoted 'u' and byte-size 'b' normalisation are not offered)" if n in "ub" else ""
            raise SettingsError(
                f"weigh.smart = '{text}': unknown normalisation letter '{n}'{extra}; "
                f"valid: {_smart_valid(SMART_NORM, 'norm')}"
            )
        return cls(tf=SMART_TF[t], idf=SMART_IDF[d], norm=SMART_NORM[n], base=base, smart=text)  # type: ignore[arg-type]

    @classmethod
    def from_settings(cls, weigh: Weigh) -> WeightingScheme:
        """The scheme a study asks for: ``weigh.smart`` when set, else ``tf``/``idf``/``norm``.

        The log base follows ``weigh.idf``: 10 for ``log10``, 2 for ``log2``,
        e otherwise; a SMART triple uses base 10.
        """
        if weigh.smart:
            return cls.from_smart(weigh.smart)
        idf, base = SETTINGS_IDF[weigh.idf]
        return cls(tf=weigh.tf, idf=idf, norm=weigh.norm, base=base)

    # ------------------------------------------------------------------ text

    def formulas(self) -> dict[str, str]:
        """The three formulas of this scheme, keyed ``tf``, ``idf``, ``norm``."""
        return {
            "tf": tf_formula(self.tf, self.base),
            "idf": idf_formula(self.idf, self.base, self.idf_add),
            "norm": norm_formula(self.norm),
        }

    def describe(self) -> str:
        """A few lines stating the scheme and its exact formulas."""
        head = f"weighting: tf={self.tf}, idf={self.idf}, norm={self.norm}, log base {self.base}"
        if self.smart:
            head += f" (SMART '{self.smart}', letters as in Manning, Raghavan & Schütze 2008, Fig. 6.15)"
        f = self.formulas()
        return "\n".join(
            [
                head,
                f"  {f['tf']}  (c = count of the term in the answer; c = 0 stays 0)",
                f"  {f['idf']}  (N = answers, df = answers containing the term; "
                "both are sums of respondent weights when weights are given; df = 0 gives idf 0)",
                f"  {f['norm']}",
                "  weight = norm(tf * idf)",
            ]
        )


# --------------------------------------------------------------------------- CSR helpers

#: Entries per block of rows: temporaries stay a few MB however large the corpus.
BLOCK_ENTRIES = 1 << 20


def _log(values: np.ndarray, base: str, out: np.ndarray | None = None) -> np.ndarray:
    if base == "10":
        return np.log10(values, out=out)
    if base == "2":
        return np.log2(values, out=out)
    return np.log(values, out=out)


def row_blocks(indptr: np.ndarray, entries: int | None = None) -> list[tuple[int, int, int, int]]:
    """Split the rows into consecutive blocks of about ``entries`` stored entries.

    Returns ``(first_row, end_row, first_entry, end_entry)`` per block. The
    CSR passes below work block by block, so their temporary arrays are
    bounded by the block size instead of the number of stored entries, and a
    block stays in cache between the steps applied to it.
    """
    n_rows = len(indptr) - 1
    if n_rows <= 0:
        return []
    entries = entries or BLOCK_ENTRIES
    nnz = int(indptr[-1])
    cuts = np.searchsorted(indptr, np.arange(entries, nnz, entries), side="left")
    bounds = np.unique(np.concatenate(([0], np.clip(cuts, 0, n_rows), [n_rows])))
    return [(int(r0), int(r1), int(indptr[r0]), int(indptr[r1])) for r0, r1 in zip(bounds[:-1], bounds[1:])]


def _reduce(values: np.ndarray, local_indptr: np.ndarray, ufunc: np.ufunc, empty: float) -> np.ndarray:
    """Reduce ``values`` per row of one block; rows without entries get ``empty``.

    ``np.ufunc.reduceat`` mishandles empty segments (it returns the next
    element), so when some row is empty only the non-empty rows are reduced:
    between two non-empty starts lie exactly the entries of the first row.
    """
    sizes = np.diff(local_indptr)
    if values.size and sizes.all():
        return ufunc.reduceat(values, local_indptr[:-1]).astype(np.float64, copy=False)
    out = np.full(len(sizes), empty, dtype=np.float64)
    if values.size:
        nonempty = sizes > 0
        out[nonempty] = ufunc.reduceat(values, local_indptr[:-1][nonempty])
    return out


def row_reduce(matrix: sp.csr_matrix, values: np.ndarray, ufunc: np.ufunc, empty: float = 0.0) -> np.ndarray:
    """Reduce ``values`` (one per stored entry) row by row with ``ufunc`` via ``indptr``; empty rows get ``empty``."""
    indptr = matrix.indptr
    parts = [_reduce(values[a:b], indptr[r0 : r1 + 1] - a, ufunc, empty) for r0, r1, a, b in row_blocks(indptr)]
    return np.concatenate(parts) if parts else np.empty(0, dtype=np.float64)


def _tf_block(data: np.ndarray, local_indptr: np.ndarray, scheme: WeightingScheme, lengths: np.ndarray | None) -> None:
    """Term-frequency transform of one block's stored counts, in place."""
    kind = scheme.tf
    if kind == "raw":
        return
    if kind == "binary":
        data[:] = 1.0
        return
    if kind == "log":
        _log(data, scheme.base, out=data)
        data += 1.0
        return
    sizes = np.diff(local_indptr)
    if kind == "relative":
        totals = _reduce(data, local_indptr, np.add, 0.0) if lengths is None else lengths.astype(np.float64)
        data *= np.repeat(np.divide(1.0, totals, out=np.zeros_like(totals), where=totals > 0), sizes)
    elif kind == "augmented":
        row_max = _reduce(data, local_indptr, np.maximum, 1.0)
        data *= np.repeat(0.5 / row_max, sizes)
        data += 0.5
    elif kind == "logave":
        mean = _reduce(data, local_indptr, np.add, 1.0) / np.maximum(sizes, 1)
        denominator = 1.0 + _log(mean, scheme.base)
        _log(data, scheme.base, out=data)
        data += 1.0
        data *= np.repeat(1.0 / denominator, sizes)


def _norm_block(data: np.ndarray, local_indptr: np.ndarray, norm: str) -> None:
    """Normalise each row of one block, in place; rows of norm 0 stay as they are."""
    if norm == "none":
        return
    if norm == "l2":
        sizes_of_rows = np.sqrt(_reduce(np.square(data), local_indptr, np.add, 0.0))
    else:
        sizes_of_rows = _reduce(np.abs(data), local_indptr, np.add, 0.0)
    inverse = np.divide(1.0, sizes_of_rows, out=np.ones_like(sizes_of_rows), where=sizes_of_rows > 0)
    data *= np.repeat(inverse, np.diff(local_indptr))


def column_sums(
    matrix: sp.csr_matrix, row_weights: np.ndarray | None = None, binary: bool = False
) -> np.ndarray:
    """Σ_i w_i f(c_ij) for every column j, from the column indices (``np.bincount``), block by block.

    ``f(c) = c``, or ``1 if c != 0`` with ``binary``; ``w_i = 1`` without
    ``row_weights``. No temporary grows with the number of stored entries.
    """
    matrix = _as_csr(matrix)
    n_cols = matrix.shape[1]
    out = np.zeros(n_cols, dtype=np.float64)
    weights = None if row_weights is None else np.asarray(row_weights, dtype=np.float64)
    indptr, indices, data = matrix.indptr, matrix.indices, matrix.data
    for r0, r1, a, b in row_blocks(indptr, max(BLOCK_ENTRIES, n_cols)):
        columns = indices[a:b]
        values = data[a:b]
        per_entry = None if weights is None else np.repeat(weights[r0:r1], np.diff(indptr[r0 : r1 + 1]))
        if binary:
            present = values != 0
            if not present.all():
                columns = columns[present]
                per_entry = None if per_entry is None else per_entry[present]
            out += np.bincount(columns, weights=per_entry, minlength=n_cols)
        else:
            amount = values.astype(np.float64) if per_entry is None else values * per_entry
            out += np.bincount(columns, weights=amount, minlength=n_cols)
    return out


def document_frequency(matrix: sp.csr_matrix, weights: np.ndarray | None = None) -> np.ndarray:
    """Document frequency of every column, from the column indices of the stored entries.

    df_j = #{i : c_ij > 0}, or with weights df_j = Σ_{i : c_ij > 0} w_i.
    Explicit zeros are not counted. The matrix must hold no duplicate entries
    (canonical CSR, as ``counting`` builds it).
    """
    matrix = _as_csr(matrix)
    if weights is None and np.count_nonzero(matrix.data) == matrix.nnz:
        return np.bincount(matrix.indices, minlength=matrix.shape[1]).astype(np.float64)
    return column_sums(matrix, weights, binary=True)


def idf_from_df(df: np.ndarray, n_documents: float, scheme: WeightingScheme) -> np.ndarray:
    """Inverse document frequency of every term from its df and the number of answers.

    ``none`` 1; ``log`` log_b(N/df); ``smooth`` ln((1 + N)/(1 + df)) + 1;
    ``prob`` max(0, log_b((N − df)/df)); then ``+ idf_add``. A term with
    df = 0 gets 0 (it has no entry to weight), before ``idf_add``.
    """
    df = np.asarray(df, dtype=np.float64)
    n = float(n_documents)
    if scheme.idf == "none":
        idf = np.ones_like(df)
    elif scheme.idf == "smooth":
        idf = np.log((1.0 + n) / (1.0 + df)) + 1.0
        idf[df <= 0] = 0.0
    else:
        idf = np.zeros_like(df)
        present = df > 0
        if scheme.idf == "log":
            idf[present] = _log(n / df[present], scheme.base)
        else:  # prob
            usable = present & (df < n)
            idf[usable] = np.maximum(0.0, _log((n - df[usable]) / df[usable], scheme.base))
    if scheme.idf_add:
        idf = idf + scheme.idf_add
    return idf


def apply_tf(matrix: sp.csr_matrix, scheme: WeightingScheme, lengths: np.ndarray | None = None) -> None:
    """Replace the stored counts of ``matrix`` by their term-frequency weights, in place.

    ``matrix.data`` must be floating point. ``lengths`` (terms per answer
    before filters) is the denominator of ``relative`` tf; without it the row
    sums are used. Formulas: see the module docstring.
    """
    indptr = matrix.indptr
    for r0, r1, a, b in row_blocks(indptr):
        _tf_block(matrix.data[a:b], indptr[r0 : r1 + 1] - a, scheme, None if lengths is None else lengths[r0:r1])


def normalise_rows(matrix: sp.csr_matrix, norm: str) -> None:
    """Normalise each row of ``matrix`` in place: ``l2`` x / sqrt(Σ x²), ``l1`` x / Σ|x|, ``none``.

    Rows whose norm is 0 are left as they are.
    """
    indptr = matrix.indptr
    for r0, r1, a, b in row_blocks(indptr):
        _norm_block(matrix.data[a:b], indptr[r0 : r1 + 1] - a, norm)


class TfidfWeighting:
    """Fit document frequencies on a count matrix, then weight count matrices.

    Settings are stored as given; learned state has a trailing underscore.

    Attributes
    ----------
    n_documents_ : float
        N = number of rows, or the sum of the respondent weights.
    df_ : numpy.ndarray or None
        df_j = rows containing term j, or the sum of their weights; ``None``
        when the scheme has no idf (it is not needed then).
    idf_ : numpy.ndarray
        idf_j from ``idf_from_df(df_, n_documents_, scheme)``.
    """

    def __init__(self, scheme: WeightingScheme) -> None:
        self.scheme = scheme

    def fit(self, counts: sp.csr_matrix, weights: np.ndarray | None = None) -> TfidfWeighting:
        """Learn N, df and idf from ``counts`` (rows = answers) and optional row weights."""
        counts = _as_csr(counts)
        if weights is None:
            self.n_documents_ = float(counts.shape[0])
        else:
            weights = np.asarray(weights, dtype=np.float64)
            if weights.shape != (counts.shape[0],):
                raise ValueError(f"{len(weights)} weights for {counts.shape[0]} rows")
            self.n_documents_ = float(weights.sum())
        if self.scheme.idf == "none":
            # idf = 1 (+ idf_add) whatever df is; skip the pass over the indices.
            self.df_ = None
            self.idf_ = np.full(counts.shape[1], 1.0 + self.scheme.idf_add)
        else:
            self.df_ = document_frequency(counts, weights)
            self.idf_ = idf_from_df(self.df_, self.n_documents_, self.scheme)
        return self

    def transform(self, counts: sp.csr_matrix, lengths: np.ndarray | None = None) -> sp.csr_matrix:
        """Return the weighted copy of ``counts``: norm(tf(c) · idf), float64 CSR without stored zeros."""
        return weight_matrix(counts, self.scheme, self.idf_, lengths)

    def fit_transform(
        self, counts: sp.csr_matrix, weights: np.ndarray | None = None, lengths: np.ndarray | None = None
    ) -> sp.csr_matrix:
        """``fit`` then ``transform`` on the same matrix."""
        return self.fit(counts, weights).transform(counts, lengths)


def weight_matrix(
    counts: sp.csr_matrix, scheme: WeightingScheme, idf: np.ndarray, lengths: np.ndarray | None = None
) -> sp.csr_matrix:
    """Weight a count matrix with a given idf vector: w_ij = norm_i(tf(c_ij) · idf_j).

    The counts are copied once into a float64 CSR matrix; then, block of rows
    by block of rows, tf, idf and the normalisation scale its ``data`` in
    place. Entries that end up 0 (e.g. idf 0 for a term in every answer) are
    not stored.

    Parameters
    ----------
    counts
        Counts c_ij, rows = answers.
    scheme
        Supplies tf, norm and the log base (its idf kind is ignored here:
        ``idf`` is given).
    idf
        One value per column.
    lengths
        Terms per answer before filters, the denominator of ``relative`` tf.
    """
    counts = _as_csr(counts)
    idf = np.asarray(idf, dtype=np.float64)
    if counts.shape[1] != len(idf):
        raise ValueError(f"matrix has {counts.shape[1]} columns but idf has {len(idf)} values")
    weighted = sp.csr_matrix(
        (counts.data.astype(np.float64, copy=True), counts.indices.copy(), counts.indptr.copy()),
        shape=counts.shape,
    )
    use_idf = not np.all(idf == 1.0)
    data, indices, indptr = weighted.data, weighted.indices, weighted.indptr
    for r0, r1, a, b in row_blocks(indptr):
        block = data[a:b]
        local = indptr[r0 : r1 + 1] - a
        _tf_block(block, local, scheme, None if lengths is None else lengths[r0:r1])
        if use_idf:
            block *= idf[indices[a:b]]
        _norm_block(block, local, scheme.norm)
    if np.count_nonzero(data) < weighted.nnz:
        weighted.eliminate_zeros()
    return weighted


def _as_csr(matrix: sp.spmatrix) -> sp.csr_matrix:
    if sp.issparse(matrix) and matrix.format == "csr":
        return matrix
    if sp.issparse(matrix):
        return sp.csr_matrix(matrix)
    raise TypeError("expected a scipy sparse matrix; termloom never weights a dense corpus matrix")


# --------------------------------------------------------------------------- vocabulary filters


def _threshold(value: int | float, n_documents: int) -> float:
    return float(value) if isinstance(value, int) else float(value) * n_documents


@dataclass(frozen=True)
class VocabularyFilter:
    """Which terms stay in a matrix, by document frequency and vocabulary size.

    Parameters
    ----------
    min_df, max_df
        An ``int`` is a number of answers, a ``float`` in [0, 1] a share of
        the N answers; a term stays when ``min <= df <= max`` (df = number of
        answers containing it, unweighted: the evidence behind a term does not
        grow with a respondent's weight).
    max_terms
        Keep at most this many terms: the highest total counts, ties broken by
        the term itself (alphabetical), so the choice is the same on every run.
    """

    min_df: int | float = 1
    max_df: int | float = 1.0
    max_terms: int | None = None

    def __post_init__(self) -> None:
        for name in ("min_df", "max_df"):
            value = getattr(self, name)
            if isinstance(value, bool) or not isinstance(value, (int, float)):
                raise SettingsError(f"weigh.{name} = {value!r} must be a number: a count (e.g. 2) or a share (e.g. 0.01)")
            if isinstance(value, float) and not (0.0 <= value <= 1.0):
                raise SettingsError(
                    f"weigh.{name} = {value} is a share and must lie in [0, 1]; write a whole number for a count of answers"
                )
            if isinstance(value, int) and value < 0:
                raise SettingsError(f"weigh.{name} = {value} must not be negative")
        if type(self.min_df) is type(self.max_df) and self.max_df < self.min_df:
            raise SettingsError(
                f"weigh.max_df = {self.max_df} is below weigh.min_df = {self.min_df}, so no term could stay; "
                "raise max_df or lower min_df"
            )
        if self.max_terms is not None and self.max_terms < 1:
            raise SettingsError(f"weigh.max_terms = {self.max_terms} must be at least 1 (or left out)")

    @classmethod
    def from_settings(cls, weigh: Weigh) -> VocabularyFilter:
        return cls(min_df=weigh.min_df, max_df=weigh.max_df, max_terms=weigh.max_terms)

    def bounds(self, n_documents: int) -> tuple[float, float]:
        """(lowest, highest) document frequency a term may have among ``n_documents`` answers."""
        return _threshold(self.min_df, n_documents), _threshold(self.max_df, n_documents)

    def select(self, df: np.ndarray, totals: np.ndarray, n_documents: int) -> np.ndarray:
        """Indices (ascending) of the columns that stay.

        Columns must be in term order, so that breaking a tie in ``totals`` by
        column index breaks it by term.
        """
        low, high = self.bounds(n_documents)
        keep = np.flatnonzero((df >= low) & (df <= high))
        if self.max_terms is not None and keep.size > self.max_terms:
            # lexsort: last key is primary -> highest total first, then column (= term) order.
            order = np.lexsort((keep, -np.asarray(totals, dtype=np.float64)[keep]))
            keep = np.sort(keep[order[: self.max_terms]])
        return keep

    def describe(self) -> str:
        def side(value: int | float) -> str:
            return f"{value} answer(s)" if isinstance(value, int) else f"{value * 100:g}% of the answers"

        text = f"vocabulary: a term stays when in at least {side(self.min_df)} and at most {side(self.max_df)}"
        if self.max_terms is not None:
            text += f"; at most {self.max_terms} terms by total count (ties: alphabetical)"
        return text
