"""The compare stage: groups, keyness, languages side by side, stability and KWIC.

``compare_corpus`` turns the weigh stage's counts into named tables (a dict
of pandas DataFrames whose names are safe as file names) plus notes. The
tables, with ``<unit>`` a language code or ``pooled`` (all languages, terms
tagged ``de:preis`` or merged into glossary concepts):

``group_sizes``
    Every group of every grouping and unit: respondents, Σ weights, Kish
    n_eff, and whether it was tested or why not.
``keyness__<grouping>__<group>__vs_rest__<unit>`` (or ``__vs_<reference>__``)
    One group against the rest of the grouping's respondents (or against the
    study's reference group): G², p, BH-adjusted p, Log Ratio, frequencies and
    shares on both sides (see :mod:`workbench.core.keyness`).
``keyness_summary``
    One line per keyness table: sizes, terms tested, significant, top terms.
``group_keywords__<grouping>__<unit>``
    Per group, the top-k terms by class-based TF-IDF and by mean TF-IDF (see
    :mod:`workbench.core.groups`), each with its bootstrap stability.
``stability__<unit>``
    The unit's top-k lists (the weigh stage's ``mean_weight`` and
    ``doc_share`` rankings, and the share of respondents mentioning), each
    term with its bootstrap stability; column ``ranking`` names the list.
``concepts_by_language``, ``concept_keyness__<language>__vs_other_languages``,
``glossary_problems``, ``unmapped_terms``, ``glossary_proposals``
    Cross-language tables (see :mod:`workbench.core.glossary` and
    :mod:`workbench.core.dictd`).
``kwic__<term>``
    Keyword-in-context lines of each ``compare.kwic_terms`` entry.

Every frequency table states its counting unit in a ``counting`` column
(``respondents``: respondents mentioning the term, the default; ``tokens``:
occurrences) and ``table_notes`` says the same in words.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd
import scipy.sparse as sp

from workbench.core.corpus import ANSWER_ID, RESPONDENT_ID
from workbench.core.counts import Counts
from workbench.core.glossary import (
    Glossary,
    concept_counts,
    concept_table,
    read_glossary,
    unmapped_terms,
)
from workbench.core.groups import Grouping, class_tfidf_score, groupings, table_name
from workbench.core.keyness import (
    Counting,
    GroupSums,
    KeynessTable,
    RespondentCounts,
    by_respondent,
    group_sums,
    indicator,
    keyness_tables,
    label_codes,
    respondent_collapse,
)
from workbench.core.progress import Reporter
from workbench.core.settings import Study
from workbench.core.stability import bootstrap_top_k, share_score

STAGE = "compare"
POOLED = "pooled"


@dataclass
class CompareResult:
    """Named tables (names safe as file names), a note per table, and run notes."""

    tables: dict[str, pd.DataFrame] = field(default_factory=dict)
    #: table name -> one paragraph: what the table holds and which counting it used.
    table_notes: dict[str, str] = field(default_factory=dict)
    notes: list[str] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)
    #: Short sentences on the strongest significant differences, for the run's summary.
    findings: list[str] = field(default_factory=list)

    def add(self, name: str, table: pd.DataFrame, note: str) -> str:
        """Store a table under a unique name (``~2`` appended on a clash); returns the name used."""
        unique, number = name, 2
        while unique in self.tables:
            unique, number = f"{name}~{number}", number + 1
        self.tables[unique] = table
        self.table_notes[unique] = note
        return unique


def _counting_words(counting: Counting) -> str:
    if counting == "respondents":
        return "counting respondents mentioning each term (a respondent counts once per term)"
    return "counting every occurrence (token) of each term"


@dataclass
class _Unit:
    """One language (or the pooled corpus) ready for comparison."""

    name: str
    counts: Counts
    weighted: sp.csr_matrix | None
    respondents: RespondentCounts
    collapse: sp.csr_matrix  #: respondents × answer rows
    _tfidf: tuple[sp.csr_matrix, np.ndarray] | None = None

    def tfidf_by_respondent(self) -> tuple[sp.csr_matrix, np.ndarray]:
        """Each respondent's summed TF-IDF rows and number of answer rows (computed once)."""
        if self._tfidf is None:
            assert self.weighted is not None
            summed = sp.csr_matrix(self.collapse @ sp.csr_matrix(self.weighted, dtype=np.float64))
            self._tfidf = (summed, np.asarray(self.collapse.sum(axis=1)).ravel())
        return self._tfidf


