"""Duplicate answers: exact copies, one respondent repeating themselves, near-copies.

Answers are compared by their *duplicate key*: the cleaned text (placeholders
kept) through :func:`workbench.core.nonanswer.phrase_key` — casefolded, accents
and punctuation dropped, white space collapsed.

Which duplicates are suspicious
-------------------------------
Identical short answers from different people are ordinary survey behaviour:
twenty respondents writing "the staff were friendly" is a finding, not junk.
So only these are flagged (each links to the *first* occurrence, in input
order, through ``duplicate_of``):

``same_respondent_repeat``
    the same respondent gave the same answer (same key) to an earlier
    question. Any length: the repeat adds nothing the first copy does not.
``duplicate``
    the same key as an earlier answer to the same question by another
    respondent, **and** the key has at least ``clean.near_duplicate_min_chars``
    characters: long identical texts are pasted blocks (templates, campaign
    text, bots), not independent opinions.
``near_duplicate``
    keys of at least ``clean.near_duplicate_min_chars`` characters, in the
    same question or from the same respondent, whose normalised Indel
    similarity is at least ``clean.near_duplicate``::

        similarity(a, b) = 1 - indel(a, b) / (len(a) + len(b))

    where ``indel`` is the number of single-character insertions and
    deletions turning ``a`` into ``b`` (rapidfuzz ``Indel.normalized_similarity``).

Answers already flagged as non-answers are not searched (copies of junk are
junk already), and all three codes count as junk for weighting.

Blocking for near-duplicates
----------------------------
Comparing every pair is quadratic. Candidates come from MinHash with
locality-sensitive hashing (LSH) over character 4-gram shingles:

* each key's 4-grams are hashed with a fixed polynomial (so results do not
  depend on ``PYTHONHASHSEED``);
* :data:`PERMUTATIONS` = 32 multiply-shift hash functions
  ``h_i(x) = ((a_i x + b_i) mod 2^64) >> 32`` (fixed seeds) give the
  signature ``min_x h_i(x)`` per key; two keys agree on one signature row
  with probability equal to the Jaccard similarity ``J`` of their shingle sets;
* the signature is cut into :data:`BANDS` = 16 bands of 2 rows; keys sharing
  a band are candidates, so a pair is found with probability
  ``1 - (1 - J^2)^16`` — 0.99 at ``J = 0.5`` (three edits in a 40-character
  answer) and 0.30 at ``J = 0.15``;
* a candidate pair is dropped when the lengths alone rule it out
  (``|len a - len b| > (1 - threshold)(len a + len b)``). Each key is paired
  with at most :data:`MAX_CANDIDATES` earlier keys per band, and of all its
  candidates only the :data:`MAX_CHECKS` sharing the most bands (the most
  similar, in expectation) are checked with the exact similarity above.
  Both caps bound the work at 100,000 answers even when many answers share
  half their text.

``tests/test_clean_duplicates.py`` checks the recall of this blocking against
an exhaustive comparison (rapidfuzz ``process.cdist``).
"""

from __future__ import annotations

from collections.abc import Callable, Sequence

import numpy as np
import pandas as pd
from rapidfuzz import process
from rapidfuzz.distance import Indel

from workbench.core.nonanswer import phrase_key

SHINGLE = 4
PERMUTATIONS = 32
BANDS = 16
MAX_CANDIDATES = 8
MAX_CHECKS = 16
_BASE = 1_000_003
_MASK32 = (1 << 32) - 1

DUPLICATE_CODES = ("same_respondent_repeat", "duplicate", "near_duplicate")
MESSAGES = {
    "same_respondent_repeat": "same text as this respondent's answer {other}",
    "duplicate": "long text identical to answer {other}",
    "near_duplicate": "nearly identical (similarity {score:.2f}) to answer {other}",
}


def duplicate_key(text: str) -> str:
    """The comparison form of a cleaned answer (see the module docstring)."""
    return phrase_key(text)


#: ``progress(what, done, total)``: called between blocks of the near-duplicate search.
Progress = Callable[[str, int, int], None]


def _quiet(_what: str, _done: int, _total: int) -> None:
    return None


