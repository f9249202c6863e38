"""Benchmark: weighting a counted corpus, side by side with scikit-learn, and the memory of a pooled 1M-answer run.

Run on demand (not part of the test suite)::

    python tests/bench/bench_weigh.py [--sizes 100000,1000000] [--repeats 5] [--memory-answers 1000000]

Part 1 — speed. A synthetic count matrix (answer lengths 1 + Poisson(11),
terms drawn from a Zipf-like distribution over a 60,000-term vocabulary,
seeded) is weighted by ``TfidfWeighting(scheme).fit(C).transform(C)`` and by
scikit-learn's ``TfidfTransformer(...).fit(C).transform(C)`` with equal
settings, alternating the two, ``--repeats`` times each; the table shows the
median seconds and the ratio ours / scikit-learn (target ≤ 1.2×), and checks
that both give the same matrix (max abs difference).

Part 2 — memory. In a fresh child process: build an answers table of
``--memory-answers`` answers in five languages (term lists of 1 + Poisson(9)
terms from a 20,000-term vocabulary per language), then run the whole weigh
stage (per-language and pooled counting, filtering, weighting, keyword
tables). Reports the stage's time and the time at which each step starts,
the resident set size just before the stage (the input table) and its peak
during the stage (sampled every 5 ms with psutil), and, from a second run
under ``tracemalloc`` (NumPy reports its buffers to it), the stage's own
allocation peak. Budget from the speed issue: ≤ 2 GB peak for a whole run.
"""

from __future__ import annotations

import os

os.environ.setdefault("OMP_NUM_THREADS", "1")
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import argparse
import json
import resource
import statistics
import subprocess
import sys
import time
import tracemalloc

import numpy as np
import scipy.sparse as sp

VOCABULARY = 60_000


def synthetic_counts(n_answers: int, seed: int = 20240601) -> sp.csr_matrix:
    """Counts with Zipf-like term use: term rank r drawn with probability ∝ 1 / (r + 2.7)."""
    rng = np.random.default_rng(seed)
    lengths = 1 + rng.poisson(11, n_answers)
    ranks = np.arange(VOCABULARY)
    p = 1.0 / (ranks + 2.7)
    p /= p.sum()
    columns = rng.choice(VOCABULARY, size=int(lengths.sum()), p=p)
    indptr = np.zeros(n_answers + 1, dtype=np.int64)
    np.cumsum(lengths, out=indptr[1:])
    matrix = sp.csr_matrix((np.ones(len(columns), dtype=np.int64), columns, indptr), shape=(n_answers, VOCABULARY))
    matrix.sum_duplicates()
    # A counted corpus has no term that occurs nowhere.
    return matrix[:, np.flatnonzero(np.bincount(matrix.indices, minlength=VOCABULARY))]


SCHEMES = [
    # label, our scheme kwargs, TfidfTransformer kwargs
    ("raw · smooth idf · l2 (defaults)", {"tf": "raw", "idf": "smooth", "norm": "l2"}, {}),
    ("1+ln tf · smooth idf · l2", {"tf": "log", "idf": "smooth", "norm": "l2"}, {"sublinear_tf": True}),
    ("raw · ln(N/df)+1 · l1", {"tf": "raw", "idf": "log", "norm": "l1", "idf_add": 1.0}, {"smooth_idf": False, "norm": "l1"}),
    ("raw · no idf · l2", {"tf": "raw", "idf": "none", "norm": "l2"}, {"use_idf": False}),
]


def speed(sizes: list[int], repeats: int) -> None:
    from sklearn.feature_extraction.text import TfidfTransformer

    from workbench.core.tfidf import TfidfWeighting, WeightingScheme

    print(f"Part 1 - fit + transform of a count matrix, {repeats} alternating runs each, seconds (median), one thread")
    print("ratio = termloom / scikit-learn of the medians, then of the fastest runs (less sensitive to other load)")
    print(f"{'answers':>10} {'nnz':>11}  {'scheme':<34} {'termloom':>9} {'sklearn':>9} {'ratio':>6} {'(min)':>6}  max|diff|")
    for n in sizes:
        counts = synthetic_counts(n)
        for label, ours_kwargs, theirs_kwargs in SCHEMES:
            ours_times, theirs_times = [], []
            for _ in range(repeats):
                start = time.perf_counter()
                theirs = TfidfTransformer(**theirs_kwargs).fit(counts).transform(counts)
                theirs_times.append(time.perf_counter() - start)
                start = time.perf_counter()
                ours = TfidfWeighting(WeightingScheme(**ours_kwargs)).fit(counts).transform(counts)
                ours_times.append(time.perf_counter() - start)
            diff = abs(ours - theirs).max()
            a, b = statistics.median(ours_times), statistics.median(theirs_times)
            ratio_min = min(ours_times) / min(theirs_times)
            print(
                f"{n:>10,} {counts.nnz:>11,}  {label:<34} {a:>9.3f} {b:>9.3f} {a / b:>5.2f}x {ratio_min:>5.2f}x  {diff:.1e}"
            )
            del ours, theirs


