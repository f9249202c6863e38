"""The weigh stage end to end: selection of answers, survey weights, pooling, notes and every bad input."""

from __future__ import annotations

import threading

import numpy as np
import pandas as pd
import pytest

from workbench.core.errors import Cancelled, InputError, SettingsError
from workbench.core.progress import Reporter
from workbench.core.settings import study_from_dict
from workbench.core.weigh import weigh_corpus


def _answers(**extra: list) -> pd.DataFrame:
    frame = pd.DataFrame(
        {
            "answer_id": ["r1|q", "r2|q", "r3|q", "r4|q", "r5|q", "r6|q", "r7|q"],
            "language": ["de", "fr", "de", "und", "de", "fr", "de"],
            "enters_weighting": [True, True, True, True, False, True, True],
            "terms": [
                ["preis", "gut", "preis"],
                ["prix", "service"],
                ["preis", "schlecht"],
                ["ok"],
                ["preis"],
                ["prix", "bon"],
                ["gut", "service"],
            ],
        }
    )
    for name, values in extra.items():
        frame[name] = values
    return frame


def _study(weigh: dict | None = None, **sections: dict) -> object:
    return study_from_dict({"sources": [{"path": "x"}], "weigh": {"min_df": 1, **(weigh or {})}, **sections})


def test_only_answers_that_enter_weighting_are_in_the_matrices() -> None:
    """enters_weighting False and language 'und' stay out (unless terms.include_und); rows keep input order."""
    result = weigh_corpus(_answers(), _study(), Reporter())
    assert sorted(result.counts) == ["de", "fr"]
    assert result.counts["de"].row_ids.tolist() == ["r1|q", "r3|q", "r7|q"]
    assert result.counts["fr"].row_ids.tolist() == ["r2|q", "r6|q"]
    assert result.pooled.row_ids.tolist() == ["r1|q", "r2|q", "r3|q", "r6|q", "r7|q"]
    for language, counts in result.counts.items():
        assert result.weighted[language].shape == counts.matrix.shape
        assert len(result.idf[language]) == counts.matrix.shape[1]
    assert any("2 answers do not enter weighting" in note for note in result.notes)

    with_und = weigh_corpus(_answers(), _study(terms={"include_und": True}), Reporter())
    assert sorted(with_und.counts) == ["de", "fr", "und"]


def test_pooled_idf_is_fitted_over_every_language() -> None:
    """A tagged term keeps its df in the pooled matrix but N is the number of pooled answers (here ln idf)."""
    result = weigh_corpus(_answers(), _study({"idf": "ln", "tf": "raw", "norm": "none"}), Reporter())
    de_terms = result.counts["de"].terms.tolist()
    pooled_terms = result.pooled.terms.tolist()
    preis_de = result.idf["de"][de_terms.index("preis")]
    preis_pooled = result.idf["pooled"][pooled_terms.index("de:preis")]
    assert preis_de == pytest.approx(np.log(3 / 2))
    assert preis_pooled == pytest.approx(np.log(5 / 2))
    assert result.n_documents == {"de": 3.0, "fr": 2.0, "pooled": 5.0}


def test_glossary_pooling() -> None:
    """weigh.pooled = "glossary" merges mapped terms into concepts; without a glossary it is a settings error."""
    glossary = {("de", "preis"): "price", ("fr", "prix"): "price"}
    result = weigh_corpus(_answers(), _study({"pooled": "glossary"}), Reporter(), glossary=glossary)
    terms = result.pooled.terms.tolist()
    assert "price" in terms and "de:preis" not in terms and "fr:prix" not in terms
    price = terms.index("price")
    assert result.document_frequency["pooled"][price] == 4
    with pytest.raises(SettingsError, match="weigh.pooled = 'glossary' needs a glossary"):
        weigh_corpus(_answers(), _study({"pooled": "glossary"}), Reporter())
    tagged = weigh_corpus(_answers(), _study(), Reporter(), glossary=glossary)
    assert "de:preis" in tagged.pooled.terms.tolist()
    assert any("keep their language tags" in note for note in tagged.notes)