def _respondent_of_rows(lookup: pd.Series, row_ids: np.ndarray, warnings: list[str], unit: str) -> np.ndarray:
    found = lookup.reindex(pd.Index(np.asarray(row_ids, dtype=object), dtype=object)).to_numpy(dtype=object)
    missing = pd.isna(found)
    if missing.any():
        warnings.append(
            f"{int(missing.sum()):,} rows of '{unit}' have no answer in the answers table "
            f"(first: '{row_ids[int(np.flatnonzero(missing)[0])]}'); each is treated as its own respondent"
        )
        found[missing] = np.asarray(row_ids, dtype=object)[missing]
    return found


def _units(answers: pd.DataFrame, weighed, warnings: list[str]) -> list[_Unit]:
    out = []
    sources = [(lang, weighed.counts[lang], weighed.weighted.get(lang)) for lang in sorted(weighed.counts)]
    sources.append((POOLED, weighed.pooled, weighed.pooled_weighted))
    lookup = pd.Series(
        answers[RESPONDENT_ID].astype(str).to_numpy(dtype=object),
        index=pd.Index(answers[ANSWER_ID].astype(str).to_numpy(dtype=object), dtype=object),
    )
    lookup = lookup[~lookup.index.duplicated()]
    for name, counts, weighted in sources:
        respondent_of = _respondent_of_rows(lookup, counts.row_ids, warnings, name)
        collapse, _ids, _codes = respondent_collapse(respondent_of)
        out.append(_Unit(name, counts, weighted, by_respondent(counts, respondent_of), collapse))
    return out


def _labels(grouping: Grouping, rc: RespondentCounts) -> np.ndarray:
    return grouping.by_respondent.reindex(pd.Index(rc.respondent_ids, dtype=object)).to_numpy(dtype=object)


def compare_corpus(answers: pd.DataFrame, weighed, study: Study, reporter: Reporter) -> CompareResult:
    """Compare groups and languages; see the module docstring for the tables.

    Parameters
    ----------
    answers
        The answers table after the terms stage (``answer_id``,
        ``respondent_id``, ``language``, ``terms``, ``clean_text``,
        ``group:<name>`` columns).
    weighed
        The weigh stage's :class:`~workbench.core.weigh.WeighResult` (per
        language ``counts`` and ``weighted``, ``pooled``, ``pooled_weighted``).
    study
        ``compare`` settings (groups, combinations, count, min_freq,
        min_group_size, fdr, reference, glossary, dictionaries, bootstrap,
        top_k, kwic_terms, kwic_width) and ``study.seed``.
    reporter
        Progress and cancel.

    Raises
    ------
    InputError
        The glossary or a dictionary file cannot be read.
    """
    settings = study.compare
    counting: Counting = settings.count
    result = CompareResult()
    reporter.update(STAGE, 0, 0, "preparing respondents")
    units = _units(answers, weighed, result.warnings)
    found, notes = groupings(answers, settings.groups, settings.combinations)
    result.notes.extend(notes)
    if not found and not notes:
        result.notes.append(
            "no group columns: keyness and group keywords need columns.groups (e.g. groups = ['country'])"
        )
    size_rows: list[dict[str, object]] = []
    summary_rows: list[dict[str, object]] = []
    all_tables: list[tuple[str, str, str, KeynessTable]] = []
    steps = max(1, len(found) * len(units) + len(units) + 2)
    step = 0
    seed_counter = 0
    for grouping in found:
        if len(grouping.values) < 2:
            only = grouping.values[0] if grouping.values else "none"
            result.notes.append(
                f"group column '{grouping.name}' has one value ('{only}'): nothing to compare; "
                "choose a column whose respondents differ"
            )
            continue
        if grouping.missing:
            result.notes.append(
                f"group column '{grouping.name}': {grouping.missing:,} respondents have no value and are left out of it"
            )
        for unit in units:
            step += 1
            reporter.update(STAGE, step, steps, f"keyness {grouping.name} in {unit.name}")
            seed_counter += 1
            _compare_grouping(
                grouping, unit, study, counting, result, size_rows, summary_rows, all_tables, seed_counter
            )
    if size_rows:
        result.add(
            "group_sizes",
            pd.DataFrame(size_rows),
            f"respondents per group, Σ weights and Kish n_eff = (Σw)²/Σw²; groups below "
            f"compare.min_group_size = {settings.min_group_size} are reported, not tested",
        )
    if summary_rows:
        result.add(
            "keyness_summary",
            pd.DataFrame(summary_rows),
            f"one line per keyness table; significant = Benjamini–Hochberg adjusted p < {settings.fdr}; "
            + _counting_words(counting),
        )
    result.findings.extend(_findings(all_tables, study.languages.expected))
    if any(t[2] == POOLED for t in all_tables):
        result.notes.append(
            "pooled keyness: terms outside the glossary keep their language tag (de:preis), so a grouping that "
            "follows language (e.g. country) shows language differences there; glossary concepts, the "
            "per-language tables and the concept tables are the fair comparison"
        )
    for unit in units:
        step += 1
        reporter.update(STAGE, step, steps, f"stability of the top terms in {unit.name}")
        seed_counter += 1
        _unit_stability(unit, study, result, seed_counter, reporter)
    step += 1
    reporter.update(STAGE, step, steps, "languages side by side")
    _cross_language(units, study, result)
    step += 1
    reporter.update(STAGE, step, steps, "keyword in context")
    _kwic_tables(answers, units, study, result)
    reporter.update(STAGE, steps, steps, "done")
    return result


