"""Turn the weigh and compare results into the tables the Keywords view shows.

No statistic is computed here: scores, shares, stability, G², Log Ratio and
adjusted p all come from the core (``WeighResult.keywords`` and the named
tables of ``CompareResult``); this module selects, renames and orders their
columns for display. A comparison of two named groups that the run did not
make is obtained by running the compare stage itself with that reference
group (:func:`pair_study`), exactly what ``termloom run --set
compare.reference=B`` would do.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import pandas as pd

from workbench.core.corpus import RESPONDENT_ID
from workbench.core.pipeline import RunOutputs
from workbench.core.settings import POOLED, Study

if TYPE_CHECKING:
    from workbench.core.compare import CompareResult


def table_name(*parts: object) -> str:
    """The compare stage's name for a table (imported on first use: the compare module loads SciPy's statistics)."""
    from workbench.core.groups import table_name as name

    return name(*parts)

TOP_COLUMNS = ["rank", "term", "score", "share", "mentions", "stability"]
KEYNESS_COLUMNS = ["term", "freq_group", "freq_ref", "share_group", "share_ref", "g2", "log_ratio", "p_adj", "direction"]
#: Rankings offered per kind of scope: (key, label).
RANKINGS = {
    "corpus": [("mean_weight", "mean TF-IDF"), ("doc_share", "share of answers")],
    "group": [("c_tfidf", "class TF-IDF"), ("mean_tfidf", "mean TF-IDF")],
}


# ---------------------------------------------------------------------------- scopes


def units(outputs: RunOutputs) -> list[str]:
    """Languages with a keyword table, then ``pooled``."""
    weighed = outputs.weighed
    if weighed is None:
        return []
    languages = sorted(k for k in weighed.keywords if k != POOLED)
    return languages + ([POOLED] if POOLED in weighed.keywords else [])


def group_columns(outputs: RunOutputs) -> list[str]:
    """Groupings the compare stage made tables for, in the study's order."""
    compared: CompareResult | None = outputs.compared
    if compared is None:
        return []
    sizes = compared.tables.get("group_sizes")
    if sizes is None or sizes.empty:
        return []
    return list(dict.fromkeys(sizes["grouping"].astype(str)))


def group_values(outputs: RunOutputs, grouping: str | None) -> list[str]:
    compared: CompareResult | None = outputs.compared
    if compared is None or not grouping:
        return []
    sizes = compared.tables.get("group_sizes")
    if sizes is None or sizes.empty:
        return []
    values = sizes.loc[sizes["grouping"].astype(str) == grouping, "group"].astype(str)
    return sorted(set(values))


def keyword_scopes(outputs: RunOutputs) -> list[tuple[str, str]]:
    """``(scope id, label)``: each language, pooled, then every group of every grouping in each unit."""
    scopes = []
    for unit in units(outputs):
        scopes.append((f"unit:{unit}", "all languages (pooled)" if unit == POOLED else f"language {unit}"))
    compared = outputs.compared
    if compared is not None:
        for grouping in group_columns(outputs):
            for unit in units(outputs):
                table = compared.tables.get(table_name("group_keywords", grouping, unit))
                if table is None or table.empty:
                    continue
                for value in dict.fromkeys(table["group"].astype(str)):
                    where = "pooled" if unit == POOLED else unit
                    scopes.append((f"group:{grouping}\x1f{value}\x1f{unit}", f"{grouping}={value} · {where}"))
    return scopes


def scope_kind(scope: str | None) -> str:
    return "group" if scope and scope.startswith("group:") else "corpus"


def scope_unit(scope: str | None) -> str | None:
    if not scope:
        return None
    if scope.startswith("unit:"):
        return scope.removeprefix("unit:")
    if scope.startswith("group:"):
        return scope.split("\x1f")[-1]
    return None


# ---------------------------------------------------------------------------- top keywords


def _stability(compared: CompareResult | None, unit: str) -> dict[str, float]:
    if compared is None:
        return {}
    table = compared.tables.get(table_name("stability", unit))
    if table is None or table.empty:
        return {}
    return dict(zip(table["term"].astype(str), table["stay_share"].astype(float), strict=True))


