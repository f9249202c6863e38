"""The weigh stage: count the answers' terms, then weight them, per language and pooled.

``weigh_corpus`` takes the answers table after the terms stage and returns a
:class:`WeighResult`. The steps, each in its own module:

1. select the answers that enter weighting (``enters_weighting`` true and a
   language other than ``und``, unless ``terms.include_und``) and validate
   their respondent weights;
2. count each language's term lists into a CSR matrix (``counting``);
3. filter the vocabulary by document frequency and size (``tfidf.VocabularyFilter``);
4. weight with the study's scheme (``tfidf.TfidfWeighting``);
5. pool every language into one matrix (terms tagged ``"de:preis"`` or
   merged into glossary concepts), filter and weight it the same way;
6. keyword tables per language and pooled (``keywords``).

The idf of the pooled matrix is fitted on the pooled answers: N counts the
answers of every language, so a tagged term's pooled idf is larger than its
idf within its own language (same df, larger N).

Respondent weights (``columns.weight``) enter N and df (sums of weights) and
every aggregate of the keyword tables; unweighted df and counts stay in the
tables, and the count matrices themselves are never weighted.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd
import scipy.sparse as sp

from workbench.core.corpus import ANSWER_ID, ENTERS_WEIGHTING, LANGUAGE, TERMS, WEIGHT
from workbench.core.counting import POOLED, FilterReport, count_terms, filter_counts, pool_counts
from workbench.core.counts import Counts
from workbench.core.errors import InputError, SettingsError
from workbench.core.keyness import kish_effective_n
from workbench.core.keywords import keyword_table
from workbench.core.progress import Reporter
from workbench.core.settings import UNDETERMINED, Study
from workbench.core.tfidf import TfidfWeighting, VocabularyFilter, WeightingScheme, document_frequency

STAGE = "weigh"


@dataclass
class WeighResult:
    """Counts, weighted matrices and keyword tables of one run.

    Per-language dicts are keyed by language code; ``idf``, ``keywords``,
    ``effective_n``, ``n_documents`` and ``document_frequency`` also hold the
    key ``"pooled"``. ``weighted[lang]`` is aligned with ``counts[lang]``
    (same rows, same columns).
    """

    counts: dict[str, Counts]
    weighted: dict[str, sp.csr_matrix]
    pooled: Counts
    pooled_weighted: sp.csr_matrix
    idf: dict[str, np.ndarray]
    keywords: dict[str, pd.DataFrame]
    #: Kish's effective sample size (Σ w)² / Σ w².
    effective_n: dict[str, float]
    #: N used by idf: answers, or the sum of their weights.
    n_documents: dict[str, float]
    #: df used by idf: answers containing the term, or the sum of their weights.
    document_frequency: dict[str, np.ndarray]
    scheme: WeightingScheme
    vocabulary: VocabularyFilter
    weighted_by: str | None = None
    notes: list[str] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)

    def describe(self) -> str:
        """The scheme, the vocabulary filter and what N and df mean in this run."""
        weights = (
            f"respondent weights from column '{self.weighted_by}': N and df are sums of weights"
            if self.weighted_by
            else "no respondent weights: N counts answers, df counts answers containing the term"
        )
        pooled = "pooled idf uses N over the answers of every language"
        return "\n".join([self.scheme.describe(), self.vocabulary.describe(), weights, pooled])


# --------------------------------------------------------------------------- input checks


def _require_columns(answers: pd.DataFrame, columns: list[str]) -> None:
    missing = [c for c in columns if c not in answers.columns]
    if missing:
        hint = " run the terms stage first" if TERMS in missing else " run the earlier stages first"
        raise InputError(f"the answers table has no column {', '.join(repr(c) for c in missing)};{hint}")


def _entering(answers: pd.DataFrame, study: Study) -> pd.Series:
    enters = answers[ENTERS_WEIGHTING].eq(True)
    if not study.terms.include_und:
        enters &= answers[LANGUAGE].ne(UNDETERMINED)
    return enters & answers[LANGUAGE].notna()


_LIST_TYPES = (list, tuple, np.ndarray)


def _check_term_lists(terms: pd.Series, ids: pd.Series) -> np.ndarray:
    """The term lists as an object array; one set of types instead of a Python check per row."""
    values = terms.to_numpy(dtype=object)
    if not set(map(type, values)) <= set(_LIST_TYPES):
        bad = ids[~terms.map(lambda value: isinstance(value, _LIST_TYPES))]
        raise InputError(
            f"{len(bad):,} answers have no term list in column '{TERMS}' (first: answer '{bad.iloc[0]}'); "
            "re-run the terms stage"
        )
    # Tokens themselves are checked on the vocabulary by ``count_terms``.
    return values


def _weights(selected: pd.DataFrame, study: Study) -> np.ndarray:
    """Validated respondent weights of the selected answers (all ones without a weight column)."""
    column = study.columns.weight
    if column is None:
        return np.ones(len(selected), dtype=np.float64)
    if WEIGHT not in selected.columns:
        raise InputError(
            f"the study names weight column '{column}' but the answers carry no weights; "
            "check columns.weight against the data file's header"
        )
    ids = selected[ANSWER_ID]
    raw = selected[WEIGHT]
    values = pd.to_numeric(raw, errors="coerce").astype(np.float64)
    missing = values.isna().to_numpy()
    if missing.any():
        first = int(np.flatnonzero(missing)[0])
        raise InputError(
            f"{int(missing.sum()):,} answers have a missing or non-numeric weight in column '{column}' "
            f"(first: answer '{ids.iloc[first]}', value {raw.iloc[first]!r}); give every respondent a weight "
            "or remove columns.weight from the study"
        )
    w = values.to_numpy()
    infinite = ~np.isfinite(w)
    if infinite.any():
        first = int(np.flatnonzero(infinite)[0])
        raise InputError(
            f"{int(infinite.sum()):,} answers have an infinite weight in column '{column}' "
            f"(first: answer '{ids.iloc[first]}'); weights must be finite numbers"
        )
    negative = w < 0
    if negative.any():
        first = int(np.flatnonzero(negative)[0])
        raise InputError(
            f"{int(negative.sum()):,} answers have a negative weight in column '{column}' "
            f"(first: answer '{ids.iloc[first]}', weight {w[first]:g}); survey weights must be 0 or more"
        )
    if not (w > 0).any():
        raise InputError(
            f"every answer that enters weighting has weight 0 in column '{column}'; "
            "check the weight column (or remove columns.weight to weigh answers equally)"
        )
    return w


# --------------------------------------------------------------------------- the stage


def _idf_value_text(scheme: WeightingScheme) -> str:
    # With a single answer (or df = N for every term) idf is the formula at N = df.
    value = {"none": 1.0, "log": 0.0, "smooth": 1.0, "prob": 0.0}[scheme.idf] + scheme.idf_add
    tail = "so every weight is 0" if value == 0 else "so the weights only reflect term frequency"
    return f"{scheme.formulas()['idf']} gives {value:g} for every term, {tail}"


def _weigh_one(
    counts: Counts,
    scheme: WeightingScheme,
    label: str,
    warnings: list[str],
) -> tuple[sp.csr_matrix, TfidfWeighting]:
    weighting = TfidfWeighting(scheme).fit(counts.matrix, counts.weights)
    if weighting.df_ is None:
        weighting.df_ = document_frequency(counts.matrix, counts.weights)
    n_rows = counts.matrix.shape[0]
    if scheme.idf == "none":
        pass
    elif n_rows == 1 and counts.matrix.shape[1]:
        warnings.append(f"{label} has a single answer: idf is degenerate (df = N for every term); {_idf_value_text(scheme)}")
    elif counts.matrix.shape[1] and np.all(weighting.df_ >= weighting.n_documents_):
        warnings.append(f"in {label} every term occurs in every answer: idf is degenerate; {_idf_value_text(scheme)}")
    weighted = weighting.transform(counts.matrix, counts.lengths)
    return weighted, weighting


def _filter_warnings(report: FilterReport, label: str, warnings: list[str], notes: list[str]) -> None:
    notes.append(f"{label}: {report.terms_after:,} of {report.terms_before:,} terms kept by the vocabulary filter")
    if report.only_zero_weight:
        warnings.append(
            f"{label}: {report.only_zero_weight:,} terms occur only in answers of weight 0 and were left out"
        )
    if report.terms_after == 0:
        warnings.append(f"{label}: no terms remain after filters; its matrix has no columns")
    elif report.empty_rows:
        warnings.append(
            f"{label}: {report.empty_rows:,} answers have no term left after filters (first: answer "
            f"'{report.first_empty}'); they stay as empty rows"
        )


def weigh_corpus(
    answers: pd.DataFrame,
    study: Study,
    reporter: Reporter,
    glossary: dict[tuple[str, str], str] | None = None,
) -> WeighResult:
    """Count and weight the answers' terms per language and pooled.

    Parameters
    ----------
    answers
        The answers table after the terms stage (columns ``answer_id``,
        ``language``, ``enters_weighting``, ``terms``; ``weight`` when the
        study names a weight column).
    study
        Settings: ``weigh`` (scheme, filters, pooled naming, top_k),
        ``columns.weight``, ``terms.include_und``.
    reporter
        Progress and cancel.
    glossary
        ``{(language, term): concept}``; used for the pooled matrix when
        ``weigh.pooled = "glossary"``.

    Returns
    -------
    WeighResult
        For each language, w_ij = norm(tf(c_ij) · idf_j) with the study's
        scheme (see :mod:`workbench.core.tfidf` and ``result.describe()``);
        N = Σ_i w_i and df_j = Σ_{i: c_ij > 0} w_i with respondent weights w
        (all 1 without a weight column).

    Raises
    ------
    InputError
        No answer enters weighting, no term remains after the filters, or the
        respondent weights are missing, negative, infinite or all zero.
    SettingsError
        An invalid scheme, SMART letter or filter, or ``weigh.pooled =
        "glossary"`` without a glossary.
    """
    settings = study.weigh
    scheme = WeightingScheme.from_settings(settings)
    vocabulary = VocabularyFilter.from_settings(settings)
    if settings.pooled == "glossary" and not glossary:
        raise SettingsError(
            "weigh.pooled = 'glossary' needs a glossary; set compare.glossary to a glossary file "
            "or use weigh.pooled = 'tagged'"
        )
    _require_columns(answers, [ANSWER_ID, LANGUAGE, ENTERS_WEIGHTING, TERMS])
    notes: list[str] = []
    warnings: list[str] = []

    enters = _entering(answers, study)
    # Only the columns weighing reads: selecting rows of the whole table would copy every text
    # column (raw and clean text, ids, groups) of the selected answers for nothing.
    needed = [c for c in (ANSWER_ID, LANGUAGE, TERMS, WEIGHT) if c in answers.columns]
    selected = answers.loc[enters, needed]
    left_out = int((~enters).sum())
    if answers.empty:
        raise InputError(
            f"the sources hold no answers: every cell of the text column(s) {', '.join(study.columns.text) or '(none)'} "
            "is empty; check columns.text against the data file's header"
        )
    if selected.empty:
        und = int((answers[LANGUAGE] == UNDETERMINED).sum())
        raise InputError(
            f"no answer enters weighting ({len(answers):,} answers: {int((~answers[ENTERS_WEIGHTING].eq(True)).sum()):,} "
            f"flagged or excluded, {und:,} of undetermined language); check the clean and identify settings "
            "or set terms.include_und = true"
        )
    if left_out:
        notes.append(f"{left_out:,} answers do not enter weighting (flagged, excluded or undetermined language)")
    ids = selected[ANSWER_ID].astype(str)
    term_lists = _check_term_lists(selected[TERMS], ids)
    weights = _weights(selected, study)
    weighted_by = study.columns.weight
    zero = weights == 0
    if zero.any():
        warnings.append(
            f"{int(zero.sum()):,} answers have weight 0 (first: answer '{ids.iloc[int(np.flatnonzero(zero)[0])]}'); "
            "they stay in the matrices but count for nothing in N, df and the keyword tables"
        )

    language_codes, language_names = pd.factorize(selected[LANGUAGE].astype(str), sort=True)
    languages = [str(name) for name in language_names]
    steps = 2 * len(languages) + 2
    step = 0
    id_array = ids.to_numpy(dtype=object)
    unfiltered: dict[str, Counts] = {}
    positions: dict[str, np.ndarray] = {}
    for code, language in enumerate(languages):
        reporter.update(STAGE, step, steps, f"counting {language}")
        rows = np.flatnonzero(language_codes == code)
        lang_weights = weights[rows]
        if not (lang_weights > 0).any():
            raise InputError(
                f"every answer in language '{language}' has weight 0 in column '{weighted_by}'; "
                "its idf cannot be computed; check the weights of that language"
            )
        unfiltered[language] = count_terms(term_lists[rows], id_array[rows], language, lang_weights)
        positions[language] = rows
        step += 1

    if sum(c.matrix.shape[1] for c in unfiltered.values()) == 0:
        raise InputError(
            f"none of the {len(selected):,} answers that enter weighting has any term; "
            "check the terms stage (stop words, terms.min_length, terms.keep_numbers)"
        )

    distinct_terms = sum(c.matrix.shape[1] for c in unfiltered.values())

    # The pooled matrix first: it is built from the unfiltered language counts,
    # which can then be released one by one (peak memory of a large run).
    reporter.update(STAGE, step, steps, "pooling")
    pooled_notes: list[str] = []
    pooled_warnings: list[str] = []
    concepts = glossary if settings.pooled == "glossary" else None
    if glossary and settings.pooled == "tagged":
        pooled_notes.append("a glossary was given but weigh.pooled = 'tagged': pooled terms keep their language tags")
    pooled_all = pool_counts(unfiltered, concepts, positions=positions)
    pooled, report = filter_counts(pooled_all, vocabulary)
    del pooled_all
    _filter_warnings(report, "the pooled matrix", pooled_warnings, pooled_notes)
    if concepts:
        concept_names = set(concepts.values())
        merged = int(sum(1 for t in pooled.terms if t in concept_names))
        pooled_notes.append(f"the pooled matrix has {merged:,} glossary concepts; other terms keep their language tags")
    step += 1
    reporter.update(STAGE, step, steps, "weighting pooled")
    pooled_weighted, pooled_weighting = _weigh_one(pooled, scheme, "the pooled matrix", pooled_warnings)
    pooled_keywords = keyword_table(
        pooled, pooled_weighted, pooled_weighting.idf_, settings.top_k, df_weighted=pooled_weighting.df_
    )
    pooled_notes.append(
        f"pooled idf uses N = {pooled_weighting.n_documents_:,.6g} over the answers of {len(languages)} "
        "languages: a tagged term keeps its df but N grows"
    )
    step += 1

    counts: dict[str, Counts] = {}
    weighted: dict[str, sp.csr_matrix] = {}
    fitted: dict[str, TfidfWeighting] = {}
    keywords: dict[str, pd.DataFrame] = {}
    for language in languages:
        reporter.update(STAGE, step, steps, f"weighting {language}")
        label = f"language '{language}'"
        counts[language], report = filter_counts(unfiltered.pop(language), vocabulary)
        _filter_warnings(report, label, warnings, notes)
        weighted[language], fitted[language] = _weigh_one(counts[language], scheme, label, warnings)
        keywords[language] = keyword_table(
            counts[language], weighted[language], fitted[language].idf_, settings.top_k, df_weighted=fitted[language].df_
        )
        step += 1

    if all(c.matrix.shape[1] == 0 for c in counts.values()):
        raise InputError(
            f"no terms remain after filters: all {distinct_terms:,} distinct terms of {len(selected):,} answers "
            f"were removed ({vocabulary.describe()}); lower weigh.min_df (now {settings.min_df}), raise "
            f"weigh.max_df (now {settings.max_df}) or weigh.max_terms"
        )
    notes.extend(pooled_notes)
    warnings.extend(pooled_warnings)
    fitted[POOLED] = pooled_weighting
    keywords[POOLED] = pooled_keywords
    effective_n = {lang: kish_effective_n(c.weights) for lang, c in counts.items()}
    effective_n[POOLED] = kish_effective_n(pooled.weights)
    reporter.update(STAGE, steps, steps, "done")
    return WeighResult(
        counts=counts,
        weighted=weighted,
        pooled=pooled,
        pooled_weighted=pooled_weighted,
        idf={name: f.idf_ for name, f in fitted.items()},
        keywords=keywords,
        effective_n=effective_n,
        n_documents={name: f.n_documents_ for name, f in fitted.items()},
        document_frequency={name: f.df_ for name, f in fitted.items()},
        scheme=scheme,
        vocabulary=vocabulary,
        weighted_by=weighted_by,
        notes=notes,
        warnings=warnings,
    )
