"""Respondent groups and their keywords.

A *grouping* is one group column of the study (``group:<name>`` on the answers
table) or a combination of several (``country&age_band``, whose values join the
column values with ``" & "``). Respondents with no value in a grouping's
column(s) are left out of that grouping and counted in a note.

Two keyword lists per group:

**Mean TF-IDF** over the group's answers — the study's own weighting scheme
(weigh stage), averaged with respondent weights::

    score_gt = Σ_{i ∈ g} w_i x_it / Σ_{i ∈ g} w_i

with ``x_it`` the weighted (TF-IDF) value of term t in answer i.

**Class-based TF-IDF** (c-TF-IDF; Grootendorst 2022, "BERTopic: Neural topic
modeling with a class-based TF-IDF procedure", arXiv:2203.05794, eq. 1, and
the ``ClassTfidfTransformer`` of the BERTopic package): all answers of a group
are treated as one document (a class ``c``)::

    W_tc = (tf_tc / Σ_t' tf_t'c) · ln(1 + A / f_t)

``tf_tc`` is the (weighted) frequency of term t in class c, ``f_t = Σ_c tf_tc``
its frequency over all classes and ``A = mean_c Σ_t tf_tc`` the average number
of words per class. The L1 normalisation of ``tf`` follows the package (the
paper writes plain ``tf``; the normalisation changes scores, not the order
within a class). Unlike the package, ``A`` is not truncated to an integer.
Frequencies are counted in the study's comparison unit (respondents
mentioning by default, or tokens), which every table states.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

import numpy as np
import pandas as pd

from workbench.core.corpus import GROUP_PREFIX, RESPONDENT_ID, group_column

#: Joins the values of combined group columns.
COMBINE_SEPARATOR = " & "
#: Joins the names of combined group columns in a grouping's name.
NAME_SEPARATOR = "&"


@dataclass
class Grouping:
    """One way to split respondents: a name, a value per respondent, and the values seen."""

    name: str
    columns: list[str]
    by_respondent: pd.Series  #: respondent id -> group value (missing values dropped)
    values: list[str]
    missing: int  #: respondents with no value in (one of) the columns


def _as_text(column: pd.Series) -> pd.Series:
    """Group values as stripped text; empty and missing cells become missing."""
    text = column.astype("string").str.strip()
    return text.mask(text == "")


def groupings(answers: pd.DataFrame, columns: list[str], combinations: list[list[str]]) -> tuple[list[Grouping], list[str]]:
    """Build the groupings the study asks for; returns them and notes on unknown columns.

    ``columns`` empty means every ``group:<name>`` column of the answers table.
    Values are read per respondent (the first answer's value: group columns
    are respondent-level).
    """
    notes: list[str] = []
    present = [c[len(GROUP_PREFIX) :] for c in answers.columns if str(c).startswith(GROUP_PREFIX)]
    wanted = list(columns) if columns else present
    first = answers.drop_duplicates(RESPONDENT_ID)
    first = first.set_index(pd.Index(first[RESPONDENT_ID].astype(str).to_numpy(dtype=object), dtype=object))
    out: list[Grouping] = []
    for spec in [[c] for c in wanted] + [list(c) for c in combinations]:
        unknown = [c for c in spec if c not in present]
        if unknown:
            notes.append(
                f"group column(s) {', '.join(repr(c) for c in unknown)} not found on the answers "
                f"(group columns present: {', '.join(present) or 'none'}); add them to columns.groups"
            )
            continue
        parts = [_as_text(first[group_column(c)]) for c in spec]
        valid = np.logical_and.reduce([p.notna().to_numpy() for p in parts])
        if len(spec) == 1:
            joined = parts[0]
        else:
            joined = parts[0].astype(object)
            for p in parts[1:]:
                joined = joined + COMBINE_SEPARATOR + p
        series = joined[valid].astype(str).astype(object)
        values = sorted(series.unique().tolist())
        out.append(
            Grouping(
                name=NAME_SEPARATOR.join(spec),
                columns=spec,
                by_respondent=series,
                values=values,
                missing=int((~valid).sum()),
            )
        )
    return out, notes


def class_tfidf(sums: np.ndarray) -> np.ndarray:
    """c-TF-IDF of a ``(classes, terms)`` frequency array (formula in the module docstring).

    A leading batch axis ``(batch, classes, terms)`` is allowed: each batch
    entry is computed on its own (the bootstrap passes many resamples at once).
    """
    sums = np.asarray(sums, dtype=np.float64)
    per_class = sums.sum(axis=-1, keepdims=True)
    f_t = sums.sum(axis=-2, keepdims=True)
    average = per_class.mean(axis=-2, keepdims=True) if sums.shape[-2] else np.zeros_like(per_class)
    with np.errstate(divide="ignore", invalid="ignore"):
        tf = np.where(per_class > 0, sums / per_class, 0.0)
        idf = np.where(f_t > 0, np.log1p(average / f_t), 0.0)
    return tf * idf


def class_tfidf_score(sums: np.ndarray, totals: np.ndarray) -> np.ndarray:
    """c-TF-IDF as a :data:`workbench.core.stability.ScoreFunction` (totals unused)."""
    return class_tfidf(sums)


def table_name(*parts: object) -> str:
    """A table name safe as a file name: parts joined by ``__``, each reduced to letters, digits and ``._+-``.

    Other characters (spaces, slashes, colons...) become ``-`` (``" & "`` becomes ``+``), so
    ``("keyness", "country", "DE")`` gives ``keyness__country__DE``.
    """
    cleaned = []
    for part in parts:
        text = str(part).replace(COMBINE_SEPARATOR, "+").replace(NAME_SEPARATOR, "+")
        text = re.sub(r"[^\w.+-]+", "-", text).strip("-.") or "x"
        cleaned.append(text[:60])
    return "__".join(cleaned)
