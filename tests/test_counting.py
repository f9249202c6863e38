"""Counting term lists into CSR matrices, per language and pooled."""

from __future__ import annotations

import importlib.resources
import re

import numpy as np
import pytest
import scipy.sparse as sp

from workbench.core.counting import count_terms, filter_counts, pool_counts, select_columns
from workbench.core.errors import InputError
from workbench.core.tfidf import VocabularyFilter


def _utterances(folder: str) -> list[list[str]]:
    yaml = pytest.importorskip("yaml")
    pytest.importorskip("chatterbot_corpus")
    root = importlib.resources.files("chatterbot_corpus") / "data" / folder
    docs = []
    for file in sorted((f for f in root.iterdir() if f.name.endswith(".yml")), key=lambda f: f.name):
        for conversation in yaml.safe_load(file.read_text(encoding="utf-8")).get("conversations") or []:
            docs.extend(re.findall(r"\w+", str(u).lower()) for u in conversation)
    return docs


@pytest.mark.parametrize("folder", ["french", "russian"])
def test_counts_equal_scikit_learn_count_vectorizer(folder: str) -> None:
    """scikit-learn ``CountVectorizer`` (analyzer = the term list) on chatterbot-corpus text: same sorted vocabulary, same counts.

    An answer without terms (appended here) is an empty row in both.
    """
    from sklearn.feature_extraction.text import CountVectorizer

    docs = _utterances(folder) + [[]]
    vectorizer = CountVectorizer(analyzer=lambda terms: terms)
    reference = vectorizer.fit_transform(docs)
    counts = count_terms(docs, [str(i) for i in range(len(docs))], folder)
    assert counts.terms.tolist() == vectorizer.get_feature_names_out().tolist()
    assert (counts.matrix != reference).nnz == 0
    assert counts.matrix.has_canonical_format
    np.testing.assert_array_equal(counts.lengths, [len(d) for d in docs])


def test_vocabulary_is_sorted_and_independent_of_answer_order() -> None:
    """Columns are in Python string order whatever order the answers come in, so runs are reproducible."""
    docs = [["b", "é", "a"], ["Z", "a", "a"], []]
    first = count_terms(docs, ["1", "2", "3"], "xx")
    second = count_terms(docs[::-1], ["3", "2", "1"], "xx")
    assert first.terms.tolist() == second.terms.tolist() == ["Z", "a", "b", "é"]
    np.testing.assert_array_equal(first.matrix.toarray(), [[0, 1, 1, 1], [1, 2, 0, 0], [0, 0, 0, 0]])
    np.testing.assert_array_equal(first.weights, [1, 1, 1])


@pytest.mark.parametrize("bad", [None, 3, float("nan")])
def test_a_term_that_is_not_text_names_the_answer(bad: object) -> None:
    """A term list holding None, NaN or a number is a one-line InputError naming the first answer concerned."""
    with pytest.raises(InputError, match=r"1 terms are not text .*first in answer 'r2\|q1'.*re-run the terms stage"):
        count_terms([["a"], ["b", bad], ["c"]], ["r1|q1", "r2|q1", "r3|q1"], "xx")


def _two_languages():
    de = count_terms([["preis", "gut", "preis"], ["service"]], ["a1", "a3"], "de", np.array([1.0, 2.0]))
    fr = count_terms([["prix", "service"], ["bon", "prix", "prix"]], ["a2", "a4"], "fr", np.array([0.5, 1.0]))
    return {"de": de, "fr": fr}


