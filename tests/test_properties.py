"""Property tests over ingest -> clean -> identify -> terms with generated text, layouts and settings.

For any file a respondent's text can produce — arbitrary Unicode without surrogates, right-to-left
scripts, emoji sequences, control and invisible characters, personal data, very long tokens — in
any layout (1-4 text columns in any order, empty and blank cells, duplicate and blank ids, a hint
and a group column, CSV or JSON Lines) and under any settings (clean.min_chars, terms.ngrams,
languages.fallback, identify.min_confidence and min_letters, masks), the stages:

* raise nothing but :class:`~workbench.core.errors.TermloomError` subclasses, with one-line messages;
* keep the ledger invariant (``ledger.py``): every input record is a respondent or a ``dropped``
  row event, every respondent and every answer has at least one event, answers in (non-blank
  text cells written) = answers accounted for, and no answer disappears between stages;
* keep each answer's raw text exactly as written, and hand on well-formed columns
  (a language among the expected ones or ``und``, a list of non-empty string terms).

Budgets come from hypothesis profiles registered in ``tests/conftest.py``: ``ci`` by default,
``HYPOTHESIS_PROFILE=thorough`` for the on-demand run of 10,000+ examples.
"""

from __future__ import annotations

import csv
import json
import os
import sys
import tempfile
from pathlib import Path

import pandas as pd
from hypothesis import HealthCheck, event, given, settings
from hypothesis import strategies as st

from workbench.core import corpus as C
from workbench.core.errors import TermloomError
from workbench.core.pipeline import run_study
from workbench.core.settings import study_from_dict

THOROUGH = os.environ.get("HYPOTHESIS_PROFILE") == "thorough"
#: Longest generated token; the thorough profile goes further.
LONG = 6_000 if THOROUGH else 3_000
#: Examples run so far in this process; the thorough profile reports every PROGRESS_EVERY of them
#: on stderr, since a run takes hours (run it with ``pytest -s``: pytest captures file descriptor 2 too).
_RUN = [0]
PROGRESS_EVERY = 250

WORDS = [
    "train", "late", "coffee", "staff", "friendly", "price", "the", "was", "and", "not",
    "Zug", "pünktlich", "Frühstück", "teuer", "café", "très", "cher", "retard",
    "поезд", "опоздал", "дорого", "τρένο", "καθυστέρηση", "tren", "geç", "kahve", "İstanbul", "ıı",
    "N/A", "no comment", "asdfgh", "???", "-", "...", "1.5", "12:30", "100%",
]  # fmt: skip
RTL = ["قطار", "متأخر", "القهوة", "רכבת", "איחור", "קפה", "\u202eevil\u202c"]
EMOJI = ["👍", "👍🏽", "🚆", "☕", "❤️", "🇩🇪", "👨‍👩‍👧", "🏳️‍🌈", "©", "\ufe0f", "\U0001faff"]
CONTROL = ["\x00", "\x01", "\x07", "\x1b", "\x1f", "\x7f", "\x85", "\u200b", "\u200d", "\u200e", "\u2028",
           "\ufeff", "\ufffd", "\t", "\n", "\r\n", "\r", "\u00a0", "&amp;", "&#0;", "<b>", "⟨email⟩"]
PII = ["write to a.b@example.com", "+49 30 1234567", "DE89 3704 0044 0532 0130 00", "www.example.org/x",
       "4111 1111 1111 1111", "0171 2345678", "01.02.2024"]

any_text = st.text(alphabet=st.characters(blacklist_categories=["Cs"]), max_size=16)
long_token = st.builds(lambda part, n: part * n, st.sampled_from(["a", "é", "я", "😀", "-", ".", "a-", "1 ", "@"]),
                       st.integers(50, LONG))
token = st.one_of(
    st.sampled_from(WORDS), st.sampled_from(RTL), st.sampled_from(EMOJI), st.sampled_from(CONTROL),
    st.sampled_from(PII), any_text, long_token,
)
cell = st.one_of(
    st.just(""), st.sampled_from([" ", "   ", "\t", "\u3000"]),
    st.lists(token, max_size=10).map(" ".join), st.lists(token, max_size=4).map("".join),
)
ident = st.one_of(st.sampled_from(["", " ", "1", "1", "2", "a", "é", "1#2", "row-1", "x|y"]), any_text)
languages = st.lists(st.sampled_from(["en", "de", "fr", "ru", "el", "tr", "es"]), min_size=1, max_size=3, unique=True)


@st.composite
def layouts(draw: st.DrawFn) -> dict:
    texts = [f"q{i}" for i in range(1, draw(st.integers(1, 4)) + 1)]
    columns = [*texts, *(["id"] if draw(st.booleans()) else []), *(["hint"] if draw(st.booleans()) else []),
               *(["grp"] if draw(st.booleans()) else [])]
    columns = draw(st.permutations(columns))
    rows = draw(st.lists(st.fixed_dictionaries({c: ident if c == "id" else cell for c in columns}), min_size=1, max_size=10))
    return {"texts": texts, "columns": list(columns), "rows": rows, "format": draw(st.sampled_from(["csv", "jsonl"])),
            "crlf": draw(st.booleans()), "bom": draw(st.booleans())}


