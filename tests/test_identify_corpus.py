"""Language identification against outside data: chatterbot-corpus utterances, no hint.

The utterances are read at test time from the installed ``chatterbot-corpus``
package (test extra), never copied into this repository; the evaluation code
is shared with ``tests/bench/bench_identify.py``.
"""

from __future__ import annotations

import importlib.util
import random
from pathlib import Path

import pytest


def _bench():
    path = Path(__file__).parent / "bench" / "bench_identify.py"
    spec = importlib.util.spec_from_file_location("bench_identify", path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.fixture(scope="module")
def bench():
    module = _bench()
    if not module.load_corpus():
        pytest.skip("chatterbot-corpus is not installed (pip install -e .[test])")
    return module


def test_fixed_sample_does_not_regress(bench) -> None:
    """600 utterances drawn with ``random.Random(20240601).sample`` from the sorted corpus pairs
    (en, de, es, fr, it, nl, pt, ru, sv, tr), default study settings, fallback und.
    Measured with the default detector (py3langid) at min_confidence 0.6, min_letters 8:
    4+ words: accuracy 97.3 %, wrong 0.7 %, und 2.0 % (n = 440); 1–3 words: wrong 0.0 %,
    und 45 % (n = 160). Floors below sit about five utterances under the measurement."""
    sample = random.Random(20240601).sample(bench.load_corpus(), 600)
    counts = bench.evaluate(sample)
    acc4, wrong4, und4 = bench.rates(counts["4+"])
    _, wrong13, _ = bench.rates(counts["1-3"])
    assert counts["4+"]["n"] == 440 and counts["1-3"]["n"] == 160
    assert acc4 >= 0.96
    assert wrong4 <= 0.02
    assert und4 <= 0.04
    assert wrong13 <= 0.03


@pytest.mark.slow
def test_issue_targets_on_the_whole_corpus(bench) -> None:
    """The issue's targets on all 5,943 utterances: accuracy ≥ 97 % on answers of 4+ words and
    wrong-label rate ≤ 8 % on 1–3-word answers (measured 97.9 % and 1.3 %)."""
    counts = bench.evaluate(bench.load_corpus())
    assert bench.rates(counts["4+"])[0] >= 0.97
    assert bench.rates(counts["1-3"])[1] <= 0.08
