"""Benchmark: the compare stage on 100,000 invented answers.

Data (invented, generated here): respondents answer one or two open questions
in one of three languages; each answer holds 1–8 terms drawn from a Zipf-like
distribution over 6,000 terms per language; respondents carry three group
columns (country: 6 values, age band: 4, segment: 8) and survey weights.

Reported, one run, side by side:

* the whole stage (``compare_corpus``) with the default 200 bootstrap
  resamples and with none, after ``weigh_corpus``;
* keyness of every term × every group of the three columns in every language
  (``group_sums`` + ``keyness_tables``, vectorised) against
  ``scipy.stats.chi2_contingency`` called term by term on a sample of terms,
  extrapolated to the same work — the ratio is the point;
* one bootstrap resample as a sparse product (multiplicities × matrix)
  against re-indexing the respondent rows (``matrix[idx].sum(axis=0)``).

Run:  python tests/bench/bench_compare.py [--answers 100000] [--resamples 200]
"""

from __future__ import annotations

import os

os.environ.setdefault("OMP_NUM_THREADS", "1")
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import argparse
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd


def invented_answers(n_answers: int, seed: int = 1) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    languages = np.array(["de", "fr", "es"])
    n_terms = 6000
    zipf = 1.0 / np.arange(1, n_terms + 1)
    zipf /= zipf.sum()
    respondents = int(n_answers / 1.4) + 1  # 1.5 answers each on average: enough rows, then cut
    per = rng.integers(1, 3, size=respondents)
    r_lang = rng.choice(languages, size=respondents, p=[0.5, 0.3, 0.2])
    country = rng.choice(["DE", "AT", "CH", "FR", "BE", "ES"], size=respondents)
    age = rng.choice(["18-29", "30-44", "45-59", "60+"], size=respondents)
    segment = rng.choice([f"s{i}" for i in range(8)], size=respondents)
    weight = rng.uniform(0.4, 2.5, size=respondents)
    owner = np.repeat(np.arange(respondents), per)[:n_answers]
    question = np.concatenate([np.arange(k) for k in per])[:n_answers]
    lengths = rng.integers(1, 9, size=n_answers)
    codes = rng.choice(n_terms, size=int(lengths.sum()), p=zipf)
    lang_of = r_lang[owner]
    tokens = np.char.add(np.repeat(lang_of, lengths).astype(str), np.char.add("t", np.char.zfill(codes.astype(str), 4)))
    terms = [list(part) for part in np.split(tokens.astype(object), np.cumsum(lengths)[:-1])]
    # A real difference to find: the oldest group names one term more often.
    for i in np.flatnonzero((age[owner] == "60+") & (rng.random(n_answers) < 0.2)):
        terms[i].append(f"{lang_of[i]}t0100")
    frame = pd.DataFrame(
        {
            "answer_id": [f"r{r}|q{q}" for r, q in zip(owner, question, strict=True)],
            "respondent_id": [f"r{r}" for r in owner],
            "question": [f"q{q}" for q in question],
            "language": lang_of,
            "terms": terms,
            "group:country": country[owner],
            "group:age": age[owner],
            "group:segment": segment[owner],
            "weight": weight[owner],
        }
    )
    frame["enters_weighting"] = True
    frame["clean_text"] = frame["terms"].map(" ".join)
    frame["raw_text"] = frame["clean_text"]
    return frame