@st.composite
def study_settings(draw: st.DrawFn) -> dict:
    expected = draw(languages)
    fallback = draw(st.sampled_from(["hint", "default", "und"]))
    return {
        "languages": {"expected": expected, "fallback": fallback,
                      **({"default": draw(st.sampled_from(expected))} if fallback == "default" else {})},
        "clean": {"min_chars": draw(st.integers(0, 20)),
                  "mask": draw(st.lists(st.sampled_from(["email", "phone", "url", "iban", "card"]), unique=True))},
        "identify": {"min_confidence": draw(st.floats(0, 1)), "min_letters": draw(st.integers(0, 30))},
        "terms": {"ngrams": draw(st.integers(1, 3)), "min_length": draw(st.integers(1, 4)),
                  "keep_numbers": draw(st.booleans()), "keep_emoji": draw(st.booleans()),
                  "include_und": draw(st.booleans())},
    }


def write_source(folder: Path, layout: dict) -> Path:
    columns, rows = layout["columns"], layout["rows"]
    if layout["format"] == "csv":
        path = folder / "answers.csv"
        with path.open("w", encoding="utf-8-sig" if layout["bom"] else "utf-8", newline="") as handle:
            # The csv module quotes a field holding CR only when CR is in the line terminator;
            # with "\n" line ends every field is quoted, or a lone CR would end the record.
            if layout["crlf"]:
                writer = csv.writer(handle, lineterminator="\r\n")
            else:
                writer = csv.writer(handle, lineterminator="\n", quoting=csv.QUOTE_ALL)
            writer.writerow(columns)
            writer.writerows([row[c] for c in columns] for row in rows)
    else:
        path = folder / "answers.jsonl"
        lines = [json.dumps(row, ensure_ascii=layout["bom"]) for row in rows]
        path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def is_answer(text: str) -> bool:
    """ingest.py: an answer is a non-empty text cell that is not all white space."""
    return bool(text) and not text.isspace()


@settings(suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
@given(layout=layouts(), chosen=study_settings())
def test_stages_account_for_every_row_and_answer(layout: dict, chosen: dict) -> None:
    _RUN[0] += 1
    if THOROUGH and _RUN[0] % PROGRESS_EVERY == 0:
        print(f"[properties] {_RUN[0]:,} examples run", file=sys.__stderr__, flush=True)
    with tempfile.TemporaryDirectory() as folder:
        source = write_source(Path(folder), layout)
        columns = {"text": layout["texts"]}
        if "id" in layout["columns"]:
            columns["id"] = "id"
        if "hint" in layout["columns"]:
            columns["language_hint"] = "hint"
        if "grp" in layout["columns"]:
            columns["groups"] = ["grp"]
        src = {"path": source.name, **({"delimiter": ","} if layout["format"] == "csv" else {})}
        study = study_from_dict({"sources": [src], "columns": columns, **chosen}, base_dir=Path(folder))
        try:
            out = run_study(study, until="terms")
        except TermloomError as exc:
            assert "\n" not in str(exc)
            event(f"refused: {type(exc).__name__}")
            return
    check_ledger(out, layout)


def check_ledger(out, layout: dict) -> None:  # type: ignore[no-untyped-def]
    frame = out.ledger.frame()
    respondents = out.corpus.respondents
    ingested = out.snapshots["ingest"]
    answers = out.snapshots["terms"]
    rows = frame[frame["level"] == "row"]
    dropped = rows.loc[rows["status"] == "dropped", "key"].nunique()

    # every record written is a respondent or a dropped row event; every respondent has an event
    assert len(respondents) + dropped == len(layout["rows"])
    assert set(respondents[C.RESPONDENT_ID]) <= set(rows["key"])
    assert respondents[C.RESPONDENT_ID].is_unique

    # answers in = answers accounted for, in every stage
    cells = [row[q] for row in layout["rows"] for q in layout["texts"] if isinstance(row[q], str)]
    assert len(ingested) == sum(map(is_answer, cells))
    assert answers[C.ANSWER_ID].tolist() == ingested[C.ANSWER_ID].tolist()
    assert answers[C.ANSWER_ID].is_unique
    accounted = set(frame.loc[frame["level"] == "answer", "key"])
    assert set(answers[C.ANSWER_ID]) <= accounted
    assert sum(out.ledger.counts()["answer"].values()) == len(answers)
    cleaned = set(frame.loc[(frame["level"] == "answer") & (frame["stage"] == "clean"), "key"])
    assert cleaned == set(answers[C.ANSWER_ID])  # clean's promise: at least one event per answer

    # raw text exactly as written, in input order; well-formed columns for the later stages
    written = sorted(
        (number, q, row[q]) for number, row in enumerate(layout["rows"], start=1) for q in layout["texts"]
        if is_answer(row[q])
    )
    read = sorted(zip(ingested[C.ROW].astype(int), ingested[C.QUESTION], ingested[C.RAW_TEXT]))
    assert [text for *_, text in read] == [text for *_, text in written]
    allowed = {*out.study.languages.expected, "und"}
    assert set(answers[C.LANGUAGE]) <= allowed
    for terms in answers[C.TERMS]:
        assert isinstance(terms, list) and all(isinstance(t, str) and t for t in terms)
    assert answers[C.ENTERS_WEIGHTING].map(type).eq(bool).all() or answers[C.ENTERS_WEIGHTING].dtype == bool
    assert not any("\x00" in text for text in answers[C.CLEAN_TEXT])
    event(f"answers: {min(len(answers), 10)}{'+' if len(answers) >= 10 else ''}")
