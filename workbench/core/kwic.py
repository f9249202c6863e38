"""Keyword in context (KWIC): the answers that hold a term, with the match and its surroundings.

An answer *holds* a term when the term is in its ``terms`` list (the terms
stage's output), so KWIC finds exactly the answers the statistics counted.
The match is then located in the answer's ``clean_text``:

1. the text is split into tokens with the language's spaCy tokenizer (the
   one the terms stage uses) and each token's term is worked out by the
   language's termer (``LanguageTermer.normalise``: lemma, overrides, lower
   case), so the lemma ``preis`` is found as the written "Preise"; an n-gram
   term matches consecutive tokens whose terms are its words;
2. failing that (an ``und`` answer, an emoji, a form the tokenizer split
   differently), a case-insensitive search for the term as a whole word;
3. failing that, the line is kept with ``located = False`` and the start of
   the answer as right context, so no holding answer is hidden.

Each occurrence gives one line: ``left`` (up to ``width`` characters before
the match), ``match``, ``right`` (up to ``width`` after), and ``line``, the
three joined with the match in brackets, ``left [match] right``. Line breaks
inside the context become spaces.
"""

from __future__ import annotations

import re
from collections.abc import Callable, Sequence

import numpy as np
import pandas as pd

from workbench.core.corpus import (
    ANSWER_ID,
    CLEAN_TEXT,
    ENTERS_WEIGHTING,
    GROUP_PREFIX,
    LANGUAGE,
    QUESTION,
    RESPONDENT_ID,
    TERMS,
)
from workbench.core.errors import SettingsError
from workbench.core.glossary import Glossary, normalise_term

KWIC_COLUMNS = [
    "answer_id", "respondent_id", "language", "question", "term", "left", "match", "right",
    "line", "located", "start", "end",
]  # fmt: skip

#: ``spans(language, texts) -> per text a list of (start, end, term)`` over its tokens.
SpanFinder = Callable[[str, Sequence[str]], list[list[tuple[int, int, str]]]]


def resolve_kwic_entry(
    entry: str, languages: Sequence[str], glossary: Glossary | None
) -> tuple[list[tuple[str | None, str]], str]:
    """Turn one ``compare.kwic_terms`` entry into (language or ``None``, term) targets and a label.

    ``concept:<id>`` or an entry that is a glossary concept id means every
    term of that concept in its language; ``de:preis`` means the term in one
    language; anything else is the term in every language.
    """
    text = entry.strip()
    if glossary is not None:
        concept = text[len("concept:") :] if text.startswith("concept:") else text
        if concept in glossary.mapping.values():
            targets = sorted((lang, term) for (lang, term), c in glossary.mapping.items() if c == concept)
            return [(lang, term) for lang, term in targets], f"concept {concept}"
    if text.startswith("concept:"):
        raise SettingsError(
            f"compare.kwic_terms: '{text}' names a concept but "
            + ("the glossary has no such concept" if glossary is not None else "the study has no glossary")
            + "; give a term, a 'lang:term' or an existing concept id"
        )
    head, sep, tail = text.partition(":")
    if sep and head in languages and tail.strip():
        return [(head, normalise_term(tail, head))], f"{head}:{normalise_term(tail, head)}"
    return [(None, normalise_term(text))], normalise_term(text)


def _context(text: str, start: int, end: int, width: int) -> tuple[str, str, str]:
    left = text[max(0, start - width) : start]
    right = text[end : end + width]
    return tuple(" ".join(part.split()) if part.strip() else "" for part in (left, text[start:end], right))  # type: ignore[return-value]


def _word_search(text: str, term: str) -> list[tuple[int, int]]:
    words = [re.escape(w) for w in term.split()]
    if not words:
        return []
    pattern = r"(?<!\w)" + r"\W+".join(words) + r"(?!\w)"
    return [(m.start(), m.end()) for m in re.finditer(pattern, text, flags=re.IGNORECASE)]


def _token_matches(spans: list[tuple[int, int, str]], term: str) -> list[tuple[int, int]]:
    parts = term.split(" ")
    n = len(parts)
    out = []
    for i in range(len(spans) - n + 1):
        if all(spans[i + k][2] == parts[k] for k in range(n)):
            out.append((spans[i][0], spans[i + n - 1][1]))
    return out


