"""Keyword in context: which answers hold a term, where the written form is, and its context."""

from __future__ import annotations

from pathlib import Path

import pandas as pd
import pytest

from workbench.core.decisions import Decisions
from workbench.core.errors import SettingsError
from workbench.core.glossary import read_glossary
from workbench.core.kwic import kwic_lines, resolve_kwic_entry, termer_spans
from workbench.core.profiles import load_profile
from workbench.core.settings import study_from_dict
from workbench.core.terms import make_termer


def _answers() -> pd.DataFrame:
    rows = [
        ("r1|q1", "r1", "de", "Die Preise sind viel zu hoch, leider.", ["preis", "hoch", "leider"]),
        ("r2|q1", "r2", "de", "Preis ok. Lieferung langsam.\nSonst gut", ["preis", "lieferung", "langsam", "gut"]),
        ("r3|q1", "r3", "fr", "Le prix est correct", ["prix", "correct"]),
        ("r4|q1", "r4", "de", "Alles gut", ["gut"]),
        ("r5|q1", "r5", "de", "Kundenservice top", ["kundenservice", "top"]),
    ]
    return pd.DataFrame(
        [
            {"answer_id": a, "respondent_id": r, "language": lang, "question": "q1", "clean_text": text,
             "terms": terms, "group:country": "DE" if lang == "de" else "FR", "enters_weighting": True}
            for a, r, lang, text, terms in rows
        ]
    )  # fmt: skip


def test_plain_search_context_and_width() -> None:
    """Without token spans: whole-word, case-insensitive search; context = width characters of the
    text on each side (spaces and the line break included), then whitespace collapsed."""
    table = kwic_lines(_answers(), [("de", "lieferung")], width=12)
    assert len(table) == 1
    row = table.iloc[0]
    assert (row["left"], row["match"], row["right"]) == ("Preis ok.", "Lieferung", "langsam. So")
    assert row["line"] == "Preis ok. [Lieferung] langsam. So"
    assert row["located"] and row["group:country"] == "DE" and row["respondent_id"] == "r2"


def test_lemma_located_through_the_termer(tmp_path: Path) -> None:
    """The lemma 'preis' is found as the written 'Preise' by the German termer of the terms stage
    (spaCy blank tokenizer + spacy-lookups-data lookup lemmas: Preise -> Preis); plain search would
    miss it (it is not the whole word). Only answers whose term list holds the term are listed."""
    study = study_from_dict({"sources": [{"path": "a.csv"}], "languages": {"expected": ["de"]}}, base_dir=tmp_path)
    termers = {"de": make_termer("de", load_profile("de"), study, Decisions())}
    table = kwic_lines(_answers(), [("de", "preis")], width=13, spans=termer_spans(termers))
    assert list(table["answer_id"]) == ["r1|q1", "r2|q1"]
    first = table.iloc[0]
    assert (first["match"], first["left"], first["right"]) == ("Preise", "Die", "sind viel zu")
    assert first["start"] == 4 and first["end"] == 10
    plain = kwic_lines(_answers(), [("de", "preis")], width=13)
    assert not plain.iloc[0]["located"]  # kept, marked, never hidden


def test_term_in_every_language_and_ngrams() -> None:
    """A bare term matches every language; an n-gram matches its words in sequence."""
    answers = _answers()
    answers.at[0, "terms"] = ["preis", "viel zu hoch"]
    table = kwic_lines(answers, [(None, "viel zu hoch"), (None, "prix")], width=5)
    assert set(table["term"]) == {"viel zu hoch", "prix"}
    assert table.set_index("term").loc["viel zu hoch", "match"] == "viel zu hoch"
    assert table.set_index("term").loc["prix", "language"] == "fr"


def test_not_located_is_kept() -> None:
    """An answer that holds the term but whose text does not show it is listed with located = False."""
    answers = _answers()
    answers.at[4, "terms"] = ["service"]
    table = kwic_lines(answers, [("de", "service")], width=8)
    assert len(table) == 1 and not table.iloc[0]["located"] and table.iloc[0]["match"] == ""
    assert kwic_lines(answers, [("de", "nichts")], width=8).empty


def test_resolve_entries(tmp_path: Path) -> None:
    """KWIC entries: 'de:Preis' (one language, normalised), a bare term, a concept id, and a
    'concept:' entry without a glossary (a one-line SettingsError)."""
    glossary_path = tmp_path / "g.csv"
    glossary_path.write_text("concept,language,term\nprice,de,preis\nprice,fr,prix\n", encoding="utf-8")
    glossary = read_glossary(glossary_path, ["de", "fr"])
    assert resolve_kwic_entry("de:Preis", ["de", "fr"], None) == ([("de", "preis")], "de:preis")
    assert resolve_kwic_entry("Lieferung", ["de", "fr"], None) == ([(None, "lieferung")], "lieferung")
    targets, label = resolve_kwic_entry("concept:price", ["de", "fr"], glossary)
    assert targets == [("de", "preis"), ("fr", "prix")] and label == "concept price"
    assert resolve_kwic_entry("price", ["de", "fr"], glossary)[1] == "concept price"
    with pytest.raises(SettingsError, match="no glossary"):
        resolve_kwic_entry("concept:price", ["de"], None)