def top_keywords(outputs: RunOutputs, scope: str, ranking: str) -> pd.DataFrame:
    """One scope's top-k list with :data:`TOP_COLUMNS`.

    For a language or the pooled corpus: the weigh stage's keyword table
    (``score`` = the chosen ranking, ``share`` = ``doc_share``, ``mentions`` =
    ``df``) with the compare stage's bootstrap ``stay_share`` where the term is
    in that unit's stability list. For a group: the compare stage's group
    keywords (``share`` = ``share_respondents``, ``mentions`` = respondents,
    ``stability`` = ``stay_share``).
    """
    empty = pd.DataFrame(columns=TOP_COLUMNS)
    weighed = outputs.weighed
    if weighed is None or not scope:
        return empty
    if scope.startswith("unit:"):
        unit = scope.removeprefix("unit:")
        table = weighed.keywords.get(unit)
        if table is None or table.empty:
            return empty
        table = table[table["ranking"] == ranking]
        stability = _stability(outputs.compared, unit)
        terms = table["term"].astype(str)
        return pd.DataFrame(
            {
                "rank": table["rank"].to_numpy(),
                "term": terms.to_numpy(),
                "score": table[ranking].to_numpy(float),
                "share": table["doc_share"].to_numpy(float),
                "mentions": table["df"].to_numpy(),
                "stability": [stability.get(t) for t in terms],
            }
        )
    if scope.startswith("group:") and outputs.compared is not None:
        grouping, value, unit = scope.removeprefix("group:").split("\x1f")
        table = outputs.compared.tables.get(table_name("group_keywords", grouping, unit))
        if table is None or table.empty:
            return empty
        table = table[(table["group"].astype(str) == value) & (table["ranking"] == ranking)]
        return pd.DataFrame(
            {
                "rank": table["rank"].to_numpy(),
                "term": table["term"].astype(str).to_numpy(),
                "score": table["score"].to_numpy(float),
                "share": table["share_respondents"].to_numpy(float),
                "mentions": table["respondents"].to_numpy(),
                "stability": table["stay_share"].to_numpy(float),
            }
        )
    return empty


def top_legend(outputs: RunOutputs, scope: str | None, ranking: str) -> str:
    """What the numbers of a top-k list are, in one or two lines."""
    labels = dict(RANKINGS["corpus"] + RANKINGS["group"])
    parts = [f"score = {labels.get(ranking, ranking)}"]
    if scope_kind(scope) == "group":
        parts.append("share/resp. = respondents of the group mentioning the term")
    else:
        parts.append("share/answers = answers holding the term")
        weighed = outputs.weighed
        unit = scope_unit(scope)
        n = weighed.n_documents.get(unit) if weighed is not None and unit else None
        if n is not None:
            parts.insert(0, f"N = {n:,.0f}")
    resamples = outputs.study.compare.bootstrap
    parts.append(f"stable = share of {resamples} bootstrap resamples keeping it in the top {outputs.study.compare.top_k}")
    return " · ".join(parts)


# ---------------------------------------------------------------------------- two groups


def pair_name(grouping: str, a: str, b: str | None, unit: str) -> str:
    """The compare stage's table name for group ``a`` against ``b`` (``None``: the rest)."""
    return table_name("keyness", grouping, a, "vs_rest" if b is None else f"vs_{b}", unit)


def pair_study(study: Study, grouping: str, reference: str) -> Study:
    """The study's compare settings narrowed to one grouping against one reference group (no extras)."""
    compare = study.compare.model_copy(
        update={
            "groups": [grouping],
            "combinations": [],
            "reference": reference,
            "bootstrap": 0,
            "kwic_terms": [],
            "glossary": None,
            "dictionaries": [],
        }
    )
    return study.model_copy(update={"compare": compare})


def two_groups(
    tables: dict[str, pd.DataFrame],
    outputs: RunOutputs,
    grouping: str | None,
    a: str | None,
    b: str | None,
    unit: str | None,
    computed: bool,
) -> tuple[pd.DataFrame | None, str]:
    """Keyness of ``a`` against ``b`` (``None``: the rest) in ``unit``, from the compare stage's tables.

    ``tables`` are the run's compare tables plus any computed on request;
    ``computed`` says whether the comparison against ``b`` has been run. Returns
    ``None`` (and what is missing) when it has not.
    """
    empty = pd.DataFrame(columns=KEYNESS_COLUMNS)
    if outputs.compared is None:
        return empty, "the compare stage has not run yet"
    if not grouping or not a or not unit:
        return empty, "choose a group column and group A (f, then Tab); leave B empty to compare with the rest"
    if a == b:
        return empty, "choose two different groups"
    against = "the rest" if b is None else f"'{b}'"
    table = tables.get(pair_name(grouping, a, b, unit))
    if table is None:
        if not computed:
            return None, f"computing {grouping} = '{a}' against {against}…"
        return empty, f"{grouping} = '{a}' against {against} in {unit}: not tested ({_size_status(tables, grouping, a, unit)})"
    where = "all languages" if unit == POOLED else unit
    legend = (
        f"A = {grouping} '{a}', B = {against}, in {where} ({_size_status(tables, grouping, a, unit)}) · "
        "A, B: respondents mentioning · G² log-likelihood · LogR: log2 ratio of relative frequencies · "
        "adj.p: Benjamini–Hochberg · bar green: more in A, red: more in B"
    )
    return table[KEYNESS_COLUMNS].reset_index(drop=True), legend


