"""The compare stage end to end: weigh's output in, named tables and notes out."""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from scipy.stats import chi2_contingency

from workbench.core.compare import compare_corpus
from workbench.core.dictd import encode_number
from workbench.core.errors import InputError
from workbench.core.progress import Reporter
from workbench.core.settings import study_from_dict
from workbench.core.weigh import weigh_corpus

VOCAB = {
    "de": ["preis", "lieferung", "qualität", "service", "app", "schnell", "teuer", "gut"],
    "fr": ["prix", "livraison", "qualité", "service", "appli", "rapide", "cher", "bon"],
}


def _answers(seed: int = 4, n: int = 400, weights: bool = False) -> pd.DataFrame:
    """Invented answers: older respondents mention delivery more often, in both languages."""
    rng = np.random.default_rng(seed)
    rows = []
    for r in range(n):
        lang = "de" if r < n * 0.55 else "fr"
        age = ["18-34", "35-54", "55+"][r % 3]
        segment = "tiny" if r % 40 == 0 else "main"
        for q in ("q1", "q2"):
            words = list(rng.choice(VOCAB[lang], size=int(rng.integers(1, 4))))
            if age == "55+" and rng.random() < 0.5:
                words.append(VOCAB[lang][1])
            text = " ".join(w.capitalize() for w in words)
            rows.append(
                {
                    "answer_id": f"r{r}|{q}", "respondent_id": f"r{r}", "question": q, "language": lang,
                    "enters_weighting": True, "terms": words, "clean_text": text, "raw_text": text,
                    "group:country": "DE" if lang == "de" else "FR", "group:age": age,
                    "group:segment": segment, "group:wave": "W1",
                    "weight": (0.5 if r % 2 else 1.5) if weights else 1.0,
                }
            )  # fmt: skip
    return pd.DataFrame(rows)


def _study(tmp_path: Path, **compare: object):
    data = {
        "sources": [{"path": "answers.csv"}],
        "languages": {"expected": ["de", "fr"]},
        "columns": {"groups": ["country", "age", "segment", "wave"]},
        "weigh": {"min_df": 1},
        "compare": {"bootstrap": 20, "top_k": 5, **compare},
    }
    return study_from_dict(data, base_dir=tmp_path)


def _run(tmp_path: Path, answers: pd.DataFrame | None = None, **compare: object):
    answers = _answers() if answers is None else answers
    study = _study(tmp_path, **compare)
    weighed = weigh_corpus(answers, study, Reporter())
    return compare_corpus(answers, weighed, study, Reporter()), answers


def test_group_keyness_equals_scipy_on_the_answers(tmp_path: Path) -> None:
    """End to end: the G² and p of 'lieferung' for age 55+ against the rest (German answers) equal
    scipy.stats.chi2_contingency(lambda_="log-likelihood", correction=False) on a crosstab built
    straight from the answers table with pandas (respondent mentions the term in any answer)."""
    result, answers = _run(tmp_path)
    table = result.tables["keyness__age__55+__vs_rest__de"].set_index("term")
    de = answers[answers["language"] == "de"]
    per_respondent = de.groupby("respondent_id").agg(
        mentions=("terms", lambda lists: any("lieferung" in t for t in lists)), age=("group:age", "first")
    )
    cross = pd.crosstab(per_respondent["mentions"], per_respondent["age"] == "55+").to_numpy()
    ref = chi2_contingency(cross, lambda_="log-likelihood", correction=False)
    assert table.loc["lieferung", "g2"] == pytest.approx(ref.statistic)
    assert table.loc["lieferung", "p"] == pytest.approx(ref.pvalue)
    assert table.loc["lieferung", "significant"]
    assert table.loc["lieferung", "direction"] == "over"
    assert any("lieferung" in f for f in result.findings)


