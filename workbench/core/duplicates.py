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
locality-sensitive hashing (LSH) over character 5-gram shingles:

* each key's 5-grams are hashed (a fixed polynomial rolling hash, so results
  do not depend on ``PYTHONHASHSEED``);
* :data:`PERMUTATIONS` = 32 hash functions ``h_i(x) = (a_i x + b_i) mod p``
  (fixed seeds) give the signature ``min_x h_i(x)`` per key; two keys agree on
  one signature row with probability equal to the Jaccard similarity ``J`` of
  their shingle sets;
* the signature is cut into :data:`BANDS` = 8 bands of 4 rows; keys sharing a
  band are candidates, so a pair is found with probability
  ``1 - (1 - J^4)^8`` — 0.996 at ``J = 0.84`` (one edit in a 60-character
  answer) and 0.06 at ``J = 0.3``;
* every candidate pair is checked with the exact similarity above. Each key
  is checked against at most :data:`MAX_CANDIDATES` earlier keys per band,
  which bounds the work at 100,000 answers even when many share a band.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
from rapidfuzz.distance import Indel

from workbench.core.nonanswer import phrase_key

SHINGLE = 5
PERMUTATIONS = 32
BANDS = 8
MAX_CANDIDATES = 64
_PRIME = (1 << 61) - 1
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


def _signatures(keys: Sequence[str]) -> np.ndarray:
    """MinHash signatures, one row of :data:`PERMUTATIONS` uint64 values per key."""
    rng = np.random.default_rng(20240601)
    a = rng.integers(1, _MASK32, size=PERMUTATIONS, dtype=np.uint64)
    b = rng.integers(0, _MASK32, size=PERMUTATIONS, dtype=np.uint64)
    out = np.empty((len(keys), PERMUTATIONS), dtype=np.uint64)
    powers = np.array([_BASE**i & _MASK32 for i in range(SHINGLE - 1, -1, -1)], dtype=np.uint64)
    for row, key in enumerate(keys):
        codes = np.frombuffer(key.encode("utf-32-le"), dtype=np.uint32).astype(np.uint64)
        if len(codes) < SHINGLE:
            codes = np.pad(codes, (0, SHINGLE - len(codes)))
        windows = np.lib.stride_tricks.sliding_window_view(codes, SHINGLE)
        # 32-bit shingle hashes keep a * h + b below 2**64, so no overflow.
        shingles = np.unique((windows * powers).sum(axis=1) & _MASK32)
        out[row] = ((shingles[:, None] * a[None, :] + b[None, :]) % _PRIME).min(axis=0)
    return out


def find_near_duplicates(
    keys: Sequence[str], groups: Sequence[Sequence[object]], threshold: float
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
    if len(keys) < 2:
        return {}
    signatures = _signatures(keys)
    rows = PERMUTATIONS // BANDS
    candidates: dict[int, set[int]] = {}
    for band in range(BANDS):
        buckets: dict[bytes, list[int]] = {}
        block = np.ascontiguousarray(signatures[:, band * rows : (band + 1) * rows])
        for index in range(len(keys)):
            bucket = buckets.setdefault(block[index].tobytes(), [])
            if bucket:
                candidates.setdefault(index, set()).update(bucket[:MAX_CANDIDATES])
            if len(bucket) < MAX_CANDIDATES:
                bucket.append(index)
    labels = [set(g) for g in groups]
    links: dict[int, tuple[int, float]] = {}
    for index in sorted(candidates):
        for earlier in sorted(candidates[index]):
            if not labels[index] & labels[earlier]:
                continue
            score = Indel.normalized_similarity(keys[index], keys[earlier], score_cutoff=threshold)
            if score >= threshold:
                links[index] = (earlier, score)
                break
    return links


def find_duplicates(
    respondents: Sequence[str],
    questions: Sequence[str],
    texts: Sequence[str],
    eligible: Sequence[bool],
    min_chars: int,
    threshold: float,
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

    Returns
    -------
    Per answer ``None`` or ``(code, index_of_first_occurrence, similarity)``.
    """
    n = len(texts)
    result: list[tuple[str, int, float] | None] = [None] * n
    keys = [duplicate_key(t) if ok else "" for t, ok in zip(texts, eligible, strict=True)]
    first_by_respondent: dict[tuple[str, str], int] = {}
    first_by_question: dict[tuple[str, str], int] = {}
    for i in range(n):
        key = keys[i]
        if not key:
            continue
        respondent_first = first_by_respondent.setdefault((respondents[i], key), i)
        question_first = first_by_question.setdefault((questions[i], key), i)
        if respondent_first != i and questions[respondent_first] != questions[i]:
            result[i] = ("same_respondent_repeat", respondent_first, 1.0)
        elif question_first != i and len(key) >= min_chars and respondents[question_first] != respondents[i]:
            result[i] = ("duplicate", question_first, 1.0)

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
    links = find_near_duplicates(ordered, [labels[k] for k in ordered], threshold)
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