class Clock:
    """Wall time and this process's CPU time (the machine may be shared: CPU time is the fairer figure)."""

    def __enter__(self) -> Clock:
        self.wall, self.cpu = time.perf_counter(), time.process_time()
        return self

    def __exit__(self, *exc: object) -> None:
        self.wall = time.perf_counter() - self.wall
        self.cpu = time.process_time() - self.cpu

    def __str__(self) -> str:
        return f"{self.wall:.2f} s wall / {self.cpu:.2f} s CPU"


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--answers", type=int, default=100_000)
    parser.add_argument("--resamples", type=int, default=200)
    args = parser.parse_args()

    from scipy.stats import chi2_contingency

    from workbench.core.compare import compare_corpus
    from workbench.core.groups import groupings
    from workbench.core.keyness import by_respondent, group_sums, keyness_tables
    from workbench.core.progress import Reporter
    from workbench.core.settings import study_from_dict
    from workbench.core.weigh import weigh_corpus

    with Clock() as clock:
        answers = invented_answers(args.answers)
    print(f"data: {len(answers):,} answers, {answers['respondent_id'].nunique():,} respondents (invented in {clock})")
    base = Path(tempfile.mkdtemp())
    study = study_from_dict(
        {
            "sources": [{"path": "x.csv"}],
            "languages": {"expected": ["de", "fr", "es"]},
            "columns": {"groups": ["country", "age", "segment"], "weight": "weight"},
            "compare": {"bootstrap": args.resamples},
        },
        base_dir=base,
    )
    with Clock() as clock:
        weighed = weigh_corpus(answers, study, Reporter())
    print(f"weigh_corpus: {clock}")

    with Clock() as full:
        result = compare_corpus(answers, weighed, study, Reporter())
    study.compare.bootstrap = 0
    with Clock() as plain:
        compare_corpus(answers, weighed, study, Reporter())
    print(f"compare_corpus with {args.resamples} resamples: {full}; without bootstrap: {plain}; "
          f"{len(result.tables)} tables")  # fmt: skip

    # Keyness alone: every term x every group x every language, vectorised.
    lookup = answers.drop_duplicates("answer_id").set_index("answer_id")["respondent_id"]
    found, _ = groupings(answers, ["country", "age", "segment"], [])
    cells = 0
    t = time.process_time()
    prepared = []
    for language, counts in weighed.counts.items():
        rc = by_respondent(counts, lookup.reindex(counts.row_ids).to_numpy(dtype=object))
        prepared.append(rc)
        for grouping in found:
            labels = grouping.by_respondent.reindex(rc.respondent_ids.astype(str)).to_numpy(dtype=object)
            sums = group_sums(rc, labels, grouping.values, "respondents")
            tables = keyness_tables(sums, rc.terms, targets=list(range(len(grouping.values))), min_freq=1)
            cells += sum(len(k.table) for k in tables)
    vector_s = time.process_time() - t
    # The same statistic term by term with SciPy on a sample, extrapolated to the same number of cells.
    rc = prepared[0]
    grouping = found[0]
    labels = grouping.by_respondent.reindex(rc.respondent_ids.astype(str)).to_numpy(dtype=object)
    sums = group_sums(rc, labels, grouping.values, "respondents")
    sample = 400
    t = time.process_time()
    done = 0
    for j in range(sample):
        a = sums.freq[0, j]
        b = sums.freq[1:, j].sum()
        na, nb = sums.size[0], sums.size[1:].sum()
        table = np.array([[a, b], [na - a, nb - b]])
        if (table.sum(axis=0) > 0).all() and (table.sum(axis=1) > 0).all():
            chi2_contingency(table, lambda_="log-likelihood", correction=False)
        done += 1
    loop_s = (time.process_time() - t) / done * cells
    print(f"keyness of {cells:,} term x group cells (CPU): vectorised {vector_s:.2f} s; SciPy term by term "
          f"(extrapolated from {sample}) {loop_s:.1f} s; ratio {loop_s / vector_s:.0f}x")  # fmt: skip

    # One bootstrap resample: sparse product vs row re-indexing.
    m = rc.mentions
    n = m.shape[0]
    rng = np.random.default_rng(0)
    reps = 20
    t = time.process_time()
    for _ in range(reps):
        multiplicity = np.bincount(rng.integers(0, n, n), minlength=n).astype(float)
        np.asarray(m.T @ multiplicity)
    product_s = (time.process_time() - t) / reps
    t = time.process_time()
    for _ in range(reps):
        np.asarray(m[rng.integers(0, n, n)].sum(axis=0))
    index_s = (time.process_time() - t) / reps
    print(f"one resample of {n:,} respondents x {m.shape[1]:,} terms (CPU): product {product_s * 1e3:.1f} ms, "
          f"row re-indexing {index_s * 1e3:.1f} ms; ratio {index_s / product_s:.1f}x")  # fmt: skip
    print("findings:", *result.findings[:3], sep="\n  ")


if __name__ == "__main__":
    main()