def test_tables_name_their_counting_and_are_file_safe(tmp_path: Path) -> None:
    """Every frequency table says which counting it used (column and note); names are file-safe."""
    result, _ = _run(tmp_path)
    for name, table in result.tables.items():
        assert re.fullmatch(r"[\w.+~-]+", name), name
        if name.startswith(("keyness__", "group_keywords__", "keyness_summary")):
            assert set(table["counting"]) == {"respondents"}, name
            assert "respondents mentioning" in result.table_notes[name]
    tokens, _ = _run(tmp_path, count="tokens")
    table = tokens.tables["keyness__age__55+__vs_rest__de"]
    assert set(table["counting"]) == {"tokens"}
    assert "occurrence" in tokens.table_notes["keyness__age__55+__vs_rest__de"]


def test_single_value_small_groups_and_reference(tmp_path: Path) -> None:
    """Bad input: a column with one value says 'nothing to compare'; a group below min_group_size is
    reported in group_sizes and gets no keyness table; a reference group replaces 'the rest'."""
    result, _ = _run(tmp_path, min_group_size=30, reference="18-34")
    notes = " ".join(result.notes)
    assert "group column 'wave' has one value ('W1'): nothing to compare" in notes
    sizes = result.tables["group_sizes"].set_index(["grouping", "unit", "group"])
    assert sizes.loc[("segment", "de", "tiny"), "status"].startswith("below minimum")
    assert not any(n.startswith("keyness__segment__tiny") for n in result.tables)
    assert "keyness__segment__main__vs_rest__de" not in result.tables  # its rest is the tiny group
    assert sizes.loc[("age", "de", "18-34"), "status"] == "reference"
    assert "keyness__age__55+__vs_18-34__de" in result.tables
    summary = result.tables["keyness_summary"].set_index("table")
    row = summary.loc["keyness__age__55+__vs_18-34__de"]
    assert row["n_reference"] == sizes.loc[("age", "de", "18-34"), "respondents"]
    keywords = result.tables["group_keywords__segment__de"]
    assert keywords.loc[keywords["group"] == "tiny", "below_min_size"].all()


def test_weighted_study_uses_kish(tmp_path: Path) -> None:
    """Weights: frequencies are weighted, the table says so and the note names Kish's n_eff."""
    answers = _answers(weights=True)
    study = _study(tmp_path)
    study.columns.weight = "w"
    weighed = weigh_corpus(answers, study, Reporter())
    result = compare_corpus(answers, weighed, study, Reporter())
    table = result.tables["keyness__age__55+__vs_rest__de"]
    assert table["weighted"].all()
    assert "Kish" in result.table_notes["keyness__age__55+__vs_rest__de"]
    sizes = result.tables["group_sizes"].set_index(["grouping", "unit", "group"])
    row = sizes.loc[("age", "de", "55+")]
    assert row["n_eff"] < row["respondents"]  # weights 0.5 / 1.5 lower the effective size


def _tiny_dictionary(folder: Path) -> Path:
    """A German-French dictionary in the dictd format (headword<TAB>base-64 offset<TAB>base-64 length)."""
    entries = [("lieferung", "Lieferung\nlivraison\n"), ("preis", "Preis\nprix, récompense\n")]
    data, lines = b"", []
    for head, text in entries:
        raw = text.encode()
        lines.append(f"{head}\t{encode_number(len(data))}\t{encode_number(len(raw))}\n")
        data += raw
    (folder / "freedict-deu-fra.index").write_text("".join(lines), encoding="utf-8")
    (folder / "freedict-deu-fra.dict").write_bytes(data)
    return folder / "freedict-deu-fra.index"