# --------------------------------------------------------------------------- stability of a unit's lists


def _unit_stability(unit: _Unit, study: Study, result: CompareResult, seed_counter: int, reporter: Reporter) -> None:
    """Bootstrap stability of the unit's top lists: the weigh stage's two keyword rankings
    (``mean_weight``, ``doc_share``, same formulas and ``weigh.top_k``, so the listed terms are those of
    the keyword tables) and the share of respondents mentioning (``compare.top_k``)."""
    settings = study.compare
    rc = unit.respondents
    lists: list[tuple[str, sp.csr_matrix, np.ndarray | None, int]] = [
        ("share_respondents", rc.mentions, None, settings.top_k)
    ]
    if unit.weighted is not None and unit.weighted.shape == unit.counts.matrix.shape:
        summed, answers_per = unit.tfidf_by_respondent()
        present = sp.csr_matrix(unit.counts.matrix, dtype=np.float64, copy=True)
        present.data = (present.data > 0).astype(np.float64)
        # Per respondent: how many of their answers hold the term; ÷ answers = the answer-level share.
        holding = sp.csr_matrix(unit.collapse @ present)
        lists.insert(0, ("doc_share", holding, answers_per, study.weigh.top_k))
        lists.insert(0, ("mean_weight", summed, answers_per, study.weigh.top_k))
    frames = []
    for number, (ranking, matrix, denominators, k) in enumerate(lists):
        table = bootstrap_top_k(
            matrix, rc.weights, rc.terms, share_score, k=k, resamples=settings.bootstrap,
            seed=[study.study.seed, seed_counter, number], denominators=denominators, reporter=reporter,
        ).drop(columns="group")  # fmt: skip
        table.insert(0, "ranking", ranking)
        frames.append(table)
    table = pd.concat(frames, ignore_index=True)
    table.insert(0, "unit", unit.name)
    result.add(
        table_name("stability", unit.name),
        table,
        f"top terms of '{unit.name}' with bootstrap stability over respondents ({settings.bootstrap} resamples, "
        f"seed {study.study.seed}); ranking mean_weight and doc_share are the weigh stage's keyword rankings "
        f"(top {study.weigh.top_k}: weighted mean TF-IDF over answers, weighted share of answers holding the term), "
        f"share_respondents the weighted share of respondents mentioning (top {settings.top_k}); stay_share = share "
        "of resamples in which the term stays in the top k; rank_low/rank_high = 2.5th/97.5th percentile of its rank",
    )


# --------------------------------------------------------------------------- one grouping in one unit