def synthetic_answers(n_answers: int, seed: int = 7):
    import pandas as pd

    rng = np.random.default_rng(seed)
    languages = ["de", "en", "es", "fr", "it"]
    per_language = 20_000
    vocabulary = np.array([f"w{i:05d}" for i in range(per_language)], dtype=object)
    p = 1.0 / (np.arange(per_language) + 2.7)
    p /= p.sum()
    lengths = 1 + rng.poisson(9, n_answers)
    draws = vocabulary[rng.choice(per_language, size=int(lengths.sum()), p=p)].tolist()
    ends = np.cumsum(lengths).tolist()
    starts = [0, *ends[:-1]]
    terms = [draws[s:e] for s, e in zip(starts, ends)]
    return pd.DataFrame(
        {
            "answer_id": [f"r{i}|q1" for i in range(n_answers)],
            "language": rng.choice(languages, size=n_answers),
            "enters_weighting": True,
            "terms": terms,
            "weight": rng.uniform(0.2, 3.0, n_answers),
        }
    )


def memory_child(n_answers: int) -> None:
    import threading

    import psutil

    from workbench.core.progress import Reporter
    from workbench.core.settings import study_from_dict
    from workbench.core.weigh import weigh_corpus

    answers = synthetic_answers(n_answers)
    process = psutil.Process()
    rss_before = process.memory_info().rss
    peak = [rss_before]
    done = threading.Event()

    def sample() -> None:
        while not done.wait(0.005):
            peak[0] = max(peak[0], process.memory_info().rss)

    steps: list[tuple[str, float]] = []
    start = time.perf_counter()

    def progress(stage: str, step: int, total: int, message: str) -> None:
        steps.append((message, time.perf_counter() - start))

    study = study_from_dict(
        {"sources": [{"path": "x"}], "columns": {"weight": "weight"}, "weigh": {"tf": "log", "idf": "smooth", "min_df": 2}}
    )
    sampler = threading.Thread(target=sample, daemon=True)
    sampler.start()
    result = weigh_corpus(answers, study, Reporter(callback=progress))
    seconds = time.perf_counter() - start
    done.set()
    sampler.join()
    peak[0] = max(peak[0], process.memory_info().rss)
    del result
    # A second run under tracemalloc: the stage's own allocations, NumPy buffers included.
    tracemalloc.start()
    result = weigh_corpus(answers, study, Reporter())
    _, traced_peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    print(
        json.dumps(
            {
                "answers": n_answers,
                "pooled_shape": list(result.pooled.matrix.shape),
                "pooled_nnz": int(result.pooled.matrix.nnz),
                "rss_before": rss_before,
                "rss_peak_stage": peak[0],
                "rss_peak_process": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024,
                "traced_peak_bytes": traced_peak,
                "seconds": seconds,
                "steps": steps,
            }
        )
    )


def memory(n_answers: int) -> None:
    # A child process, so the peak RSS is this run's alone (ru_maxrss never goes down).
    out = subprocess.run(
        [sys.executable, __file__, "--memory-child", str(n_answers)], capture_output=True, text=True, check=True
    )
    report = json.loads(out.stdout.strip().splitlines()[-1])
    mib = 2.0**20
    print()
    print(f"Part 2 - whole weigh stage on {report['answers']:,} answers, five languages, survey weights")
    print(f"  pooled matrix {report['pooled_shape'][0]:,} x {report['pooled_shape'][1]:,}, {report['pooled_nnz']:,} non-zeros")
    print(f"  stage time                          {report['seconds']:.1f} s")
    for message, at in report["steps"]:
        print(f"    {message:<24} starts at {at:6.1f} s")
    print(f"  RSS before the stage (input table)  {report['rss_before'] / mib:,.0f} MiB")
    print(f"  RSS peak during the stage           {report['rss_peak_stage'] / mib:,.0f} MiB  (budget 2,048 MiB for a whole run)")
    print(f"  stage's own peak (tracemalloc)      {report['traced_peak_bytes'] / mib:,.0f} MiB")
    print(f"  RSS peak of the process overall     {report['rss_peak_process'] / mib:,.0f} MiB (includes building the input)")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", default="100000,1000000")
    parser.add_argument("--repeats", type=int, default=5)
    parser.add_argument("--memory-answers", type=int, default=1_000_000)
    parser.add_argument("--memory-child", type=int, default=0, help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.memory_child:
        memory_child(args.memory_child)
        return
    speed([int(s) for s in args.sizes.split(",") if s], args.repeats)
    if args.memory_answers:
        memory(args.memory_answers)


if __name__ == "__main__":
    main()