def test_glossary_concepts_and_proposals(tmp_path: Path) -> None:
    """Cross-language: concept shares per language side by side, unmapped terms, glossary problems
    reported, and dictionary proposals offered (not applied)."""
    glossary = tmp_path / "glossary.csv"
    glossary.write_text("concept,language,term\ndelivery,de,lieferung\ndelivery,fr,livraison\n"
                        "delivery,es,entrega\n", encoding="utf-8")  # fmt: skip
    dictionary = _tiny_dictionary(tmp_path)
    result, answers = _run(tmp_path, glossary=str(glossary), dictionaries=[str(dictionary)])
    concepts = result.tables["concepts_by_language"].set_index("concept")
    de = answers[answers["language"] == "de"].groupby("respondent_id")["terms"].agg(
        lambda lists: any("lieferung" in t for t in lists)
    )
    assert concepts.loc["delivery", "share_de"] == pytest.approx(de.mean())
    assert "glossary_problems" in result.tables
    assert any("unknown language" in w for w in result.warnings)
    assert "lieferung" not in set(result.tables["unmapped_terms"]["term"])
    proposals = result.tables["glossary_proposals"]
    row = proposals[(proposals["term_a"] == "preis") & (proposals["term_b"] == "prix")]
    assert len(row) == 1 and row["status"].iat[0] == "new link"
    assert ((proposals["term_a"] == "lieferung") & (proposals["term_b"] == "livraison")).sum() == 0  # already linked
    assert "concept_keyness__de__vs_other_languages" in result.tables


def test_unreadable_dictionary_is_an_input_error(tmp_path: Path) -> None:
    """Bad input: a dictionary that cannot be read stops the stage with one InputError line."""
    broken = tmp_path / "freedict-deu-fra.index"
    broken.write_text("lieferung\tA\n", encoding="utf-8")
    (tmp_path / "freedict-deu-fra.dict").write_bytes(b"x")
    with pytest.raises(InputError, match="line 1 is not a dictd index line"):
        _run(tmp_path, dictionaries=[str(broken)])


def test_no_group_columns(tmp_path: Path) -> None:
    """Without group columns the stage still gives stability tables and says what it needs."""
    answers = _answers().drop(columns=["group:country", "group:age", "group:segment", "group:wave"])
    study = study_from_dict(
        {"sources": [{"path": "a.csv"}], "languages": {"expected": ["de", "fr"]}, "compare": {"bootstrap": 5}},
        base_dir=tmp_path,
    )
    result = compare_corpus(answers, weigh_corpus(answers, study, Reporter()), study, Reporter())
    assert any("no group columns" in n for n in result.notes)
    assert {"stability__de", "stability__fr", "stability__pooled", "unmapped_terms"} <= set(result.tables)


def test_stability_lists_are_the_keyword_tables(tmp_path: Path) -> None:
    """The stability of the weigh stage's keyword lists: for mean_weight and doc_share the listed terms,
    ranks and scores are those of weigh's keyword tables (workbench.core.keywords formulas, recomputed
    here from respondent-level sums), with the stability columns beside them."""
    answers = _answers(weights=True)
    study = _study(tmp_path)
    study.columns.weight = "w"
    weighed = weigh_corpus(answers, study, Reporter())
    result = compare_corpus(answers, weighed, study, Reporter())
    for unit in ("de", "pooled"):
        table = result.tables[f"stability__{unit}"]
        keywords = weighed.keywords[unit]
        for ranking in ("mean_weight", "doc_share"):
            ours = table[table["ranking"] == ranking]
            theirs = keywords[keywords["ranking"] == ranking]
            assert list(ours["term"]) == list(theirs["term"])
            np.testing.assert_allclose(ours["score"], theirs[ranking])
            assert ours["stay_share"].between(0, 1).all()
            assert (ours["resamples"] == 20).all()


def test_findings_with_tied_terms() -> None:
    """Two terms with identical counts in one table tie on G²: the findings list both, once each."""
    from workbench.core.compare import _findings
    from workbench.core.keyness import KeynessTable

    row = {"freq_group": 30.0, "freq_ref": 5.0, "rel_group": 0.3, "rel_ref": 0.05, "share_group": 0.3,
           "share_ref": 0.05, "log_ratio": 2.58, "g2": 25.0, "p": 1e-6, "p_adj": 1e-5, "significant": True,
           "direction": "over", "counting": "respondents", "weighted": False}  # fmt: skip
    table = pd.DataFrame([{"term": "alpha", **row}, {"term": "beta", **row}])
    kt = KeynessTable("A", None, table, tested=2, significant=2, n_target=100, n_reference=100)
    found = _findings([("keyness__g__A__vs_rest__de", "g", "de", kt)], ["de"])
    assert len(found) == 2
    assert "'alpha'" in found[0] and "'beta'" in found[1]
