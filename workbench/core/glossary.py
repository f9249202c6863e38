"""The glossary: terms of different languages mapped to shared concepts, and the tables it makes.

File format
-----------
A CSV file (UTF-8, with or without BOM; comma, semicolon or tab separated)
whose header names at least the columns ``concept``, ``language`` and
``term`` (any order, any case; other columns such as a note are ignored)::

    concept,language,term
    price,en,price
    price,de,preis
    price,fr,prix

``term`` is a lemma as the terms stage writes it; it is normalised the same
way (Unicode NFC, lower case as the terms stage does it — Turkish keeps
dotted and dotless i apart —, inner whitespace collapsed to one space), so
``Preis`` in the glossary matches the term ``preis``.

Problems that do not stop a run are reported row by row and the run goes on
(the first occurrence wins): a language that is not one of the study's
languages (row ignored), an empty cell (row ignored), a row repeated exactly
(later copies ignored), and a term of one language listed under two concepts
(the later concept ignored for that term). Problems that make the file
unusable (missing, unreadable, not UTF-8, no header with the three columns)
raise :class:`~workbench.core.errors.InputError`.
"""

from __future__ import annotations

import csv
import io
import unicodedata
from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import scipy.sparse as sp

from workbench.core.errors import InputError
from workbench.core.keyness import RespondentCounts
from workbench.core.lemmas import lowercase

REQUIRED = ("concept", "language", "term")
PROBLEM_COLUMNS = ["line", "concept", "language", "term", "problem"]


def normalise_term(text: str, language: str = "") -> str:
    """NFC, lower case the language's way (Turkish dotted/dotless i), single inner spaces: the form terms are stored in."""
    return " ".join(lowercase(unicodedata.normalize("NFC", str(text)), language).split())


@dataclass
class Glossary:
    """A read glossary: the mapping used by weigh and compare, the kept rows, and what was wrong."""

    path: Path | None
    mapping: dict[tuple[str, str], str]  #: (language, term) -> concept
    rows: pd.DataFrame  #: kept rows: concept, language, term
    problems: pd.DataFrame = field(default_factory=lambda: pd.DataFrame(columns=PROBLEM_COLUMNS))

    @property
    def concepts(self) -> list[str]:
        return sorted(set(self.mapping.values()))

    def terms_of(self, concept: str) -> dict[str, list[str]]:
        """Language -> terms filed under ``concept``."""
        out: dict[str, list[str]] = {}
        for (language, term), c in self.mapping.items():
            if c == concept:
                out.setdefault(language, []).append(term)
        return out

    def notes(self) -> list[str]:
        """One warning line per kind of problem, for the run's notes."""
        if self.problems.empty:
            return []
        counts = self.problems["problem"].str.split(":").str[0].value_counts()
        where = self.path.name if self.path else "glossary"
        return [
            f"glossary {where}: {n} row(s) with {kind} ({_CONSEQUENCE.get(kind, 'ignored')}); "
            "see the glossary_problems table"
            for kind, n in counts.items()
        ]


_CONSEQUENCE = {
    "empty cell": "rows ignored",
    "unknown language": "rows ignored",
    "duplicate row": "first copy kept",
    "term in two concepts": "first concept kept",
}


#: Longest glossary cell read (characters). A cell holds one term; a longer one is a broken
#: file (a quote that never closes swallows the lines after it).
MAX_CELL_CHARS = 10_000


def _records(reader: Any, path: Path) -> Iterator[list[str]]:
    """The CSV records; an over-long cell is a one-line error naming the line, not a crash."""
    try:
        for record in reader:
            longest = max(map(len, record), default=0)
            if longest > MAX_CELL_CHARS:
                raise InputError(
                    f"glossary {path}: line {reader.line_num} has a cell of {longest:,} characters "
                    f"(limit {MAX_CELL_CHARS:,}); a cell holds one term — fix that line"
                )
            yield record
    except csv.Error as exc:
        raise InputError(
            f"glossary {path}: line {reader.line_num} cannot be read as CSV ({exc}); a cell holds one term — fix that line"
        ) from None


