"""Groupings of respondents, class-based TF-IDF, and table names."""

from __future__ import annotations

import re

import numpy as np
import pandas as pd
import pytest
from sklearn.preprocessing import normalize

from workbench.core.groups import class_tfidf, groupings, table_name


def test_class_tfidf_matches_bertopic_procedure() -> None:
    """Grootendorst (2022), arXiv:2203.05794, eq. 1, as implemented by BERTopic's ClassTfidfTransformer
    (bertopic/vectorizers/_ctfidf.py): tf L1-normalised per class (sklearn.preprocessing.normalize),
    idf = ln(A / f_t + 1) with A the mean number of words per class. The table's mean class size is an
    integer (15), so the package's int() truncation of A does not change the reference."""
    sums = np.array([[4.0, 0.0, 6.0, 0.0], [2.0, 10.0, 3.0, 5.0]])
    tf = normalize(sums, norm="l1", axis=1)
    average = int(sums.sum(axis=1).mean())
    idf = np.log(average / sums.sum(axis=0) + 1)
    np.testing.assert_allclose(class_tfidf(sums), tf * idf)


def test_class_tfidf_by_hand() -> None:
    """Worked by hand from W_tc = (tf_tc / Σ tf_c) · ln(1 + A / f_t): two classes of 4 words,
    term 'x' only in class 0 (3 times): W = 3/4 · ln(1 + 4/3) = 0.635 (3 d.p.)."""
    sums = np.array([[3.0, 1.0], [0.0, 4.0]])
    assert class_tfidf(sums)[0, 0] == pytest.approx(0.75 * np.log(1 + 4 / 3))
    assert round(float(class_tfidf(sums)[0, 0]), 3) == 0.635
    assert class_tfidf(sums)[1, 0] == 0.0


def _answers() -> pd.DataFrame:
    return pd.DataFrame(
        {
            "respondent_id": ["r1", "r1", "r2", "r3", "r4"],
            "answer_id": ["r1|a", "r1|b", "r2|a", "r3|a", "r4|a"],
            "group:country": ["DE", "DE", "FR", "DE", None],
            "group:age": ["young", "young", "old", "old", "old"],
            "group:wave": ["W1"] * 5,
        }
    )


def test_groupings_columns_combinations_and_missing() -> None:
    """Groupings: one per column, combinations joined with ' & ', respondents without a value counted."""
    found, notes = groupings(_answers(), [], [["country", "age"]])
    by_name = {g.name: g for g in found}
    assert set(by_name) == {"country", "age", "wave", "country&age"}
    assert by_name["country"].values == ["DE", "FR"]
    assert by_name["country"].missing == 1
    assert by_name["country&age"].by_respondent.to_dict() == {"r1": "DE & young", "r2": "FR & old", "r3": "DE & old"}
    assert by_name["wave"].values == ["W1"]
    assert notes == []


def test_unknown_group_column_is_a_note() -> None:
    """Bad input: a compare.groups entry that is not a group column becomes a note naming the ones present."""
    found, notes = groupings(_answers(), ["segment"], [])
    assert found == []
    assert "'segment'" in notes[0] and "country, age, wave" in notes[0]


def test_table_names_are_safe_file_names() -> None:
    """Table names: parts joined by '__', anything but letters, digits and ._+- becomes '-'."""
    assert table_name("keyness", "country", "DE", "vs_rest", "de") == "keyness__country__DE__vs_rest__de"
    assert table_name("keyness", "country&age", "DE & 55+", "vs_rest", "pooled") == (
        "keyness__country+age__DE+55+__vs_rest__pooled"
    )
    name = table_name("kwic", "a/b: c\\d*?", "Größe")
    assert re.fullmatch(r"[\w.+-]+(__[\w.+-]+)*", name)
    assert "/" not in name and "\\" not in name and "Größe" in name