def test_survey_weights_enter_n_df_and_kish() -> None:
    """With columns.weight, N = Σ w and df = Σ of the weights of answers containing the term; Kish n_eff = (Σw)²/Σw².

    Kish, L. (1965), *Survey Sampling*, Wiley: n_eff = (Σ w)² / Σ w² [recalled from memory].
    """
    weights = [2.0, 1.0, 0.5, 1.0, 9.0, 3.0, 1.5]
    result = weigh_corpus(_answers(weight=weights), _study(columns={"weight": "w"}), Reporter())
    w_de = np.array([2.0, 0.5, 1.5])
    assert result.n_documents["de"] == pytest.approx(w_de.sum())
    preis = result.counts["de"].terms.tolist().index("preis")
    assert result.document_frequency["de"][preis] == pytest.approx(2.5)
    assert result.idf["de"][preis] == pytest.approx(np.log((1 + 4.0) / (1 + 2.5)) + 1)
    assert result.effective_n["de"] == pytest.approx(16 / (4 + 0.25 + 2.25))
    pooled_w = np.array([2.0, 1.0, 0.5, 3.0, 1.5])
    assert result.effective_n["pooled"] == pytest.approx(pooled_w.sum() ** 2 / (pooled_w**2).sum())
    unweighted = weigh_corpus(_answers(), _study(), Reporter())
    assert unweighted.effective_n == {"de": 3.0, "fr": 2.0, "pooled": 5.0}
    assert result.weighted_by == "w" and "sums of weights" in result.describe()
    table = result.keywords["de"].set_index(["ranking", "term"])
    assert table.loc[("doc_share", "preis"), "df"] == 2
    assert table.loc[("doc_share", "preis"), "df_weighted"] == pytest.approx(2.5)


def test_zero_weights_are_reported_and_kept() -> None:
    """Answers of weight 0 stay as rows but are reported with the first answer id; a term seen only there is dropped."""
    answers = _answers(weight=[1.0, 1.0, 0.0, 1.0, 1.0, 1.0, 1.0])
    result = weigh_corpus(answers, _study(columns={"weight": "w"}), Reporter())
    assert "r3|q" in result.counts["de"].row_ids.tolist()
    assert any("1 answers have weight 0 (first: answer 'r3|q')" in w for w in result.warnings)
    assert "schlecht" not in result.counts["de"].terms.tolist()
    assert any("occur only in answers of weight 0" in w for w in result.warnings)


@pytest.mark.parametrize(
    ("weights", "message"),
    [
        ([1.0, -1.0, 1.0, 1.0, 1.0, -2.0, 1.0], r"2 answers have a negative weight in column 'w' \(first: answer 'r2\|q', weight -1\)"),
        ([1.0, None, 1.0, 1.0, 1.0, 1.0, np.nan], r"2 answers have a missing or non-numeric weight in column 'w' \(first: answer 'r2\|q'"),
        ([1.0, "heavy", 1.0, 1.0, 1.0, 1.0, 1.0], r"1 answers have a missing or non-numeric weight .*value 'heavy'"),
        ([1.0, np.inf, 1.0, 1.0, 1.0, 1.0, 1.0], r"1 answers have an infinite weight in column 'w' \(first: answer 'r2\|q'\)"),
        ([0.0] * 7, r"every answer that enters weighting has weight 0 in column 'w'"),
        ([0.0, 1.0, 0.0, 1.0, 1.0, 1.0, 0.0], r"every answer in language 'de' has weight 0"),
    ],
)
def test_bad_weights_are_one_line_input_errors(weights: list, message: str) -> None:
    """Negative, missing, non-numeric, infinite and all-zero weights each stop the stage with what, where and the fix."""
    with pytest.raises(InputError, match=message) as caught:
        weigh_corpus(_answers(weight=weights), _study(columns={"weight": "w"}), Reporter())
    assert "\n" not in str(caught.value)


def test_weights_of_answers_outside_the_matrices_are_not_checked() -> None:
    """A missing weight on an answer that does not enter weighting (r5) does not matter."""
    weights = [1.0, 1.0, 1.0, 1.0, None, 1.0, 1.0]
    result = weigh_corpus(_answers(weight=weights), _study(columns={"weight": "w"}), Reporter())
    assert result.n_documents["pooled"] == 5


def test_weight_column_named_but_absent() -> None:
    """The study names a weight column the answers do not carry: say so, point at columns.weight."""
    with pytest.raises(InputError, match="names weight column 'w' but the answers carry no weights"):
        weigh_corpus(_answers(), _study(columns={"weight": "w"}), Reporter())


def test_every_answer_filtered_out() -> None:
    """No term reaches min_df: a clear error telling which setting to lower."""
    with pytest.raises(InputError, match=r"no terms remain after filters: .*lower weigh.min_df \(now 10\)"):
        weigh_corpus(_answers(), _study({"min_df": 10}), Reporter())


