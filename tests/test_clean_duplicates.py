"""Duplicates: which copies are flagged, the similarity measure, and MinHash blocking recall."""

from __future__ import annotations

import importlib.util
import random
from pathlib import Path

import pytest
from rapidfuzz import process
from rapidfuzz.distance import Indel

from workbench.core.duplicates import find_duplicates, find_near_duplicates


def _find(texts, respondents, questions, min_chars=30, threshold=0.92):
    return find_duplicates(respondents, questions, texts, [True] * len(texts), min_chars, threshold)


def test_short_identical_answers_from_different_people_are_normal() -> None:
    """Twenty people writing "the staff were friendly" is a finding, not junk."""
    texts = ["The staff were friendly"] * 20
    assert _find(texts, [f"r{i}" for i in range(20)], ["q1"] * 20) == [None] * 20


def test_long_identical_answers_are_copies_linked_to_the_first() -> None:
    long = "We would like to point out that the new booking system is far too slow at peak times."
    result = _find([long, long.upper(), long + "!"], ["r1", "r2", "r3"], ["q1"] * 3)
    assert result[0] is None
    assert result[1] == ("duplicate", 0, 1.0) and result[2] == ("duplicate", 0, 1.0)


def test_same_respondent_repeat_any_length() -> None:
    result = _find(["too expensive", "Too expensive!", "too expensive"], ["r1", "r1", "r2"], ["q1", "q2", "q1"])
    assert result == [None, ("same_respondent_repeat", 0, 1.0), None]


def test_near_duplicate_found_and_linked() -> None:
    base = "The check-in took forty minutes because only one desk was open on Sunday."
    edited = "The check-in took forty minutes because only one desk was open on sunday!!"
    other = "Breakfast was excellent and the coffee was much better than last year."
    result = _find([base, other, edited.replace("forty", "fourty")], ["r1", "r2", "r3"], ["q1"] * 3)
    assert result[0] is None and result[1] is None
    code, first, score = result[2]
    assert code == "near_duplicate" and first == 0 and score >= 0.92


def test_near_duplicates_need_a_shared_question_or_respondent() -> None:
    base = "The check-in took forty minutes because only one desk was open on Sunday."
    result = _find([base, base.replace("forty", "fourty")], ["r1", "r2"], ["q1", "q2"])
    assert result == [None, None]


def test_indel_similarity_matches_its_formula() -> None:
    """rapidfuzz ``Indel.normalized_similarity`` = 1 - indel / (len a + len b). For "kitten" →
    "sitting" the Levenshtein distance is 3 (the classic example [recalled from memory]); with
    insertions and deletions only, each substitution costs 2, so indel = 5 and
    similarity = 1 - 5/13 = 0.6154 [calc]."""
    assert Indel.distance("kitten", "sitting") == 5
    assert Indel.normalized_similarity("kitten", "sitting") == pytest.approx(1 - 5 / 13)


def _bench_module():
    path = Path(__file__).parent / "bench" / "bench_identify.py"
    spec = importlib.util.spec_from_file_location("bench_identify", path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def test_minhash_blocking_recall_against_brute_force() -> None:
    """Blocking must not lose what an exhaustive comparison finds. Reference: rapidfuzz
    ``process.cdist`` over *all* pairs. Data: chatterbot-corpus utterances (outside data) of
    40+ characters, each also copied with one to three random character edits."""
    pairs = _bench_module().load_corpus()
    if not pairs:
        pytest.skip("chatterbot-corpus is not installed")
    from workbench.core.duplicates import duplicate_key

    rng = random.Random(11)
    long = sorted({duplicate_key(t) for t, _ in pairs if len(duplicate_key(t)) >= 40})
    originals = rng.sample(long, 300)
    keys = list(originals)
    for text in originals[:150]:
        chars = list(text)
        for _ in range(rng.randint(1, 3)):
            chars[rng.randrange(len(chars))] = rng.choice("abcdefghij")
        keys.append("".join(chars))
    keys = list(dict.fromkeys(keys))
    threshold = 0.92
    scores = process.cdist(keys, keys, scorer=Indel.normalized_similarity, score_cutoff=threshold)
    expected = {j for j in range(len(keys)) if any(scores[j][i] >= threshold for i in range(j))}
    found = set(find_near_duplicates(keys, [["q"]] * len(keys), threshold))
    assert found <= expected
    assert len(expected) >= 140
    assert len(found) >= 0.97 * len(expected)


def test_near_duplicate_search_reports_progress_and_can_be_stopped() -> None:
    """The long part of clean on large corpora tells the caller how far it is, and a caller
    that raises (the reporter's cancel) stops it; the links do not depend on being watched."""
    words = "train late coffee staff friendly price clean quiet window seat bed cabin".split()
    texts = [" ".join(words[(i * 7 + j) % len(words)] for j in range(6 + i % 5)) + f" {i % 97}" for i in range(3000)]
    args = ([f"r{i}" for i in range(3000)], ["q1"] * 3000, texts, [True] * 3000, 10, 0.9)
    calls: list[tuple[str, int, int]] = []
    watched = find_duplicates(*args, progress=lambda what, done, total: calls.append((what, done, total)))
    assert watched == find_duplicates(*args)
    kinds = {what for what, _, _ in calls}
    assert any("hashing" in k for k in kinds) and any("comparing" in k for k in kinds)
    assert all(0 <= done <= total for _, done, total in calls)

    class Stop(Exception):
        pass

    def stop(_what: str, _done: int, _total: int) -> None:
        raise Stop

    with pytest.raises(Stop):
        find_duplicates(*args, progress=stop)