def test_pooled_terms_are_tagged_and_rows_follow_the_given_order() -> None:
    """Without a glossary a term keeps its language tag: the same spelling in two languages stays two columns."""
    pooled = pool_counts(_two_languages(), positions={"de": np.array([0, 2]), "fr": np.array([1, 3])})
    assert pooled.terms.tolist() == ["de:gut", "de:preis", "de:service", "fr:bon", "fr:prix", "fr:service"]
    assert pooled.row_ids.tolist() == ["a1", "a2", "a3", "a4"]
    np.testing.assert_array_equal(
        pooled.matrix.toarray(),
        [[1, 2, 0, 0, 0, 0], [0, 0, 0, 0, 1, 1], [0, 0, 1, 0, 0, 0], [0, 0, 0, 1, 2, 0]],
    )
    np.testing.assert_array_equal(pooled.weights, [1.0, 0.5, 2.0, 1.0])
    np.testing.assert_array_equal(pooled.lengths, [3, 2, 1, 3])
    assert pooled.language == "pooled"


def test_pooled_glossary_merges_terms_into_concepts() -> None:
    """A {(language, term): concept} mapping merges columns; counts add up; unmapped terms keep their tags."""
    glossary = {("de", "preis"): "price", ("fr", "prix"): "price", ("de", "gut"): "price", ("xx", "none"): "unused"}
    pooled = pool_counts(_two_languages(), glossary)
    assert pooled.terms.tolist() == ["de:service", "fr:bon", "fr:service", "price"]
    assert pooled.row_ids.tolist() == ["a1", "a3", "a2", "a4"]
    np.testing.assert_array_equal(
        pooled.matrix.toarray(), [[0, 0, 0, 3], [1, 0, 0, 0], [0, 0, 1, 1], [0, 1, 0, 2]]
    )
    assert pooled.matrix.has_canonical_format


@pytest.mark.parametrize("fr", [np.array([1, 2]), np.array([1]), np.array([1, 4])])
def test_pool_positions_must_be_a_permutation(fr: np.ndarray) -> None:
    """Wrong pooled row positions are a programming error, reported instead of silently losing rows."""
    with pytest.raises(ValueError, match="permutation"):
        pool_counts(_two_languages(), positions={"de": np.array([0, 2]), "fr": fr})


def test_filter_keeps_rows_and_lengths_and_drops_terms_seen_only_with_weight_zero() -> None:
    """Rows are never dropped by the vocabulary filter; relative tf keeps the answer length before filters.

    A term found only in answers of weight 0 has weighted df 0 (no defined idf) and is left out.
    """
    counts = count_terms(
        [["a", "b", "c"], ["a", "b"], ["d", "d"], ["e"]], ["1", "2", "3", "4"], "xx", np.array([1.0, 1.0, 0.0, 1.0])
    )
    filtered, report = filter_counts(counts, VocabularyFilter(min_df=1))
    assert filtered.terms.tolist() == ["a", "b", "c", "e"]
    assert report.only_zero_weight == 1 and report.empty_rows == 1 and report.first_empty == "3"
    filtered, report = filter_counts(counts, VocabularyFilter(min_df=2))
    assert filtered.terms.tolist() == ["a", "b"]
    assert filtered.matrix.shape == (4, 2)
    np.testing.assert_array_equal(filtered.lengths, [3, 2, 2, 1])
    assert (report.terms_before, report.terms_after, report.empty_rows) == (5, 2, 2)


def test_select_columns_keeps_canonical_csr() -> None:
    """Selecting columns through the CSR arrays gives the same matrix as SciPy's column indexing."""
    rng = np.random.default_rng(3)
    matrix = sp.random(50, 40, density=0.2, format="csr", random_state=rng, data_rvs=lambda n: rng.integers(1, 5, n))
    counts = count_terms([[] for _ in range(50)], [str(i) for i in range(50)], "xx")
    counts = type(counts)(matrix=matrix, terms=np.array([f"t{i:02d}" for i in range(40)], dtype=object),
                          row_ids=counts.row_ids, weights=counts.weights, language="xx")
    keep = np.array([0, 3, 4, 17, 39])
    selected = select_columns(counts, keep)
    assert (selected.matrix != matrix[:, keep]).nnz == 0
    assert selected.matrix.has_sorted_indices
    np.testing.assert_array_equal(selected.lengths, np.asarray(matrix.sum(axis=1)).ravel())
