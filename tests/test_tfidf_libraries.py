"""TF-IDF checked against reference libraries on real multilingual text.

The text is the open conversation corpus shipped in the ``chatterbot-corpus``
registry package (YAML files under ``chatterbot_corpus/data/<language>/``):
every utterance becomes one answer, tokenised here by a plain lower-case
``\\w+`` split (the terms stage is not under test). References:

- scikit-learn ``TfidfVectorizer`` / ``TfidfTransformer`` (1.9): idf
  ln((1 + n)/(1 + df)) + 1 (``smooth_idf=True``) or ln(n/df) + 1; sublinear tf
  1 + ln tf; then l1/l2/no normalisation.
- gensim ``TfidfModel`` (4.4): default raw tf × log2(N/df), L2; SMART codes
  with every logarithm base 2.
"""

from __future__ import annotations

import importlib.resources
import re

import numpy as np
import pandas as pd
import pytest
import scipy.sparse as sp

from workbench.core.counting import count_terms, tag
from workbench.core.progress import Reporter
from workbench.core.settings import study_from_dict
from workbench.core.tfidf import TfidfWeighting, WeightingScheme, document_frequency
from workbench.core.weigh import weigh_corpus

yaml = pytest.importorskip("yaml")
pytest.importorskip("chatterbot_corpus")

FOLDERS = {"de": "german", "en": "english", "es": "spanish", "fr": "french", "it": "italian", "pt": "portuguese", "ru": "russian"}
WORD = re.compile(r"\w+")


def _sample() -> pd.DataFrame:
    root = importlib.resources.files("chatterbot_corpus") / "data"
    rows = []
    for language, folder in FOLDERS.items():
        files = sorted((f for f in (root / folder).iterdir() if f.name.endswith(".yml")), key=lambda f: f.name)
        # A few files per language keep the test fast and still cover every script.
        for file in files[:4]:
            data = yaml.safe_load(file.read_text(encoding="utf-8"))
            for conversation in data.get("conversations") or []:
                for utterance in conversation:
                    terms = WORD.findall(str(utterance).lower())
                    if terms:
                        rows.append((language, terms))
    return pd.DataFrame(
        {
            "answer_id": [f"{lang}{i}" for i, (lang, _) in enumerate(rows)],
            "language": [lang for lang, _ in rows],
            "enters_weighting": True,
            "terms": [terms for _, terms in rows],
        }
    )


@pytest.fixture(scope="module")
def sample() -> pd.DataFrame:
    frame = _sample()
    assert frame["language"].nunique() == len(FOLDERS) and len(frame) > 1000
    return frame


def _study(**weigh: object) -> object:
    return study_from_dict({"sources": [{"path": "x"}], "weigh": {"min_df": 1, **weigh}})


def _aligned(reference: sp.spmatrix, reference_terms: list[str], terms: np.ndarray) -> sp.csr_matrix:
    """Reorder the reference's columns to our vocabulary (both must hold the same terms)."""
    assert sorted(reference_terms) == sorted(terms.tolist())
    position = {t: i for i, t in enumerate(reference_terms)}
    return sp.csr_matrix(reference)[:, [position[t] for t in terms]]


SKLEARN_CASES = [
    # (our study settings, TfidfVectorizer arguments)
    ({"tf": "raw", "idf": "smooth", "norm": "l2"}, {"smooth_idf": True, "norm": "l2"}),
    ({"tf": "log", "idf": "smooth", "norm": "l2"}, {"smooth_idf": True, "sublinear_tf": True, "norm": "l2"}),
    ({"tf": "log", "idf": "smooth", "norm": "l1"}, {"smooth_idf": True, "sublinear_tf": True, "norm": "l1"}),
    ({"tf": "raw", "idf": "smooth", "norm": "none"}, {"smooth_idf": True, "norm": None}),
    ({"tf": "binary", "idf": "smooth", "norm": "l2"}, {"smooth_idf": True, "binary": True, "norm": "l2"}),
    ({"tf": "raw", "idf": "none", "norm": "l1"}, {"use_idf": False, "norm": "l1"}),
    ({"tf": "raw", "idf": "smooth", "norm": "l2", "min_df": 2, "max_df": 0.1}, {"min_df": 2, "max_df": 0.1}),
    ({"tf": "log", "idf": "smooth", "norm": "l2", "min_df": 0.01, "max_df": 40}, {"sublinear_tf": True, "min_df": 0.01, "max_df": 40}),
]