def _size_status(tables: dict[str, pd.DataFrame], grouping: str, group: str, unit: str) -> str:
    sizes = tables.get("group_sizes")
    if sizes is None or sizes.empty:
        return "no group sizes"
    row = sizes[(sizes["grouping"].astype(str) == grouping) & (sizes["group"].astype(str) == group) & (sizes["unit"] == unit)]
    if row.empty:
        return "no respondents in this unit"
    return f"{int(row['respondents'].iloc[0])} respondents, {row['status'].iloc[0]}"


# ---------------------------------------------------------------------------- languages side by side


def concepts(outputs: RunOutputs) -> tuple[pd.DataFrame, list[tuple[str, str, bool]], str]:
    """The glossary concepts with each language's share of respondents; ``(frame, columns, legend)``.

    ``columns`` are ``(key, label, is_share)``.
    """
    compared: CompareResult | None = outputs.compared
    if compared is None:
        return pd.DataFrame(columns=["concept"]), [("concept", "concept", False)], "the compare stage has not run yet"
    table = compared.tables.get("concepts_by_language")
    if table is None or table.empty:
        unmapped = compared.tables.get("unmapped_terms")
        hint = " · unmapped_terms in the export lists each language's top terms to start one" if unmapped is not None else ""
        return (
            pd.DataFrame(columns=["concept"]),
            [("concept", "concept", False)],
            "no glossary: set compare.glossary in the study to compare languages concept by concept" + hint,
        )
    languages = [c.removeprefix("share_") for c in table.columns if str(c).startswith("share_")]
    columns: list[tuple[str, str, bool]] = [("concept", "concept", False)]
    columns += [(f"share_{lang}", lang, True) for lang in languages]
    if "spread" in table:
        columns.append(("spread", "spread", True))
    legend = "share of each language's respondents mentioning any term of the concept · spread = largest − smallest"
    return table.reset_index(drop=True), columns, legend


def concept_terms(outputs: RunOutputs, concept: str) -> list[tuple[str, str]]:
    """``(language, term)`` pairs of a concept as found in the answers, for KWIC."""
    compared: CompareResult | None = outputs.compared
    table = compared.tables.get("concepts_by_language") if compared is not None else None
    if table is None:
        return []
    row = table[table["concept"].astype(str) == concept]
    if row.empty:
        return []
    pairs = []
    for column in table.columns:
        if str(column).startswith("terms_"):
            language = str(column).removeprefix("terms_")
            for item in str(row[column].iloc[0] or "").split("; "):
                term = item.rsplit(" (", 1)[0].strip()
                if term:
                    pairs.append((language, term))
    return pairs


def answers_of_groups(outputs: RunOutputs, grouping: str, values: list[str]) -> pd.DataFrame:
    """The answers of respondents whose ``grouping`` value is one of ``values`` (same rule as compare)."""
    from workbench.core.groups import NAME_SEPARATOR, groupings

    spec = grouping.split(NAME_SEPARATOR)
    found, _notes = groupings(outputs.answers, spec[:1], [spec] if len(spec) > 1 else [])
    chosen = next((g for g in found if g.name == grouping), None)
    if chosen is None:
        return outputs.answers.iloc[:0]
    members = chosen.by_respondent[chosen.by_respondent.isin(values)].index
    ids = outputs.answers[RESPONDENT_ID].astype(str)
    return outputs.answers[ids.isin(set(members)).to_numpy()]


def term_and_language(term: str, unit: str | None, expected: list[str]) -> tuple[str, str | None]:
    """Split a pooled, language-tagged term (``"de:preis"``); else the unit's language (``None``: any)."""
    if ":" in term:
        prefix, rest = term.split(":", 1)
        if prefix in expected or prefix == "und":
            return rest, prefix
    if unit and unit != POOLED:
        return term, unit
    return term, None