def kwic_lines(
    answers: pd.DataFrame,
    targets: list[tuple[str | None, str]],
    width: int,
    spans: SpanFinder | None = None,
) -> pd.DataFrame:
    """KWIC lines of every answer holding one of ``targets`` (see the module docstring).

    Parameters
    ----------
    answers
        Answers table with ``terms``, ``clean_text``, ``language``,
        ``answer_id``, ``respondent_id`` (group columns are carried along).
    targets
        ``(language, term)`` pairs; language ``None`` matches every language.
    width
        Characters of context on each side.
    spans
        Token finder used for step 1 (``None`` skips it, e.g. when no
        language profile is at hand; :func:`termer_spans` builds the real one).

    Returns
    -------
    pandas.DataFrame
        :data:`KWIC_COLUMNS`, then ``enters_weighting`` and the ``group:``
        columns when the answers table has them; in answer order.
    """
    groups = [c for c in answers.columns if str(c).startswith(GROUP_PREFIX)]
    extra = ([ENTERS_WEIGHTING] if ENTERS_WEIGHTING in answers.columns else []) + groups
    by_language: dict[str | None, set[str]] = {}
    for language, term in targets:
        by_language.setdefault(language, set()).add(term)
    anywhere = by_language.get(None, set())
    languages = answers[LANGUAGE].astype(str).to_numpy() if LANGUAGE in answers.columns else np.full(len(answers), "")
    term_lists = answers[TERMS].to_numpy()
    holding: list[tuple[int, list[str]]] = []
    for i, (language, terms) in enumerate(zip(languages, term_lists, strict=True)):
        if terms is None or (isinstance(terms, float) and np.isnan(terms)):
            continue
        wanted = anywhere | by_language.get(language, set())
        if not wanted:
            continue
        present = wanted.intersection(terms)
        if present:
            holding.append((i, sorted(present)))
    if not holding:
        return pd.DataFrame(columns=KWIC_COLUMNS + extra)
    texts = answers[CLEAN_TEXT].fillna("").astype(str).to_numpy()
    token_spans: dict[int, list[tuple[int, int, str]]] = {}
    if spans is not None:
        rows_of: dict[str, list[int]] = {}
        for i, _terms in holding:
            rows_of.setdefault(str(languages[i]), []).append(i)
        for language, rows in rows_of.items():
            for i, found in zip(rows, spans(language, [texts[r] for r in rows]), strict=True):
                token_spans[i] = found
    # Plain arrays: reading cells through pandas once per line would dominate the cost.
    column = {
        "answer_id": answers[ANSWER_ID].to_numpy(dtype=object),
        "respondent_id": answers[RESPONDENT_ID].to_numpy(dtype=object) if RESPONDENT_ID in answers.columns else None,
        "question": answers[QUESTION].to_numpy(dtype=object) if QUESTION in answers.columns else None,
        **{c: answers[c].to_numpy(dtype=object) for c in extra},
    }
    out = []
    for i, present in holding:
        text = texts[i]
        for term in present:
            places = _token_matches(token_spans.get(i, []), term) or _word_search(text, term)
            base = {
                "answer_id": column["answer_id"][i],
                "respondent_id": column["respondent_id"][i] if column["respondent_id"] is not None else "",
                "language": languages[i],
                "question": column["question"][i] if column["question"] is not None else "",
                "term": term,
            }
            base.update({c: column[c][i] for c in extra})
            if not places:
                right = " ".join(text[: 2 * width].split())
                out.append({**base, "left": "", "match": "", "right": right, "line": f"[] {right}",
                            "located": False, "start": -1, "end": -1})  # fmt: skip
                continue
            for start, end in places:
                left, match, right = _context(text, start, end, width)
                out.append({**base, "left": left, "match": match, "right": right,
                            "line": f"{left} [{match}] {right}".strip(), "located": True,
                            "start": start, "end": end})  # fmt: skip
    return pd.DataFrame(out, columns=KWIC_COLUMNS + extra)


def termer_spans(termers: dict[str, object]) -> SpanFinder:
    """A :data:`SpanFinder` from the terms stage's per-language termers (``LanguageTermer``).

    Tokens come from the language's spaCy tokenizer; each token's character
    offset is found by searching its text forward from the previous token
    (the tokenizer keeps text order), and its term by ``termer.normalise``,
    called once per distinct token per batch.
    """
    from workbench.core.profiles import load_profile
    from workbench.core.terms import blank_tokenizer

    def find(language: str, texts: Sequence[str]) -> list[list[tuple[int, int, str]]]:
        termer = termers.get(language)
        if termer is None:
            return [[] for _ in texts]
        tokenizer = blank_tokenizer(load_profile(language).spacy_code)
        located: list[list[tuple[int, int, str]]] = []
        forms: set[str] = set()
        for text in texts:
            position, row = 0, []
            for token in tokenizer(text):
                form = token.text
                at = text.find(form, position)
                if at < 0 or not form.strip():
                    continue
                row.append((at, at + len(form), form))
                position = at + len(form)
                forms.add(form)
            located.append(row)
        ordered = sorted(forms)
        term_of = dict(zip(ordered, termer.normalise(ordered), strict=True))  # type: ignore[attr-defined]
        return [[(s, e, term_of[f]) for s, e, f in row] for row in located]

    return find