@pytest.mark.parametrize(("ours", "theirs"), SKLEARN_CASES, ids=[str(c[0]) for c in SKLEARN_CASES])
def test_per_language_matrices_equal_scikit_learn(sample: pd.DataFrame, ours: dict, theirs: dict) -> None:
    """scikit-learn ``TfidfVectorizer`` (sklearn.feature_extraction.text) with equal settings, per language: matrices equal to 1e-12.

    Covers smoothed idf, sublinear tf (1 + ln tf), binary tf, l1/l2/no
    normalisation, no idf, and min_df / max_df filters as counts and as
    shares (each max_df case does remove terms: checked).
    """
    from sklearn.feature_extraction.text import TfidfVectorizer

    result = weigh_corpus(sample, _study(**ours), Reporter())
    if "max_df" in ours:
        # The case must exercise the upper bound: some language has terms above it.
        above = 0
        for language, group in sample.groupby("language"):
            df = document_frequency(count_terms(group["terms"].tolist(), group["answer_id"].tolist(), language).matrix)
            bound = ours["max_df"] * len(group) if isinstance(ours["max_df"], float) else ours["max_df"]
            above += int((df > bound).sum())
        assert above > 0
    for language, group in sample.groupby("language"):
        vectorizer = TfidfVectorizer(analyzer=lambda terms: terms, dtype=np.float64, **theirs)
        reference = vectorizer.fit_transform(group["terms"].tolist())
        aligned = _aligned(reference, vectorizer.get_feature_names_out().tolist(), result.counts[language].terms)
        assert abs(aligned - result.weighted[language]).max() <= 1e-12, language
        assert result.counts[language].row_ids.tolist() == group["answer_id"].tolist()


def test_unsmoothed_idf_equals_scikit_learn_with_idf_add(sample: pd.DataFrame) -> None:
    """scikit-learn ``TfidfTransformer(smooth_idf=False)``: idf = ln(n/df) + 1.

    Our ``idf = "ln"`` is ln(N/df) (no +1): its idf is scikit-learn's minus 1,
    and the scheme ``idf="log", base="e", idf_add=1`` gives scikit-learn's
    matrix (1e-12), here with sublinear tf and l2.
    """
    from sklearn.feature_extraction.text import TfidfTransformer

    group = sample[sample["language"] == "es"]
    counts = count_terms(group["terms"].tolist(), group["answer_id"].tolist(), "es")
    transformer = TfidfTransformer(smooth_idf=False, sublinear_tf=True, norm="l2")
    reference = transformer.fit_transform(counts.matrix)
    plain = TfidfWeighting(WeightingScheme.from_settings(_study(idf="ln").weigh)).fit(counts.matrix)
    np.testing.assert_allclose(plain.idf_, transformer.idf_ - 1.0, rtol=0, atol=1e-12)
    shifted = TfidfWeighting(WeightingScheme(tf="log", idf="log", norm="l2", base="e", idf_add=1.0))
    assert abs(shifted.fit_transform(counts.matrix) - reference).max() <= 1e-12


def test_scikit_learn_documented_idf_values() -> None:
    """scikit-learn ``TfidfTransformer`` docstring formulas on ["the cat sat", "the cat sat on the mat", "dogs and cats"].

    Values [calc] (REFERENCE_VALUES): smoothed idf 1.287682 (df = 2), 1.693147
    (df = 1); unsmoothed (ours + 1) 1.405465, 2.098612.
    """
    counts = count_terms([d.split() for d in ["the cat sat", "the cat sat on the mat", "dogs and cats"]], ["1", "2", "3"], "en")
    terms = counts.terms.tolist()
    smooth = dict(zip(terms, TfidfWeighting(WeightingScheme(idf="smooth")).fit(counts.matrix).idf_))
    plain = dict(zip(terms, TfidfWeighting(WeightingScheme(idf="log", idf_add=1.0)).fit(counts.matrix).idf_))
    assert smooth["cat"] == pytest.approx(1.287682, abs=1e-6)
    assert smooth["mat"] == pytest.approx(1.693147, abs=1e-6)
    assert plain["cat"] == pytest.approx(1.405465, abs=1e-6)
    assert plain["mat"] == pytest.approx(2.098612, abs=1e-6)


def test_pooled_tagged_matrix_equals_scikit_learn_on_tagged_terms(sample: pd.DataFrame) -> None:
    """scikit-learn ``TfidfVectorizer`` on the whole sample with every term tagged ``lang:term``: equals our pooled matrix (1e-12).

    The pooled idf is fitted over the answers of every language, in input order.
    """
    from sklearn.feature_extraction.text import TfidfVectorizer

    result = weigh_corpus(sample, _study(tf="log", idf="smooth", norm="l2"), Reporter())
    tagged = [[tag(lang, t) for t in terms] for lang, terms in zip(sample["language"], sample["terms"])]
    vectorizer = TfidfVectorizer(analyzer=lambda terms: terms, sublinear_tf=True)
    reference = vectorizer.fit_transform(tagged)
    aligned = _aligned(reference, vectorizer.get_feature_names_out().tolist(), result.pooled.terms)
    assert result.pooled.row_ids.tolist() == sample["answer_id"].tolist()
    assert abs(aligned - result.pooled_weighted).max() <= 1e-12