def test_single_answer_is_degenerate_but_does_not_crash() -> None:
    """One answer: df = N for every term, so log idf is 0 — reported in the warnings, not an error."""
    answers = _answers().iloc[[0]]
    result = weigh_corpus(answers, _study({"idf": "log10"}), Reporter())
    assert result.weighted["de"].nnz == 0
    assert any("single answer: idf is degenerate" in w and "every weight is 0" in w for w in result.warnings)
    smooth = weigh_corpus(answers, _study(), Reporter())
    assert smooth.weighted["de"].nnz == 2
    assert any("only reflect term frequency" in w for w in smooth.warnings)


def test_no_answer_enters_weighting() -> None:
    """Every answer flagged, excluded or undetermined: one line with the counts and where to look."""
    answers = _answers(enters_weighting=[False] * 7)
    with pytest.raises(InputError, match=r"no answer enters weighting \(7 answers: 7 flagged or excluded, 1 of undetermined"):
        weigh_corpus(answers, _study(), Reporter())


def test_answers_without_any_term() -> None:
    """Every term list is empty (e.g. every word a stop word): point at the terms stage."""
    answers = _answers(terms=[[]] * 7)
    with pytest.raises(InputError, match="has any term; check the terms stage"):
        weigh_corpus(answers, _study(), Reporter())


def test_unknown_smart_letter_in_the_study() -> None:
    """weigh.smart with an unknown letter is a SettingsError listing the valid letters."""
    with pytest.raises(SettingsError, match="unknown document-frequency letter 'x'; valid: 'n' .* 't' .* 'p'"):
        weigh_corpus(_answers(), _study({"smart": "lxc"}), Reporter())


@pytest.mark.parametrize(
    ("answers", "message"),
    [
        (_answers().drop(columns=["terms"]), "no column 'terms'; run the terms stage first"),
        (_answers(terms=[["a"], None, ["b"], ["c"], ["d"], ["e"], ["f"]]), r"1 answers have no term list .*first: answer 'r2\|q'"),
    ],
)
def test_malformed_answers_tables(answers: pd.DataFrame, message: str) -> None:
    """A missing terms column or a missing term list is a one-line InputError."""
    with pytest.raises(InputError, match=message):
        weigh_corpus(answers, _study(), Reporter())


def test_a_language_without_terms_after_filters_is_a_warning() -> None:
    """One language losing every term to the filters leaves an empty matrix and a warning, not an error."""
    answers = _answers(terms=[["a", "b"], ["x"], ["a"], ["u"], ["v"], ["y"], ["a", "b"]])
    result = weigh_corpus(answers, _study({"min_df": 2}), Reporter())
    assert result.counts["fr"].matrix.shape == (2, 0)
    assert any("language 'fr': no terms remain after filters" in w for w in result.warnings)
    assert result.keywords["fr"].empty


def test_relative_tf_through_the_stage_uses_lengths_before_filters() -> None:
    """Relative frequency divides by the answer's number of terms before min_df removed any."""
    result = weigh_corpus(_answers(), _study({"tf": "relative", "idf": "none", "norm": "none", "min_df": 2}), Reporter())
    de = result.counts["de"]
    assert de.terms.tolist() == ["gut", "preis"]
    np.testing.assert_allclose(result.weighted["de"].toarray(), [[1 / 3, 2 / 3], [0, 1 / 2], [1 / 2, 0]])


def test_describe_states_the_formulas_and_the_filters() -> None:
    """The result's description carries the formulas (for the manifest and the README)."""
    result = weigh_corpus(_answers(), _study({"smart": "ltc", "max_terms": 50}), Reporter())
    text = result.describe()
    assert "1 + log10(c)" in text and "log10(N / df)" in text and "SMART 'ltc'" in text
    assert "at most 50 terms" in text and "no respondent weights" in text


def test_cancel_stops_the_stage() -> None:
    """A set cancel event raises Cancelled at the next progress report."""
    event = threading.Event()
    event.set()
    with pytest.raises(Cancelled):
        weigh_corpus(_answers(), _study(), Reporter(cancel=event))


def test_progress_is_reported() -> None:
    """The stage reports progress under the name 'weigh', ending at done == total."""
    seen: list[tuple[str, int, int, str]] = []
    weigh_corpus(_answers(), _study(), Reporter(callback=lambda *args: seen.append(args)))
    assert {s[0] for s in seen} == {"weigh"}
    assert seen[-1][1] == seen[-1][2] > 0