def _compare_grouping(
    grouping: Grouping,
    unit: _Unit,
    study: Study,
    counting: Counting,
    result: CompareResult,
    size_rows: list[dict[str, object]],
    summary_rows: list[dict[str, object]],
    all_tables: list[tuple[str, str, str, KeynessTable]],
    seed_counter: int,
) -> None:
    settings = study.compare
    rc = unit.respondents
    labels = _labels(grouping, rc)
    codes = label_codes(labels, grouping.values)
    present = [grouping.values[i] for i in np.unique(codes[codes >= 0])]
    if len(present) < 2:
        only = f"('{present[0]}')" if present else "(none)"
        result.notes.append(
            f"group column '{grouping.name}' has one value {only} among the respondents of '{unit.name}': "
            "nothing to compare there"
        )
        return
    sums = group_sums(rc, labels, present, counting)
    reference = settings.reference if settings.reference in present else None
    if settings.reference is not None and reference is None and unit.name == POOLED:
        result.notes.append(
            f"reference group '{settings.reference}' is not a value of '{grouping.name}'; "
            "each group is compared with the rest instead"
        )
    minimum = settings.min_group_size
    total_respondents = int(sums.respondents.sum())
    targets: list[int] = []
    ref_index = present.index(reference) if reference is not None else None
    ref_small = ref_index is not None and sums.respondents[ref_index] < minimum
    for g, value in enumerate(present):
        n = int(sums.respondents[g])
        other = int(sums.respondents[ref_index]) if ref_index is not None else total_respondents - n
        if g == ref_index:
            status = "reference" if not ref_small else f"reference below minimum ({n} < {minimum}): nothing tested"
        elif n < minimum:
            status = f"below minimum ({n} < {minimum}): reported, not tested"
        elif ref_small:
            status = "not tested: reference group below minimum"
        elif other < minimum:
            status = f"not tested: the other side has {other} < {minimum} respondents"
        else:
            status = "tested"
            targets.append(g)
        size_rows.append(
            {
                "grouping": grouping.name,
                "unit": unit.name,
                "group": value,
                "respondents": n,
                "weight_sum": float(sums.weight_sum[g]),
                "n_eff": float(sums.weight_sum[g] ** 2 / sums.weight_sq[g]) if sums.weight_sq[g] > 0 else 0.0,
                "status": status,
            }
        )
    tables = keyness_tables(
        sums, rc.terms, targets=targets, reference=ref_index, min_freq=settings.min_freq, fdr=settings.fdr
    )
    versus = "vs_rest" if ref_index is None else f"vs_{reference}"
    for kt in tables:
        name = result.add(
            table_name("keyness", grouping.name, kt.target, versus, unit.name),
            kt.table,
            f"keyness of {grouping.name} = '{kt.target}' ({kt.n_target} respondents) against "
            f"{'the rest' if ref_index is None else repr(reference)} ({kt.n_reference} respondents) in "
            f"'{unit.name}'; G² over the full 2×2 table (Dunning 1993), p from χ²(1), BH-adjusted p over the "
            f"{kt.tested} terms tested (at least {settings.min_freq} mentions on both sides together), Log Ratio "
            f"(Hardie 2014; a zero frequency counts as 0.5); " + _counting_words(counting)
            + ("; weighted: G² uses counts rescaled to Kish's effective sample size (an approximation)" if sums.weighted else ""),
        )
        all_tables.append((name, grouping.name, unit.name, kt))
        significant = kt.table["significant"].to_numpy(dtype=bool)
        direction = kt.table["direction"].to_numpy()
        # Only the first five of each side are named: no filtered copy of the whole table.
        over = kt.table["term"].iloc[np.flatnonzero(significant & (direction == "over"))[:5]]
        under = kt.table["term"].iloc[np.flatnonzero(significant & (direction == "under"))[:5]]
        summary_rows.append(
            {
                "table": name,
                "grouping": grouping.name,
                "unit": unit.name,
                "group": kt.target,
                "reference": "rest" if kt.reference is None else kt.reference,
                "n_group": kt.n_target,
                "n_reference": kt.n_reference,
                "terms_tested": kt.tested,
                "significant": kt.significant,
                "top_over": ", ".join(over.astype(str)),
                "top_under": ", ".join(under.astype(str)),
                "counting": counting,
            }
        )
    if unit.name == POOLED and study.weigh.pooled != "glossary":
        # Tagged pooled terms never meet across languages, so a group's pooled list would
        # only repeat its languages' lists weighted by language size; skip it.
        return
    _group_keywords(grouping, unit, study, counting, labels, present, sums, result, seed_counter)