def read_glossary(path: Path | str, languages: list[str]) -> Glossary:
    """Read a glossary CSV (format in the module docstring).

    Parameters
    ----------
    path
        The CSV file.
    languages
        The study's languages; rows in other languages are reported and ignored.

    Raises
    ------
    InputError
        When the file is missing, unreadable, not UTF-8, or lacks a column.
    """
    path = Path(path)
    try:
        raw = path.read_bytes()
    except FileNotFoundError:
        raise InputError(f"glossary {path} does not exist; fix compare.glossary or create the CSV (concept,language,term)") from None
    except OSError as exc:
        raise InputError(f"glossary {path} cannot be read ({exc.strerror}); check the path and its permissions") from None
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = raw[: exc.start].count(b"\n") + 1
        raise InputError(f"glossary {path}: line {line} is not UTF-8; save the file as UTF-8 CSV") from None
    if not text.strip():
        raise InputError(f"glossary {path} is empty; it needs a header concept,language,term and one row per term")
    first_line = text.split("\n", 1)[0]
    delimiter = max((",", ";", "\t"), key=first_line.count)
    # the same limit the data reader sets (the csv module's is process-wide), so MAX_CELL_CHARS decides
    csv.field_size_limit(max(csv.field_size_limit(), 2**31 - 1))
    reader = csv.reader(io.StringIO(text, newline=""), delimiter=delimiter)
    records = _records(reader, path)
    header = [h.strip().lower() for h in next(records)]
    missing = [c for c in REQUIRED if c not in header]
    if missing:
        raise InputError(
            f"glossary {path}: header has no column {', '.join(repr(m) for m in missing)} "
            f"(found: {', '.join(repr(h) for h in header)}); the first line must name concept, language and term"
        )
    position = {c: header.index(c) for c in REQUIRED}
    known = set(languages)
    mapping: dict[tuple[str, str], str] = {}
    seen_rows: dict[tuple[str, str, str], int] = {}
    kept: list[tuple[str, str, str]] = []
    problems: list[tuple[int, str, str, str, str]] = []
    for cells in records:
        line = reader.line_num
        if not any(c.strip() for c in cells):
            continue
        values = [cells[position[c]].strip() if position[c] < len(cells) else "" for c in REQUIRED]
        concept, language = values[0], values[1].lower()
        term = normalise_term(values[2], language)
        if not concept or not language or not term:
            problems.append((line, concept, language, term, "empty cell: concept, language and term are all needed"))
            continue
        if language not in known:
            problems.append(
                (line, concept, language, term, f"unknown language: '{language}' is not one of the study's languages ({', '.join(languages)})")
            )
            continue
        key = (concept, language, term)
        if key in seen_rows:
            problems.append((line, concept, language, term, f"duplicate row: same as line {seen_rows[key]}"))
            continue
        seen_rows[key] = line
        existing = mapping.get((language, term))
        if existing is not None:
            problems.append(
                (line, concept, language, term, f"term in two concepts: '{language}:{term}' is already in concept '{existing}'")
            )
            continue
        mapping[(language, term)] = concept
        kept.append(key)
    return Glossary(
        path=path,
        mapping=mapping,
        rows=pd.DataFrame(kept, columns=list(REQUIRED)),
        problems=pd.DataFrame(problems, columns=PROBLEM_COLUMNS),
    )


# --------------------------------------------------------------------------- concept tables


@dataclass
class ConceptCounts:
    """Respondents of one language mentioning each concept (any of its terms)."""

    language: str
    concepts: list[str]
    mentions: sp.csr_matrix  #: respondents × concepts, 1 where mentioned
    weights: np.ndarray
    term_mentions: dict[str, list[tuple[str, float]]]  #: concept -> (term, weighted respondents)