# ---------------------------------------------------------------- gensim

GENSIM_CASES = [
    # (gensim smartirs, our scheme with base 2): letters whose formulas agree
    (None, WeightingScheme("raw", "log", "l2", "2")),
    ("nfc", WeightingScheme("raw", "log", "l2", "2")),
    ("lfc", WeightingScheme("log", "log", "l2", "2")),
    ("afc", WeightingScheme("augmented", "log", "l2", "2")),
    ("bfc", WeightingScheme("binary", "log", "l2", "2")),
    ("Lfc", WeightingScheme("logave", "log", "l2", "2")),
    ("npc", WeightingScheme("raw", "prob", "l2", "2")),
    ("lnn", WeightingScheme("log", "none", "none", "2")),
    ("Lpn", WeightingScheme("logave", "prob", "none", "2")),
]


def _gensim_matrix(docs: list[list[str]], terms: np.ndarray, smartirs: str | None) -> sp.csr_matrix:
    from gensim.corpora import Dictionary
    from gensim.models import TfidfModel

    dictionary = Dictionary(docs)
    bows = [dictionary.doc2bow(d) for d in docs]
    column = {t: i for i, t in enumerate(terms)}
    # gensim's 'p' takes log2(0) for a term in every document before max(0, ·).
    with np.errstate(divide="ignore"):
        model = TfidfModel(bows, id2word=dictionary, smartirs=smartirs)
        vectors = [model[bow] for bow in bows]
    rows = [i for i, vec in enumerate(vectors) for _ in vec]
    cols = [column[dictionary[tid]] for vec in vectors for tid, _ in vec]
    vals = [w for vec in vectors for _, w in vec]
    return sp.csr_matrix((vals, (rows, cols)), shape=(len(docs), len(terms)))


@pytest.mark.parametrize(("smartirs", "scheme"), GENSIM_CASES, ids=[str(c[0]) for c in GENSIM_CASES])
def test_gensim_tfidf_model_with_matching_letters(sample: pd.DataFrame, smartirs: str | None, scheme: WeightingScheme) -> None:
    """gensim ``TfidfModel`` (gensim.models.tfidfmodel, 4.4) on the German and Russian sample: equal to 1e-12.

    gensim's default is raw tf × log2(N/df), L2. Its SMART letters use base 2
    everywhere; the formulas agree with ours (Manning et al. 2008, Fig. 6.15)
    for tf n/l/a/b/L, norm n/c, idf n/p, and gensim's 'f' = our 't' (log N/df).
    """
    for language in ("de", "ru"):
        docs = sample.loc[sample["language"] == language, "terms"].tolist()
        counts = count_terms(docs, [str(i) for i in range(len(docs))], language)
        ours = TfidfWeighting(scheme).fit_transform(counts.matrix)
        theirs = _gensim_matrix(docs, counts.terms, smartirs)
        assert abs(ours - theirs).max() <= 1e-12


def test_gensim_differences_are_as_documented() -> None:
    """gensim ``TfidfModel`` 4.4 differs where its letters mean other formulas (gensim.models.tfidfmodel source).

    1. gensim's 't' idf is log2((N + 1)/df), not Manning's log(N/df): it equals
       ours only after that shift.
    2. gensim drops entries whose idf is ~0 (a term in every document) from its
       output; we store no zero entries either, but keep the term's column.
    """
    docs = [["price", "good", "service"], ["price", "bad"], ["price", "good"], ["price", "slow", "service"]]
    counts = count_terms(docs, ["1", "2", "3", "4"], "en")
    theirs_t = _gensim_matrix(docs, counts.terms, "ntn")
    ours_t = TfidfWeighting(WeightingScheme("raw", "log", "none", "2")).fit(counts.matrix)
    df = ours_t.df_
    shifted = TfidfWeighting(WeightingScheme("raw", "none", "none", "2")).fit_transform(counts.matrix)
    shifted = shifted.multiply(np.log2((len(docs) + 1) / df)).tocsr()
    assert abs(theirs_t - shifted).max() <= 1e-12
    assert abs(theirs_t - ours_t.transform(counts.matrix)).max() > 0.1

    price = counts.terms.tolist().index("price")
    theirs = _gensim_matrix(docs, counts.terms, None)
    ours = TfidfWeighting(WeightingScheme("raw", "log", "l2", "2")).fit_transform(counts.matrix)
    assert theirs[:, price].nnz == 0 and ours[:, price].nnz == 0
    assert ours.shape[1] == len(counts.terms)
    assert abs(theirs - ours).max() <= 1e-12