def _group_keywords(
    grouping: Grouping,
    unit: _Unit,
    study: Study,
    counting: Counting,
    labels: np.ndarray,
    present: list[object],
    sums: GroupSums,
    result: CompareResult,
    seed_counter: int,
) -> None:
    settings = study.compare
    rc = unit.respondents
    seed = study.study.seed
    mentioned = np.asarray((indicator(labels, present) @ rc.mentions).toarray())
    frames = []
    ctf = bootstrap_top_k(
        rc.matrix(counting), rc.weights, rc.terms, class_tfidf_score, k=settings.top_k,
        resamples=settings.bootstrap, seed=[seed, seed_counter, 1], labels=labels, values=present,
    )  # fmt: skip
    ctf.insert(1, "ranking", "c_tfidf")
    frames.append(ctf)
    if unit.weighted is not None and unit.weighted.shape == unit.counts.matrix.shape:
        # Respondent rows hold the sum of their answers' TF-IDF rows; dividing by the
        # (weighted) number of answers makes the score a mean over the group's answers.
        summed, answers_per = unit.tfidf_by_respondent()
        mean = bootstrap_top_k(
            summed, rc.weights, rc.terms, share_score, k=settings.top_k, resamples=settings.bootstrap,
            seed=[seed, seed_counter, 2], labels=labels, values=present, denominators=answers_per,
        )  # fmt: skip
        mean.insert(1, "ranking", "mean_tfidf")
        frames.append(mean)
    table = pd.concat(frames, ignore_index=True)
    if table.empty:
        return
    position = {v: g for g, v in enumerate(present)}
    term_index = {t: j for j, t in enumerate(rc.terms.astype(str))}
    g_idx = table["group"].map(position).to_numpy(dtype=np.int64)
    t_idx = table["term"].astype(str).map(term_index).to_numpy(dtype=np.int64)
    with np.errstate(divide="ignore", invalid="ignore"):
        table["share_respondents"] = sums.mentions[g_idx, t_idx] / sums.weight_sum[g_idx]
    table["respondents"] = mentioned[g_idx, t_idx].astype(np.int64)
    table["n_group"] = sums.respondents[g_idx].astype(np.int64)
    table["below_min_size"] = table["n_group"] < settings.min_group_size
    table["counting"] = counting
    table.insert(0, "grouping", grouping.name)
    table.insert(1, "unit", unit.name)
    result.add(
        table_name("group_keywords", grouping.name, unit.name),
        table,
        f"top {settings.top_k} terms of each '{grouping.name}' group in '{unit.name}': ranking c_tfidf = "
        "class-based TF-IDF (Grootendorst 2022: (tf_tc / Σ tf_c) · ln(1 + A / f_t), each group's answers as "
        "one document), mean_tfidf = the study's TF-IDF averaged over the group's answers (weighted); "
        f"stay_share and rank_low/rank_high from {settings.bootstrap} bootstrap resamples of respondents "
        "within each group; below_min_size marks groups too small to test — read their lists with care; "
        + _counting_words(counting),
    )