def concept_counts(rc: RespondentCounts, glossary: Glossary) -> ConceptCounts:
    """Collapse a language's respondent × term matrix onto the glossary's concepts.

    One sparse product with a term × concept membership matrix gives, per
    respondent, how many of a concept's terms they used; a respondent
    mentions a concept if that number is positive (so a respondent naming
    two synonyms counts once).
    """
    concepts = glossary.concepts
    column = {c: k for k, c in enumerate(concepts)}
    term_index = {str(t): j for j, t in enumerate(rc.terms)}
    rows, cols = [], []
    for (language, term), concept in glossary.mapping.items():
        j = term_index.get(term)
        if language == rc.language and j is not None:
            rows.append(j)
            cols.append(column[concept])
    membership = sp.csr_matrix((np.ones(len(rows)), (rows, cols)), shape=(len(rc.terms), len(concepts)))
    mentions = sp.csr_matrix(rc.mentions @ membership)
    mentions.data = (mentions.data > 0).astype(np.float64)
    mentions.eliminate_zeros()
    weighted_terms = np.asarray(rc.mentions.T @ rc.weights).ravel()
    term_mentions: dict[str, list[tuple[str, float]]] = {}
    for j, k in zip(rows, cols, strict=True):
        term_mentions.setdefault(concepts[k], []).append((str(rc.terms[j]), float(weighted_terms[j])))
    return ConceptCounts(rc.language, concepts, mentions, rc.weights, term_mentions)


def concept_table(counts: dict[str, ConceptCounts], glossary: Glossary) -> pd.DataFrame:
    """Each concept's weighted share of respondents per language, side by side, with its terms.

    ``share_<lang> = Σ_{i mentions c} w_i / Σ_i w_i`` over the respondents of
    that language; ``n_<lang>`` is the unweighted number of respondents
    mentioning; ``terms_<lang>`` lists the glossary terms found, most
    mentioned first, as ``term (weighted respondents)``; glossary terms that
    never occur are listed under ``absent_<lang>``.
    """
    languages = list(counts)
    sums = {}
    for language, cc in counts.items():
        total = float(cc.weights.sum())
        weighted = np.asarray(cc.mentions.T @ cc.weights).ravel()
        sums[language] = (
            weighted / total if total > 0 else np.full(len(cc.concepts), np.nan),
            np.bincount(cc.mentions.indices, minlength=len(cc.concepts)),
            {c: k for k, c in enumerate(cc.concepts)},
        )
    rows = []
    for concept in glossary.concepts:
        row: dict[str, object] = {"concept": concept}
        listed = glossary.terms_of(concept)
        for language in languages:
            share, number, position = sums[language]
            k = position[concept]
            row[f"share_{language}"] = float(share[k])
            row[f"n_{language}"] = int(number[k])
            found = sorted(counts[language].term_mentions.get(concept, []), key=lambda tm: (-tm[1], tm[0]))
            row[f"terms_{language}"] = "; ".join(f"{t} ({m:g})" for t, m in found if m > 0)
            present = {t for t, m in found if m > 0}
            row[f"absent_{language}"] = "; ".join(sorted(set(listed.get(language, [])) - present))
        rows.append(row)
    table = pd.DataFrame(rows)
    if not table.empty and languages:
        table["spread"] = table[[f"share_{lang}" for lang in languages]].max(axis=1) - table[
            [f"share_{lang}" for lang in languages]
        ].min(axis=1)
    return table


def unmapped_terms(rc: RespondentCounts, glossary: Glossary | None, top_n: int) -> pd.DataFrame:
    """The language's most mentioned terms that no glossary concept covers, to extend the glossary.

    Ranked by weighted share of respondents mentioning; ``rank`` is the rank
    among all terms of the language (so a gap shows where mapped terms sit).
    """
    mapping = glossary.mapping if glossary is not None else {}
    weighted = np.asarray(rc.mentions.T @ rc.weights).ravel()
    total = float(rc.weights.sum())
    number = np.bincount(rc.mentions.indices, minlength=len(rc.terms))
    order = np.lexsort((rc.terms.astype(str), -weighted))
    rows = []
    for rank, j in enumerate(order, start=1):
        if weighted[j] <= 0 or len(rows) >= top_n:
            break
        term = str(rc.terms[j])
        if (rc.language, term) in mapping:
            continue
        rows.append(
            {
                "language": rc.language,
                "rank": rank,
                "term": term,
                "respondents": int(number[j]),
                "share": weighted[j] / total if total > 0 else np.nan,
            }
        )
    return pd.DataFrame(rows, columns=["language", "rank", "term", "respondents", "share"])
