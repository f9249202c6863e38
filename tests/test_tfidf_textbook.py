"""TF-IDF checked against the worked examples of Manning, Raghavan & Schütze (2008), ch. 6.

Manning, C. D., Raghavan, P. & Schütze, H., *Introduction to Information
Retrieval*, Cambridge University Press, 2008, chapter 6. The book's worked
numbers use log base 10; tolerances follow the book's rounding.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import scipy.sparse as sp

from workbench.core.counting import count_terms
from workbench.core.progress import Reporter
from workbench.core.settings import study_from_dict
from workbench.core.tfidf import TfidfWeighting, WeightingScheme, idf_from_df, weight_matrix
from workbench.core.weigh import weigh_corpus

# Fig. 6.8 (Reuters-RCV1): terms, df [recalled from memory], published idf.
RCV1_N = 806_791
RCV1_TERMS = ["car", "auto", "insurance", "best"]
RCV1_DF = np.array([18_165, 6_723, 19_241, 25_235])
RCV1_IDF_PUBLISHED = np.array([1.65, 2.08, 1.62, 1.5])

# Fig. 6.9 / Exercise 6.10: raw tf of car, auto, insurance, best in Doc1..Doc3.
FIG_6_9_TF = np.array([[27, 3, 0, 14], [4, 33, 33, 0], [24, 0, 29, 17]])


def test_fig_6_8_idf_from_df_and_n() -> None:
    """Manning et al. 2008, Fig. 6.8: idf = log10(N/df) on Reuters-RCV1, N = 806,791.

    Published idf 1.65, 2.08, 1.62, 1.5 (two decimals); the df values
    18,165 / 6,723 / 19,241 / 25,235 are [recalled from memory]. Checked
    through the study setting ``idf = "log10"`` and the SMART letter ``t``.
    """
    for scheme in (
        WeightingScheme.from_settings(study_from_dict({"sources": [{"path": "x"}], "weigh": {"idf": "log10"}}).weigh),
        WeightingScheme.from_smart("ntn"),
    ):
        idf = idf_from_df(RCV1_DF, RCV1_N, scheme)
        np.testing.assert_allclose(idf, RCV1_IDF_PUBLISHED, atol=0.005)
        assert np.round(idf[:3], 2).tolist() == [1.65, 2.08, 1.62]


def test_fig_6_9_tf_idf_with_the_books_rounded_idf() -> None:
    """Manning et al. 2008, Fig. 6.9 / Exercise 6.10: tf × idf with the rounded idf of Fig. 6.8.

    Published tf-idf: Doc1 44.55, 6.24, 0, 21 · Doc2 6.6, 68.64, 53.46, 0 ·
    Doc3 39.6, 0, 46.98, 25.5 (exact products of the tf and the two-decimal idf).
    """
    weighted = weight_matrix(sp.csr_matrix(FIG_6_9_TF), WeightingScheme("raw", "log", "none", "10"), RCV1_IDF_PUBLISHED)
    published = np.array([[44.55, 6.24, 0, 21], [6.6, 68.64, 53.46, 0], [39.6, 0, 46.98, 25.5]])
    np.testing.assert_allclose(weighted.toarray(), published, rtol=0, atol=1e-9)


def test_fig_6_9_tf_idf_with_idf_fitted_from_df() -> None:
    """Manning et al. 2008, Fig. 6.8/6.9: the same tf-idf from idf computed from df and N.

    The book multiplies by idf rounded to 0.01, so each published value may
    differ from the exact product by up to tf × 0.005. df [recalled from memory].
    """
    scheme = WeightingScheme.from_smart("ntn")
    weighted = weight_matrix(sp.csr_matrix(FIG_6_9_TF), scheme, idf_from_df(RCV1_DF, RCV1_N, scheme))
    published = np.array([[44.55, 6.24, 0, 21], [6.6, 68.64, 53.46, 0], [39.6, 0, 46.98, 25.5]])
    assert np.all(np.abs(weighted.toarray() - published) <= FIG_6_9_TF * 0.005 + 1e-12)


def test_fig_6_9_euclidean_normalised_vectors() -> None:
    """Manning et al. 2008, Exercise 6.10 / Fig. 6.9: the tf-idf vectors normalised to unit length.

    Values [calc] in REFERENCE_VALUES: Doc1 (0.897, 0.126, 0, 0.423) · Doc2
    (0.076, 0.787, 0.613, 0) · Doc3 (0.595, 0, 0.706, 0.383), three decimals.
    """
    weighted = weight_matrix(sp.csr_matrix(FIG_6_9_TF), WeightingScheme("raw", "log", "l2", "10"), RCV1_IDF_PUBLISHED)
    expected = np.array([[0.897, 0.126, 0, 0.423], [0.076, 0.787, 0.613, 0], [0.595, 0, 0.706, 0.383]])
    np.testing.assert_allclose(weighted.toarray(), expected, atol=0.0005)


# Example 6.3 / Figs. 6.12-6.13: affection, jealous, gossip in three novels.
NOVELS = ["SaS", "PaP", "WH"]
NOVEL_TF = np.array([[115, 10, 2], [58, 7, 0], [20, 11, 6]])


def _novel_vectors() -> np.ndarray:
    weighting = TfidfWeighting(WeightingScheme.from_smart("nnc")).fit(sp.csr_matrix(NOVEL_TF))
    return weighting.transform(sp.csr_matrix(NOVEL_TF)).toarray()


def test_example_6_3_unit_vectors_of_three_novels() -> None:
    """Manning et al. 2008, Fig. 6.13: raw-tf vectors of the three novels normalised to unit length.

    SaS (0.996, 0.087, 0.017), PaP (0.993, 0.120, 0), WH (0.847, 0.466, 0.254)
    [recalled from memory], three decimals. SMART 'nnc' = raw tf, no idf, cosine.
    """
    expected = np.array([[0.996, 0.087, 0.017], [0.993, 0.120, 0.0], [0.847, 0.466, 0.254]])
    np.testing.assert_allclose(_novel_vectors(), expected, atol=0.0005)


def test_example_6_3_cosine_similarities() -> None:
    """Manning et al. 2008, Example 6.3: sim(SaS, PaP) = 0.999, sim(SaS, WH) = 0.888.

    Exact values 0.999293 and 0.888889 [calc]; the book multiplies the
    three-decimal vectors of Fig. 6.13, which gives its printed numbers.
    """
    vectors = _novel_vectors()
    similarity = vectors @ vectors.T
    assert similarity[0, 1] == pytest.approx(0.999293, abs=5e-7)
    assert similarity[0, 2] == pytest.approx(0.888889, abs=5e-7)
    rounded = np.round(vectors, 3)
    assert round(float(rounded[0] @ rounded[1]), 3) == 0.999
    assert round(float(rounded[0] @ rounded[2]), 3) == 0.888


def test_section_6_3_2_query_jealous_gossip() -> None:
    """Manning et al. 2008, §6.3.2: query "jealous gossip" = (0, 0.707, 0.707) scores WH 0.509, PaP 0.085, SaS 0.074.

    The query is weighted with the same scheme (raw tf, cosine); scores are
    dot products with the document vectors. The book multiplies the
    three-decimal vectors, which reproduces its printed scores exactly; the
    exact scores lie within 0.001 of them.
    """
    query = weight_matrix(sp.csr_matrix([[0, 1, 1]]), WeightingScheme.from_smart("nnc"), np.ones(3)).toarray()[0]
    np.testing.assert_allclose(query, [0, 0.707, 0.707], atol=0.0005)
    published = {"WH": 0.509, "PaP": 0.085, "SaS": 0.074}
    vectors = _novel_vectors()
    exact = dict(zip(NOVELS, vectors @ query))
    as_printed = dict(zip(NOVELS, np.round(vectors, 3) @ np.round(query, 3)))
    for novel, value in published.items():
        assert round(float(as_printed[novel]), 3) == value
        assert exact[novel] == pytest.approx(value, abs=0.001)
    assert sorted(exact, key=exact.get, reverse=True) == ["WH", "PaP", "SaS"]


def test_example_6_4_lnc_ltc() -> None:
    """Manning et al. 2008, Example 6.4 (Fig. 6.14): lnc.ltc, query "best car insurance", document "car insurance auto insurance".

    N = 1,000,000; df auto 5,000, best 50,000, car 10,000, insurance 1,000.
    Query ltc normalised (auto, best, car, insurance) = (0, 0.34, 0.52, 0.78);
    document lnc = (0.52, 0, 0.52, 0.68); score 0.8. All [recalled from memory];
    two decimals. Checks SMART 'l' = 1 + log10 tf and 't' = log10(N/df).
    """
    df = np.array([5_000, 50_000, 10_000, 1_000])
    ltc = WeightingScheme.from_smart("ltc")
    query = weight_matrix(sp.csr_matrix([[0, 1, 1, 1]]), ltc, idf_from_df(df, 1_000_000, ltc)).toarray()[0]
    np.testing.assert_allclose(query, [0, 0.34, 0.52, 0.78], atol=0.005)
    lnc = WeightingScheme.from_smart("lnc")
    document = weight_matrix(sp.csr_matrix([[1, 0, 1, 2]]), lnc, idf_from_df(df, 1_000_000, lnc)).toarray()[0]
    np.testing.assert_allclose(document, [0.52, 0, 0.52, 0.68], atol=0.005)
    assert float(query @ document) == pytest.approx(0.8, abs=0.005)


def test_three_documents_log10_idf() -> None:
    """Basic logarithm facts (common practice): in 3 of 3 documents idf = log10(3/3) = 0; in 2 of 3 log10(1.5) ≈ 0.176; in 1 of 3 log10(3) ≈ 0.477."""
    counts = count_terms([["a", "b", "c"], ["a", "b"], ["a"]], ["d1", "d2", "d3"], "xx")
    weighting = TfidfWeighting(WeightingScheme("raw", "log", "none", "10")).fit(counts.matrix)
    assert counts.terms.tolist() == ["a", "b", "c"]
    np.testing.assert_allclose(weighting.idf_, [0.0, 0.176, 0.477], atol=0.0005)


def test_three_documents_through_the_weigh_stage() -> None:
    """Basic logarithm facts (common practice), through ``weigh_corpus`` with ``idf = "log10"``, raw tf, no norm.

    The term in every answer gets weight 0 and is not stored; the others
    weigh log10(1.5) ≈ 0.176 and log10(3) ≈ 0.477 per occurrence.
    """
    answers = pd.DataFrame(
        {
            "answer_id": ["d1", "d2", "d3"],
            "language": ["en"] * 3,
            "enters_weighting": [True] * 3,
            "terms": [["a", "b", "c", "c"], ["a", "b"], ["a"]],
        }
    )
    study = study_from_dict(
        {"sources": [{"path": "x"}], "weigh": {"tf": "raw", "idf": "log10", "norm": "none", "min_df": 1}}
    )
    result = weigh_corpus(answers, study, Reporter())
    np.testing.assert_allclose(result.idf["en"], [0.0, 0.176, 0.477], atol=0.0005)
    dense = result.weighted["en"].toarray()
    np.testing.assert_allclose(dense[0], [0.0, 0.176, 2 * 0.477], atol=0.001)
    assert result.weighted["en"].nnz == 3
    assert not any("degenerate" in w for w in result.warnings)