def _findings(all_tables: list[tuple[str, str, str, KeynessTable]], languages: list[str], limit: int = 8) -> list[str]:
    """The strongest significant over-representations, one per group first, as sentences.

    Pooled tables contribute only glossary concepts: a language-tagged pooled
    term (``de:preis``) mostly tells which language a group writes in.
    """
    tagged = tuple(f"{lang}:" for lang in languages)
    rows = []
    for name, grouping, unit, kt in all_tables:
        # Tables are sorted by G², so the first three rows that qualify are the strongest.
        picked = np.flatnonzero(kt.table["significant"].to_numpy(dtype=bool) & (kt.table["direction"].to_numpy() == "over"))
        if unit == POOLED and len(picked):
            terms = pd.Series(kt.table["term"].to_numpy()[picked], dtype=object).astype(str)
            picked = picked[~terms.str.startswith(tagged).to_numpy(dtype=bool)]
        for _, row in kt.table.iloc[picked[:3]].iterrows():
            rows.append((float(row["g2"]), name, grouping, unit, kt, row))
    rows.sort(key=lambda r: -r[0])
    first_per_group = {}
    for entry in rows:
        first_per_group.setdefault((entry[2], str(entry[4].target)), entry)
    ordered = sorted(first_per_group.values(), key=lambda r: -r[0])
    # By identity: two entries can tie on every field but the row (a Series), which has no truth value.
    chosen = {id(r) for r in ordered}
    ordered += [r for r in rows if id(r) not in chosen]
    out: list[str] = []
    seen: set[tuple[str, str, float]] = set()
    for g2, name, grouping, unit, kt, row in ordered:
        # A combination that equals one of its parts in a unit gives the same table twice.
        key = (unit, str(row["term"]), round(g2, 6))
        if key in seen or len(out) >= limit:
            continue
        seen.add(key)
        against = "the rest" if kt.reference is None else f"'{kt.reference}'"
        where = "all languages, glossary concept" if unit == POOLED else f"answers in '{unit}'"
        out.append(
            f"{grouping} = '{kt.target}' ({where}): '{row['term']}' is mentioned by {row['share_group']:.0%} of "
            f"respondents vs {row['share_ref']:.0%} in {against} (G² = {g2:.1f}, adjusted p = {row['p_adj']:.2g}, "
            f"Log Ratio = {row['log_ratio']:+.2f}) [{name}]"
        )
    return out


# --------------------------------------------------------------------------- across languages


def _cross_language(units: list[_Unit], study: Study, result: CompareResult) -> None:
    settings = study.compare
    languages = [u for u in units if u.name != POOLED]
    glossary: Glossary | None = None
    if settings.glossary is not None:
        glossary = read_glossary(settings.glossary, study.languages.expected)
        result.warnings.extend(glossary.notes())
        if not glossary.problems.empty:
            result.add(
                "glossary_problems",
                glossary.problems,
                "glossary rows that were ignored and why (the first occurrence of a term or row is kept)",
            )
        counts = {u.name: concept_counts(u.respondents, glossary) for u in languages}
        if glossary.mapping:
            result.add(
                "concepts_by_language",
                concept_table(counts, glossary),
                "each glossary concept's weighted share of respondents (mentioning any of its terms) per "
                "language, side by side; terms_<lang> lists the terms found with their weighted respondents, "
                "absent_<lang> the glossary terms not found; spread = largest minus smallest share",
            )
            _concept_keyness(counts, study, result)
    else:
        result.notes.append(
            "no glossary (compare.glossary): languages are not compared concept by concept; "
            "unmapped_terms lists each language's top terms to start one"
        )
    frames = [unmapped_terms(u.respondents, glossary, settings.top_k) for u in languages]
    if frames:
        result.add(
            "unmapped_terms",
            pd.concat(frames, ignore_index=True),
            f"each language's top {settings.top_k} terms (by weighted share of respondents mentioning) that no "
            "glossary concept covers; rank is the rank among all the language's terms",
        )
    if settings.dictionaries:
        _proposals(languages, glossary, study, result)


def _concept_keyness(counts: dict[str, object], study: Study, result: CompareResult) -> None:
    """Each language against the other languages, concept by concept (respondents mentioning)."""
    settings = study.compare
    languages = list(counts)
    if len(languages) < 2:
        result.notes.append("only one language: concept shares cannot be compared across languages")
        return
    stacked = sp.vstack([counts[lang].mentions for lang in languages]).tocsr()
    weights = np.concatenate([counts[lang].weights for lang in languages])
    labels = np.concatenate([np.full(counts[lang].mentions.shape[0], lang, dtype=object) for lang in languages])
    concepts = np.asarray(counts[languages[0]].concepts, dtype=object)
    rc = RespondentCounts(stacked, stacked, np.arange(len(labels)).astype(object), weights, concepts, "concepts")
    sums = group_sums(rc, labels, languages, "respondents")
    targets = [g for g, _ in enumerate(languages) if sums.respondents[g] >= settings.min_group_size]
    for kt in keyness_tables(sums, concepts, targets=targets, min_freq=settings.min_freq, fdr=settings.fdr):
        table = kt.table.rename(columns={"term": "concept"})
        result.add(
            table_name("concept_keyness", kt.target, "vs_other_languages"),
            table,
            f"glossary concepts: respondents answering in '{kt.target}' ({kt.n_target}) against respondents "
            f"answering in the other languages ({kt.n_reference}); G², BH-adjusted p, Log Ratio as in the "
            "keyness tables; counting respondents mentioning any term of the concept",
        )


