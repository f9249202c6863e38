"""Keyword tables: rankings by weighted mean weight and weighted document share, with their evidence."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from workbench.core.counting import count_terms
from workbench.core.keywords import KEYWORD_COLUMNS, keyword_table, term_statistics
from workbench.core.progress import Reporter
from workbench.core.settings import study_from_dict
from workbench.core.tfidf import TfidfWeighting, WeightingScheme
from workbench.core.weigh import weigh_corpus

DOCS = [["tea", "tea", "cake"], ["tea", "milk"], ["cake", "milk", "sugar"], ["tea"], ["sugar", "sugar", "sugar"]]
IDS = ["r1", "r2", "r3", "r4", "r5"]
WEIGHTS = np.array([2.0, 0.5, 1.0, 0.0, 1.5])


def _table(weights: np.ndarray, top_k: int = 10, scheme: WeightingScheme | None = None) -> tuple[pd.DataFrame, np.ndarray, np.ndarray]:
    counts = count_terms(DOCS, IDS, "en", weights)
    weighting = TfidfWeighting(scheme or WeightingScheme("raw", "smooth", "l2")).fit(counts.matrix, weights)
    weighted = weighting.transform(counts.matrix, counts.lengths)
    return keyword_table(counts, weighted, weighting.idf_, top_k), counts.matrix.toarray(), weighted.toarray()


def test_weighted_aggregates_equal_their_definitions() -> None:
    """mean_weight = Σ w_i x_ij / Σ w_i, doc_share = Σ_{c_ij>0} w_i / Σ w_i, totals Σ c_ij and Σ w_i c_ij (weighted survey estimates of a mean and a proportion; common practice)."""
    table, counts, weighted = _table(WEIGHTS)
    by_term = table[table["ranking"] == "mean_weight"].set_index("term")
    terms = ["cake", "milk", "sugar", "tea"]
    for j, term in enumerate(terms):
        row = by_term.loc[term]
        assert row["mean_weight"] == pytest.approx((WEIGHTS * weighted[:, j]).sum() / WEIGHTS.sum(), abs=1e-12)
        assert row["doc_share"] == pytest.approx((WEIGHTS * (counts[:, j] > 0)).sum() / WEIGHTS.sum(), abs=1e-12)
        assert row["df"] == (counts[:, j] > 0).sum()
        assert row["df_weighted"] == pytest.approx((WEIGHTS * (counts[:, j] > 0)).sum())
        assert row["total_count"] == counts[:, j].sum()
        assert row["total_count_weighted"] == pytest.approx((WEIGHTS * counts[:, j]).sum())
    assert list(table.columns) == list(KEYWORD_COLUMNS)


def test_rankings_are_ordered_limited_and_break_ties_by_term() -> None:
    """Each ranking lists the top k positive scores, highest first; equal scores are listed alphabetically."""
    table, _, _ = _table(np.ones(5), top_k=3)
    share = table[table["ranking"] == "doc_share"]
    # df: tea 3, cake 2, milk 2, sugar 2 -> tea, then the tie cake < milk.
    assert share["term"].tolist() == ["tea", "cake", "milk"]
    assert share["rank"].tolist() == [1, 2, 3]
    mean = table[table["ranking"] == "mean_weight"]
    assert len(mean) == 3 and mean["mean_weight"].is_monotonic_decreasing


def test_examples_are_the_answers_where_the_term_weighs_most() -> None:
    """Examples list up to three answer ids by descending weight of the term, ties in input order."""
    table, _, weighted = _table(np.ones(5))
    tea = table[(table["ranking"] == "mean_weight") & (table["term"] == "tea")].iloc[0]
    # tea weighs 1.0 alone in r4, then r1 (two of three terms), then r2.
    order = np.argsort(-weighted[:, 3], kind="stable")[:3]
    assert tea["examples"] == "; ".join(IDS[i] for i in order) == "r4; r1; r2"


def test_terms_with_zero_weight_fall_back_to_count_examples_and_leave_the_weight_ranking() -> None:
    """A term in every answer has idf log(N/df) = 0: it is absent from the mean-weight ranking, ranked first by share, and its examples come from the counts."""
    counts = count_terms([["a", "b"], ["a"], ["a", "a", "c"]], ["x", "y", "z"], "en")
    weighting = TfidfWeighting(WeightingScheme("raw", "log", "l2", "10")).fit(counts.matrix)
    table = keyword_table(counts, weighting.transform(counts.matrix), weighting.idf_, 5)
    assert "a" not in table.loc[table["ranking"] == "mean_weight", "term"].tolist()
    first_share = table[table["ranking"] == "doc_share"].iloc[0]
    assert first_share["term"] == "a" and first_share["examples"] == "z; x; y"


def test_integer_weights_equal_replicated_answers() -> None:
    """Frequency-weight reading of survey weights (common practice): weight 2 equals the answer given twice.

    Weighted N, df, idf, mean weight and document share must equal the
    unweighted figures of the corpus with every answer repeated w_i times.
    """
    weights = np.array([2, 1, 3, 1, 2])
    weighted_table, _, _ = _table(weights.astype(float), scheme=WeightingScheme("log", "smooth", "l2"))
    repeated = [doc for doc, w in zip(DOCS, weights) for _ in range(w)]
    counts = count_terms(repeated, [str(i) for i in range(len(repeated))], "en")
    weighting = TfidfWeighting(WeightingScheme("log", "smooth", "l2")).fit(counts.matrix)
    plain = keyword_table(counts, weighting.transform(counts.matrix), weighting.idf_, 10)
    for ranking in ("mean_weight", "doc_share"):
        a = weighted_table[weighted_table["ranking"] == ranking].set_index("term")
        b = plain[plain["ranking"] == ranking].set_index("term")
        assert a.index.tolist() == b.index.tolist()
        for column in ("mean_weight", "doc_share", "idf", "total_count_weighted"):
            np.testing.assert_allclose(a[column], b[column], rtol=1e-12)
        np.testing.assert_allclose(a["df_weighted"], b["df"], rtol=1e-12)


def test_statistics_keep_every_term() -> None:
    """``term_statistics`` has one row per column of the matrix, in column order."""
    counts = count_terms(DOCS, IDS, "en")
    weighting = TfidfWeighting(WeightingScheme()).fit(counts.matrix)
    stats = term_statistics(counts, weighting.transform(counts.matrix), weighting.idf_)
    assert stats["term"].tolist() == counts.terms.tolist()


def test_stage_keyword_tables_per_language_and_pooled() -> None:
    """``weigh_corpus`` gives one table per language plus "pooled", at most top_k rows per ranking."""
    answers = pd.DataFrame(
        {
            "answer_id": IDS + ["f1", "f2"],
            "language": ["en"] * 5 + ["fr"] * 2,
            "enters_weighting": True,
            "terms": DOCS + [["thé", "gâteau"], ["thé"]],
        }
    )
    study = study_from_dict({"sources": [{"path": "x"}], "weigh": {"min_df": 1, "top_k": 2}})
    result = weigh_corpus(answers, study, Reporter())
    assert sorted(result.keywords) == ["en", "fr", "pooled"]
    for table in result.keywords.values():
        assert table.groupby("ranking").size().max() <= 2
    assert result.keywords["pooled"]["term"].str.contains(":").all()
