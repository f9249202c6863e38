"""Turn the weigh and compare results into the tables the Keywords view shows.

No statistics are computed here: scores, shares, stability, G², Log Ratio and
adjusted p all come from the core results; this module only selects, renames
and orders their columns for display.
"""

from __future__ import annotations

from typing import Any

import pandas as pd

from workbench.core.pipeline import RunOutputs

TOP_COLUMNS = ["rank", "term", "score", "share", "df", "stability"]
KEYNESS_COLUMNS = ["term", "freq_a", "freq_b", "g2", "log_ratio", "p_adj", "direction"]


def keyword_scopes(outputs: RunOutputs) -> list[tuple[str, str]]:
    """``(scope id, label)`` pairs: each language, the pooled corpus, then each group value."""
    weighed = outputs.weighed
    if weighed is None:
        return []
    scopes = []
    for key in sorted(k for k in weighed.keywords if k != "pooled"):
        scopes.append((f"lang:{key}", f"language {key}"))
    if "pooled" in weighed.keywords:
        scopes.append(("pooled", "all languages (pooled)"))
    for key, label in group_keyword_keys(outputs):
        scopes.append((f"group:{key}", label))
    return scopes


def group_keyword_keys(outputs: RunOutputs) -> list[tuple[str, str]]:
    """Per-group keyword tables of the compare stage, as ``(table key, label)``."""
    compared = outputs.compared
    if compared is None:
        return []
    tables: dict[str, Any] = getattr(compared, "group_keywords", None) or {}
    return [(key, f"group {key}") for key in sorted(tables)]


def top_keywords(outputs: RunOutputs, scope: str, ranking: str = "mean_weight") -> pd.DataFrame:
    """The top-k table of one scope with columns :data:`TOP_COLUMNS` (stability may be empty)."""
    weighed = outputs.weighed
    if weighed is None:
        return pd.DataFrame(columns=TOP_COLUMNS)
    if scope.startswith("lang:"):
        table = weighed.keywords.get(scope.removeprefix("lang:"))
    elif scope == "pooled":
        table = weighed.keywords.get("pooled")
    elif scope.startswith("group:") and outputs.compared is not None:
        table = (getattr(outputs.compared, "group_keywords", None) or {}).get(scope.removeprefix("group:"))
    else:
        table = None
    if table is None or table.empty:
        return pd.DataFrame(columns=TOP_COLUMNS)
    if "ranking" in table:
        table = table[table["ranking"] == ranking]
    frame = pd.DataFrame(
        {
            "rank": table["rank"].to_numpy() if "rank" in table else range(1, len(table) + 1),
            "term": table["term"].astype(str).to_numpy(),
            "score": table[ranking].to_numpy() if ranking in table else table.iloc[:, 0].to_numpy(),
            "share": table["doc_share"].to_numpy() if "doc_share" in table else None,
            "df": table["df"].to_numpy() if "df" in table else None,
            "stability": stability_of(outputs, scope, table["term"].astype(str).tolist()),
        }
    )
    return frame.reset_index(drop=True)


def stability_of(outputs: RunOutputs, scope: str, terms: list[str]) -> list[float | None]:
    """Bootstrap stability (share of resamples keeping the term in the top k), where the compare stage has it."""
    compared = outputs.compared
    stability: dict[str, Any] = getattr(compared, "stability", None) or {}
    key = scope.removeprefix("lang:").removeprefix("group:")
    table = stability.get(key)
    if table is None or "term" not in table:
        return [None] * len(terms)
    column = next((c for c in ("stability", "share", "kept_share") if c in table), None)
    if column is None:
        return [None] * len(terms)
    values = dict(zip(table["term"].astype(str), table[column], strict=False))
    return [values.get(term) for term in terms]


def group_columns(outputs: RunOutputs) -> list[str]:
    """Group columns the study compares (``compare.groups``, else ``columns.groups``) present in the answers."""
    study = outputs.study
    names = list(study.compare.groups or study.columns.groups)
    answers = outputs.answers
    return [name for name in names if f"group:{name}" in answers]


def group_values(outputs: RunOutputs, column: str | None) -> list[str]:
    if not column:
        return []
    values = outputs.answers[f"group:{column}"].dropna().astype(str).unique()
    return sorted(values)


def top_legend(outputs: RunOutputs, scope: str | None, ranking: str) -> str:
    """One line saying what the numbers are."""
    weighed = outputs.weighed
    score = "mean TF-IDF weight over the answers" if ranking == "mean_weight" else "share of answers holding the term"
    parts = [f"score = {score}", "share = answers holding the term", "stable = share of bootstrap resamples keeping it in the top k"]
    if weighed is not None and scope:
        key = "pooled" if scope == "pooled" else scope.split(":", 1)[-1]
        n = getattr(weighed, "n_documents", {}).get(key)
        if n is not None:
            parts.insert(0, f"N = {n:,.0f} answers")
    return " · ".join(parts)


def two_groups(outputs: RunOutputs, column: str | None, a: str | None, b: str | None) -> tuple[pd.DataFrame, str]:
    """Keyness of group ``a`` against group ``b`` (or the rest) with columns :data:`KEYNESS_COLUMNS`."""
    empty = pd.DataFrame(columns=KEYNESS_COLUMNS)
    if outputs.compared is None:
        return empty, "the compare stage has not run yet"
    if not column or not a:
        return empty, "choose a group column and group A (f, then Tab)"
    return empty, "two-group comparison is not available in this version"


def concepts(outputs: RunOutputs) -> tuple[pd.DataFrame, list[str], str]:
    """Cross-language concept table (one row per concept, a column per language)."""
    if outputs.compared is None:
        return pd.DataFrame(columns=["concept"]), ["concept"], "the compare stage has not run yet"
    return pd.DataFrame(columns=["concept"]), ["concept"], "no glossary: set compare.glossary in the study to compare concepts across languages"


def term_and_language(term: str, scope: str | None, session: Any) -> tuple[str, str]:
    """Split a language-tagged pooled term (``"de:preis"``); else take the language from the scope."""
    expected = list(session.study.languages.expected)
    if ":" in term:
        prefix, rest = term.split(":", 1)
        if prefix in expected or prefix == "und":
            return rest, prefix
    if scope and scope.startswith("lang:"):
        return term, scope.removeprefix("lang:")
    return term, expected[0]