def _proposals(languages: list[_Unit], glossary: Glossary | None, study: Study, result: CompareResult) -> None:
    from workbench.core.dictd import open_dictionary, propose_links

    settings = study.compare
    dictionaries = [open_dictionary(path) for path in settings.dictionaries]
    for d in dictionaries:
        if d.source is None or d.target is None:
            result.warnings.append(
                f"dictionary {d.index_path.name}: languages not recognised from the file name "
                "(expected e.g. freedict-deu-eng.index); it was not used"
            )
    top: dict[str, list[str]] = {}
    vocabulary: dict[str, set[str]] = {}
    for unit in languages:
        rc = unit.respondents
        weighted = np.asarray(rc.mentions.T @ rc.weights).ravel()
        order = np.lexsort((rc.terms.astype(str), -weighted))
        top[unit.name] = [str(rc.terms[j]) for j in order[: max(settings.top_k, 50)] if weighted[j] > 0]
        vocabulary[unit.name] = {str(t) for t in rc.terms}
    table = propose_links(top, vocabulary, dictionaries, glossary.mapping if glossary else None)
    result.add(
        "glossary_proposals",
        table,
        "glossary links proposed from bilingual dictionaries for the study's top terms (forward: a top term's "
        "translation is in the other language's vocabulary; reverse: a top term is a translation of a term the "
        "study has); suggestions only — add accepted rows to the glossary CSV",
    )
    result.notes.append(f"{len(table):,} glossary links proposed from {len(dictionaries)} dictionaries (not applied)")


# --------------------------------------------------------------------------- keyword in context


def _kwic_tables(answers: pd.DataFrame, units: list[_Unit], study: Study, result: CompareResult) -> None:
    settings = study.compare
    if not settings.kwic_terms:
        return
    from workbench.core.kwic import kwic_lines, resolve_kwic_entry

    glossary = read_glossary(settings.glossary, study.languages.expected) if settings.glossary else None
    languages = [u.name for u in units if u.name != POOLED]
    spans = _span_finder(study, languages, result)
    for entry in settings.kwic_terms:
        targets, label = resolve_kwic_entry(entry, languages, glossary)
        table = kwic_lines(answers, targets, width=settings.kwic_width, spans=spans)
        if table.empty:
            result.notes.append(f"KWIC '{entry}': no answer holds it")
        elif not table["located"].all():
            result.notes.append(
                f"KWIC '{entry}': {int((~table['located']).sum())} of {len(table)} lines could not locate the "
                "written form (kept with located = false)"
            )
        result.add(
            table_name("kwic", label),
            table,
            f"answers holding {label} (as counted: the term is in the answer's term list) with "
            f"{settings.kwic_width} characters of context on each side; line = left [match] right",
        )


def _span_finder(study: Study, languages: list[str], result: CompareResult):
    """Token spans with terms from the terms stage's own termers; ``None`` if they cannot be built."""
    from workbench.core.decisions import load_decisions
    from workbench.core.errors import TermloomError
    from workbench.core.kwic import termer_spans
    from workbench.core.profiles import load_profile
    from workbench.core.terms import make_termer

    decisions = load_decisions(study.decisions_path if study.study_path else None)
    termers = {}
    for language in languages:
        try:
            termers[language] = make_termer(language, load_profile(language), study, decisions)
        except TermloomError as exc:
            result.notes.append(f"KWIC in '{language}' locates terms by plain search only: {exc}")
    return termer_spans(termers)
