"""Lemma quality checked against outside references, per launch language.

* Gold: tests/data/lemma_gold.tsv — 25 to 45 inflected forms per language with the lemma given by a
  Universal Dependencies treebank (de Marneffe et al. 2021, Computational Linguistics 47(2); the
  treebank and file are named on every line). Floors below are the accuracy measured when the
  profiles were chosen (tests/bench/bench_terms.py) minus a margin of about 0.1 (common practice:
  a floor that catches a broken table or rule, not a one-word change).
* Agreement: on the 2,000 most frequent words of real text in each language (wordfreq package,
  frequency-weighted), our lemma is compared with an independent lemmatiser — simplemma where our
  profile uses spaCy's table, spaCy's table where our profile uses simplemma. The floor is the
  measured agreement minus 0.08. Greek and Finnish have no spaCy table, so no second opinion.

simplemma's own evaluation uses Universal Dependencies treebanks, so its gold accuracy may be
flattered where its dictionaries overlap those treebanks; the spaCy-table languages are free of that.
"""

from __future__ import annotations

from collections import defaultdict
from pathlib import Path

import pytest

from workbench.core.lemmas import LookupLemmatiser, SimplemmaLemmatiser, available_tables, lowercase, make_lemmatiser, open_table
from workbench.core.profiles import load_profile

GOLD = Path(__file__).parent / "data" / "lemma_gold.tsv"

# measured accuracy on the gold file when the backends were chosen (bench_terms.py), minus the margin
GOLD_FLOOR = {
    "ca": 0.90, "cs": 0.85, "da": 0.78, "de": 0.79, "el": 0.68, "en": 0.87, "es": 0.80, "fi": 0.80,
    "fr": 0.70, "hu": 0.66, "it": 0.87, "nb": 0.88, "nl": 0.78, "pl": 0.87, "pt": 0.82, "ro": 0.90,
    "ru": 0.79, "sv": 0.87, "tr": 0.83,
}  # fmt: skip
# measured frequency-weighted agreement on wordfreq's top 2,000 words, minus 0.08
AGREEMENT_FLOOR = {
    "ca": 0.90, "cs": 0.78, "da": 0.84, "de": 0.76, "en": 0.88, "es": 0.73, "fr": 0.79, "hu": 0.86,
    "it": 0.81, "nb": 0.62, "nl": 0.92, "pl": 0.68, "pt": 0.82, "ro": 0.74, "ru": 0.84, "sv": 0.65,
    "tr": 0.91,
}  # fmt: skip


def _gold() -> dict[str, list[tuple[str, str, str, str]]]:
    rows: dict[str, list[tuple[str, str, str, str]]] = defaultdict(list)
    for line in GOLD.read_text(encoding="utf-8").splitlines():
        if line and not line.startswith("#"):
            lang, form, lemma, upos, source = line.split("\t")
            rows[lang].append((form, lemma, upos, source))
    return rows


def _match(predicted: str, gold: str, upos: str, lang: str) -> bool:
    p, g = lowercase(predicted, lang), lowercase(gold, lang)
    # UD_Turkish-IMST gives verb stems; Turkish dictionaries cite the -mak/-mek infinitive.
    return p == g or (lang == "tr" and upos == "VERB" and p in (g + "mak", g + "mek"))


def test_gold_file_covers_every_language_with_twenty_forms(lang: str) -> None:
    rows = _gold()[lang]
    assert len(rows) >= 20, f"{lang}: only {len(rows)} gold forms"
    assert all(source.startswith("UD_") for *_, source in rows)
    forms = [f for f, *_ in rows]
    assert len(forms) == len(set(forms)), f"{lang}: a form is listed twice"


@pytest.mark.slow
def test_gold_accuracy(lang: str) -> None:
    """Accuracy of the profile's lemmatiser (no overrides) on Universal Dependencies gold lemmas."""
    rows = _gold()[lang]
    lemmatiser = make_lemmatiser(load_profile(lang))
    predicted = lemmatiser.lemmas([f for f, *_ in rows])
    hits = [_match(p, g, u, lang) for p, (_f, g, u, _s) in zip(predicted, rows, strict=True)]
    accuracy = sum(hits) / len(rows)
    misses = [(f, g, p) for p, (f, g, _u, _s), ok in zip(predicted, rows, hits, strict=True) if not ok]
    assert accuracy >= GOLD_FLOOR[lang], f"{lang}: {accuracy:.2f} < {GOLD_FLOOR[lang]}; misses {misses[:8]}"


@pytest.mark.slow
def test_agreement_with_an_independent_lemmatiser_on_real_text(lang: str) -> None:
    """Frequency-weighted agreement on wordfreq's 2,000 most frequent words (see module docstring)."""
    import wordfreq

    profile = load_profile(lang)
    ours = make_lemmatiser(profile)
    if profile.lemmatizer == "simplemma":
        tables = available_tables(profile.spacy_code)
        if not tables:
            pytest.skip(f"spaCy ships no lemma table for {lang}: no independent lemmatiser to compare with")
        use = ["lemma_lookup"] if "lemma_lookup" in tables else tables
        other = LookupLemmatiser(open_table(profile.spacy_code, use))
    else:
        other = SimplemmaLemmatiser(lang)
    words = [w for w in wordfreq.top_n_list(lang, 2000) if w.isalpha()]
    if lang == "el":
        words = [w[:-1] + "ς" if w.endswith("σ") else w for w in words]
    freq = [wordfreq.word_frequency(w, lang) for w in words]
    a, b = ours.lemmas(words), other.lemmas(words)
    agreement = sum(f for f, x, y in zip(freq, a, b, strict=True) if lowercase(x, lang) == lowercase(y, lang)) / sum(freq)
    assert agreement >= AGREEMENT_FLOOR[lang], f"{lang}: agreement {agreement:.3f} < {AGREEMENT_FLOOR[lang]}"