def _signatures(keys: Sequence[str], progress: Progress = _quiet) -> np.ndarray:
    """MinHash signatures, one row of :data:`PERMUTATIONS` uint64 values per key (vectorised)."""
    rng = np.random.default_rng(20240601)
    # Multiply-shift hashing (Dietzfelbinger et al. 1997): odd 64-bit a, any b,
    # h(x) = ((a x + b) mod 2**64) >> 32 — a universal family without a slow modulo.
    a = rng.integers(0, 2**63, size=PERMUTATIONS, dtype=np.uint64) * np.uint64(2) + np.uint64(1)
    b = rng.integers(0, 2**63, size=PERMUTATIONS, dtype=np.uint64)
    powers = np.array([_BASE**i & _MASK32 for i in range(SHINGLE - 1, -1, -1)], dtype=np.uint64)
    out = np.empty((len(keys), PERMUTATIONS), dtype=np.uint64)
    chunk = 500  # keys per pass: the (windows x permutations) temporaries stay near 50 MB
    for first in range(0, len(keys), chunk):
        if first % (100 * chunk) == 0:
            progress("hashing texts for near-duplicates", first, len(keys))
        part = [k.ljust(SHINGLE, "\0") for k in keys[first : first + chunk]]
        codes = np.frombuffer("".join(part).encode("utf-32-le"), dtype=np.uint32).astype(np.uint64)
        lengths = np.fromiter((len(k) for k in part), dtype=np.int64, count=len(part))
        ends = np.cumsum(lengths)
        windows = np.lib.stride_tricks.sliding_window_view(codes, SHINGLE)
        hashes = (windows * powers).sum(axis=1) & _MASK32
        # Keep windows that start in a key and end inside the same key.
        owner = np.repeat(np.arange(len(part)), lengths)[: len(hashes)]
        valid = np.arange(len(hashes)) + SHINGLE <= ends[owner]
        hashes, owner = hashes[valid], owner[valid]
        first_window = np.searchsorted(owner, np.arange(len(part)))
        # One row per hash function: reduceat runs along contiguous memory.
        # In place: one (permutations x windows) array instead of three (same uint64 arithmetic).
        values = np.multiply.outer(a, hashes)
        values += b[:, None]
        values >>= np.uint64(32)
        out[first : first + len(part)] = np.minimum.reduceat(values, first_window, axis=1).T
    return out


def find_near_duplicates(
    keys: Sequence[str], groups: Sequence[Sequence[object]], threshold: float, progress: Progress = _quiet
) -> dict[int, tuple[int, float]]:
    """Near-duplicate links among distinct keys.

    Parameters
    ----------
    keys
        Distinct duplicate keys, in order of first appearance.
    groups
        For each key, the labels it belongs to (question, respondent); two keys
        are compared only when they share a label.
    threshold
        Minimum normalised Indel similarity in [0, 1].

    Returns
    -------
    ``{later_index: (earlier_index, similarity)}`` — each key that is a
    near-duplicate of an earlier one, linked to the earliest such key.
    """
    n = len(keys)
    if n < 2:
        return {}
    bands = _band_buckets(_signatures(keys, progress))
    lengths = np.fromiter((len(k) for k in keys), dtype=np.int64, count=n)
    labels = [g if isinstance(g, set) else set(g) for g in groups]
    links: dict[int, tuple[int, float]] = {}
    # Candidates are gathered for a block of later keys at a time: every pair of a
    # key comes from its own bucket positions, so each block sees all of its keys'
    # candidates and the links are those of one global pass, in bounded memory.
    step = max(1024, _BLOCK_PAIRS // (BANDS * MAX_CANDIDATES))
    for lo in range(0, n, step):
        hi = min(n, lo + step)
        progress("comparing near-duplicate candidates", lo, n)
        later, earlier = _candidates(bands, lengths, lo, hi, 1.0 - threshold)
        _check(keys, labels, later, earlier, threshold, links)
    return links


#: Candidate pairs held at once (about 16 bytes each, several copies while sorting).
_BLOCK_PAIRS = 4_000_000


def _band_buckets(signatures: np.ndarray) -> list[tuple[np.ndarray, np.ndarray, np.ndarray]]:
    """Per band: keys sorted by bucket, and per key the start of its bucket there and its rank in it."""
    n = len(signatures)
    rows = PERMUTATIONS // BANDS
    out = []
    for band in range(BANDS):
        # The band's rows are 32-bit values: pack them into one 64-bit bucket id
        # (two rows exactly; more rows are folded by a multiply-xor).
        bucket = np.zeros(n, dtype=np.uint64)
        for row in range(band * rows, (band + 1) * rows):
            bucket = (bucket << np.uint64(32)) ^ signatures[:, row] if rows <= 2 else bucket * np.uint64(_BASE) ^ signatures[:, row]
        order = np.argsort(bucket, kind="stable")
        sorted_buckets = bucket[order]
        # rank of each key inside its bucket (keys in input order, stable sort)
        bucket_start = np.r_[0, np.flatnonzero(np.diff(sorted_buckets)) + 1]
        sizes = np.diff(np.r_[bucket_start, n])
        starts = np.repeat(bucket_start, sizes)
        position = np.empty(n, dtype=np.int64)
        position[order] = np.arange(n)
        # int32 is enough for positions below 2**31 and halves what the bands hold.
        index = np.int32 if n < 2**31 else np.int64
        out.append((order.astype(index), starts[position].astype(index), (position - starts[position]).astype(index)))
    return out


def _candidates(
    bands: list[tuple[np.ndarray, np.ndarray, np.ndarray]],
    lengths: np.ndarray,
    lo: int,
    hi: int,
    slack: float,
) -> tuple[np.ndarray, np.ndarray]:
    """Candidate pairs (later, earlier) for later keys in ``[lo, hi)``: each key's MAX_CHECKS best.

    Every key is paired with each of the first MAX_CANDIDATES earlier keys of its
    bucket in every band; pairs the lengths rule out are dropped; of the rest a
    key keeps the MAX_CHECKS sharing the most bands (the most similar, in
    expectation), ties by the earlier key.
    """
    n = len(lengths)
    found: list[np.ndarray] = []
    block = np.arange(lo, hi, dtype=np.int64)
    for order, start, rank in bands:
        block_rank, block_start = rank[lo:hi], start[lo:hi]
        # pair every key with each of the first MAX_CANDIDATES earlier keys of its bucket
        for offset in range(MAX_CANDIDATES):
            chosen = np.flatnonzero(block_rank > offset)
            if not len(chosen):
                break
            a_idx, b_idx = block[chosen], order[block_start[chosen] + offset].astype(np.int64)
            # Indel similarity >= t needs |len a - len b| <= (1 - t) (len a + len b).
            close = np.abs(lengths[a_idx] - lengths[b_idx]) <= slack * (lengths[a_idx] + lengths[b_idx])
            found.append(a_idx[close] * n + b_idx[close])
    if not found:
        return np.empty(0, dtype=np.int64), np.empty(0, dtype=np.int64)
    pairs, shared = np.unique(np.concatenate(found), return_counts=True)
    later, earlier = np.divmod(pairs, n)
    # Keep each key's MAX_CHECKS candidates that share the most bands: sharing
    # more bands means a higher Jaccard similarity, so true near-copies come first.
    order = np.lexsort((earlier, -shared, later))
    later, earlier = later[order], earlier[order]
    group_start = np.r_[0, np.flatnonzero(np.diff(later)) + 1]
    rank = np.arange(len(later)) - np.repeat(group_start, np.diff(np.r_[group_start, len(later)]))
    keep = rank < MAX_CHECKS
    return later[keep], earlier[keep]


def _check(
    keys: Sequence[str],
    labels: list[set[object]],
    later: np.ndarray,
    earlier: np.ndarray,
    threshold: float,
    links: dict[int, tuple[int, float]],
) -> None:
    """Exact similarity of the candidate pairs; link each later key to the earliest it matches."""
    if not len(later):
        return
    # Exact similarity of every kept pair in one C++ call.
    scores = process.cpdist(
        [keys[i] for i in later.tolist()],
        [keys[j] for j in earlier.tolist()],
        scorer=Indel.normalized_similarity,
        score_cutoff=threshold,
    )
    hits = np.flatnonzero(scores >= threshold)
    # Link each key to the earliest key it matches.
    for pos in hits[np.lexsort((earlier[hits], later[hits]))].tolist():
        index, first = int(later[pos]), int(earlier[pos])
        if index not in links and labels[index] & labels[first]:
            links[index] = (first, float(scores[pos]))


def _exact_duplicates(
    respondents: Sequence[str],
    questions: Sequence[str],
    keys: Sequence[str],
    min_chars: int,
    result: list[tuple[str, int, float] | None],
) -> None:
    """Same-respondent repeats and long identical copies (rules in the module docstring), into ``result``.

    Each answer with a key is compared with the first answer holding the same
    key from the same respondent and from the same question: factorised codes
    and one ``numpy.unique`` per pairing (first occurrences) instead of two
    dictionary look-ups per answer.
    """
    lengths = np.fromiter(map(len, keys), dtype=np.int64, count=len(keys))
    live = np.flatnonzero(lengths > 0)
    if not len(live):
        return
    key_codes = pd.factorize(np.asarray(keys, dtype=object)[live])[0].astype(np.int64)
    respondent = pd.factorize(np.asarray(respondents, dtype=object))[0].astype(np.int64)
    question = pd.factorize(np.asarray(questions, dtype=object))[0].astype(np.int64)
    span = int(key_codes.max()) + 1

    def first_with_same(codes: np.ndarray) -> np.ndarray:
        _, first, inverse = np.unique(codes[live] * span + key_codes, return_index=True, return_inverse=True)
        return live[first[inverse.ravel()]]

    respondent_first = first_with_same(respondent)
    question_first = first_with_same(question)
    repeat = (respondent_first != live) & (question[respondent_first] != question[live])
    copy = (
        ~repeat
        & (question_first != live)
        & (lengths[live] >= min_chars)
        & (respondent[question_first] != respondent[live])
    )
    for i, first in zip(live[repeat].tolist(), respondent_first[repeat].tolist(), strict=True):
        result[i] = ("same_respondent_repeat", first, 1.0)
    for i, first in zip(live[copy].tolist(), question_first[copy].tolist(), strict=True):
        result[i] = ("duplicate", first, 1.0)


def find_duplicates(
    respondents: Sequence[str],
    questions: Sequence[str],
    texts: Sequence[str],
    eligible: Sequence[bool],
    min_chars: int,
    threshold: float,
    *,
    keys: Sequence[str] | None = None,
    progress: Progress = _quiet,
) -> list[tuple[str, int, float] | None]:
    """Duplicate finding for every answer, in input order.

    Parameters
    ----------
    respondents, questions, texts
        Per answer: respondent id, question, cleaned text.
    eligible
        Per answer: whether to search it (False for non-answers).
    min_chars
        Length of the duplicate key from which identical texts by different
        respondents count as copies, and near-duplicates are searched.
    threshold
        Near-duplicate similarity bar.
    keys
        Per answer, its :func:`duplicate_key` when the caller has it already
        (only eligible answers' keys are read); computed here otherwise.
    progress
        Called as ``progress(what, done, total)`` during the near-duplicate
        search, which is the long part on large corpora (a caller's progress
        bar; it may raise to cancel).

    Returns
    -------
    Per answer ``None`` or ``(code, index_of_first_occurrence, similarity)``.
    """
    n = len(texts)
    result: list[tuple[str, int, float] | None] = [None] * n
    if keys is not None:
        keys = [key if ok else "" for key, ok in zip(keys, eligible, strict=True)]
    else:
        cache: dict[str, str] = {}
        keys = []
        for text, ok in zip(texts, eligible, strict=True):
            if not ok:
                keys.append("")
                continue
            key = cache.get(text)
            if key is None:
                key = cache[text] = duplicate_key(text)
            keys.append(key)
    _exact_duplicates(respondents, questions, keys, min_chars, result)

    # Near-duplicates among the distinct long keys not already linked.
    distinct: dict[str, int] = {}
    labels: dict[str, set[object]] = {}
    for i in range(n):
        key = keys[i]
        if len(key) < min_chars:
            continue
        distinct.setdefault(key, i)
        labels.setdefault(key, set()).update((("q", questions[i]), ("r", respondents[i])))
    ordered = list(distinct)
    links = find_near_duplicates(ordered, [labels[k] for k in ordered], threshold, progress)
    if links:
        def root(index: int) -> tuple[int, float]:
            earlier, score = links[index]
            while earlier in links:
                earlier = links[earlier][0]
            return earlier, score

        first_of_key = {k: distinct[k] for k in ordered}
        position = {k: pos for pos, k in enumerate(ordered)}
        for i in range(n):
            key = keys[i]
            if result[i] is not None or len(key) < min_chars:
                continue
            pos = position[key]
            if pos in links:
                earlier, score = root(pos)
                result[i] = ("near_duplicate", first_of_key[ordered[earlier]], score)
    return result
