"""Glossary reading (with its bad-input rules) and the cross-language concept tables."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import scipy.sparse as sp

from workbench.core.errors import InputError
from workbench.core.glossary import (
    concept_counts,
    concept_table,
    normalise_term,
    read_glossary,
    unmapped_terms,
)
from workbench.core.keyness import RespondentCounts


def _write(tmp_path: Path, text: str, name: str = "glossary.csv", encoding: str = "utf-8") -> Path:
    path = tmp_path / name
    path.write_bytes(text.encode(encoding))
    return path


def test_reads_plain_glossary_with_bom_and_semicolons(tmp_path: Path) -> None:
    """A spreadsheet-saved CSV (UTF-8 BOM, semicolons, header in another order and case, extra column)."""
    path = _write(tmp_path, "\ufeffLanguage;Term;Concept;note\nde;Preis;price;x\nfr;prix;price;\nen;price;price;\n")
    g = read_glossary(path, ["de", "fr", "en"])
    assert g.mapping == {("de", "preis"): "price", ("fr", "prix"): "price", ("en", "price"): "price"}
    assert g.problems.empty
    assert g.terms_of("price") == {"de": ["preis"], "fr": ["prix"], "en": ["price"]}


def test_terms_normalised_like_the_terms_stage() -> None:
    """Terms are lower-cased the language's way (Unicode SpecialCasing: Turkish I -> ı, İ -> i), NFC,
    single spaces — the same rule as workbench.core.lemmas.lowercase used by the terms stage."""
    assert normalise_term("  Kaffee  TASSE ", "de") == "kaffee tasse"
    assert normalise_term("IĞDIR", "tr") == "ığdır"
    assert normalise_term("İstanbul", "tr") == "istanbul"
    assert normalise_term("Cafe\u0301", "fr") == "café"


def test_bad_rows_are_reported_and_first_kept(tmp_path: Path) -> None:
    """Bad input: unknown language, exact duplicate, a term in two concepts, an empty cell — each row
    reported with its line, the first occurrence kept, the run goes on."""
    path = _write(
        tmp_path,
        "concept,language,term\n"
        "price,de,preis\n"  # line 2
        "price,xx,prys\n"  # 3: unknown language
        "price,de,preis\n"  # 4: duplicate of 2
        "cost,de,Preis\n"  # 5: preis already in price
        "delivery,,lieferung\n"  # 6: empty cell
        "delivery,de,lieferung\n",  # 7
    )
    g = read_glossary(path, ["de", "fr"])
    assert g.mapping == {("de", "preis"): "price", ("de", "lieferung"): "delivery"}
    problems = {int(r.line): r.problem for r in g.problems.itertuples()}
    assert set(problems) == {3, 4, 5, 6}
    assert problems[3].startswith("unknown language")
    assert problems[4] == "duplicate row: same as line 2"
    assert problems[5].startswith("term in two concepts") and "'price'" in problems[5]
    assert problems[6].startswith("empty cell")
    notes = " ".join(g.notes())
    assert "unknown language (rows ignored)" in notes
    assert "term in two concepts (first concept kept)" in notes


@pytest.mark.parametrize(
    ("content", "message"),
    [
        ("", "is empty"),
        ("concept,lang,term\nprice,de,preis\n", "no column 'language'"),
    ],
)
def test_unusable_files_raise(tmp_path: Path, content: str, message: str) -> None:
    """Bad input: an empty file, a header without the needed columns — one InputError line."""
    with pytest.raises(InputError, match=message):
        read_glossary(_write(tmp_path, content), ["de"])


def test_missing_and_non_utf8(tmp_path: Path) -> None:
    """Bad input: a missing file and a Latin-1 file each give one InputError line naming the file."""
    with pytest.raises(InputError, match="does not exist"):
        read_glossary(tmp_path / "none.csv", ["de"])
    path = _write(tmp_path, "concept,language,term\nprice,de,Preis\nsize,de,Größe\n", encoding="latin-1")
    with pytest.raises(InputError, match="line 3 is not UTF-8"):
        read_glossary(path, ["de"])


def _rc(language: str, terms: list[str], rows: list[list[str]], weights: list[float]) -> RespondentCounts:
    col = {t: j for j, t in enumerate(terms)}
    data, ri, ci = [], [], []
    for i, row in enumerate(rows):
        for t in row:
            data.append(1.0)
            ri.append(i)
            ci.append(col[t])
    m = sp.csr_matrix((data, (ri, ci)), shape=(len(rows), len(terms)))
    return RespondentCounts(m, m, np.array([f"{language}{i}" for i in range(len(rows))], dtype=object),
                            np.asarray(weights, dtype=float), np.array(terms, dtype=object), language)  # fmt: skip


def test_concept_table_shares_by_hand(tmp_path: Path) -> None:
    """Concept share = Σ w over respondents naming any of the concept's terms / Σ w (worked by hand):
    de respondents (w = 1, 1, 2, 0.5): {preis}, {preis, kosten}, {lieferung}, {} -> price 2/4.5;
    fr respondents (w = 1 each): {prix}, {livraison}, {livraison} -> price 1/3, delivery 2/3."""
    path = _write(tmp_path, "concept,language,term\nprice,de,preis\nprice,de,kosten\nprice,fr,prix\n"
                            "delivery,de,lieferung\ndelivery,fr,livraison\nsize,de,größe\n")  # fmt: skip
    g = read_glossary(path, ["de", "fr"])
    de = _rc("de", ["kosten", "lieferung", "preis"], [["preis"], ["preis", "kosten"], ["lieferung"], []], [1, 1, 2, 0.5])
    fr = _rc("fr", ["livraison", "prix"], [["prix"], ["livraison"], ["livraison"]], [1, 1, 1])
    counts = {"de": concept_counts(de, g), "fr": concept_counts(fr, g)}
    table = concept_table(counts, g).set_index("concept")
    assert table.loc["price", "share_de"] == pytest.approx(2 / 4.5)  # the synonym pair counts once
    assert table.loc["price", "n_de"] == 2
    assert table.loc["delivery", "share_de"] == pytest.approx(2 / 4.5)
    assert table.loc["price", "share_fr"] == pytest.approx(1 / 3)
    assert table.loc["delivery", "share_fr"] == pytest.approx(2 / 3)
    assert table.loc["price", "terms_de"] == "preis (2); kosten (1)"
    assert table.loc["size", "absent_de"] == "größe"
    assert table.loc["size", "share_fr"] == 0.0
    assert table.loc["delivery", "spread"] == pytest.approx(2 / 3 - 2 / 4.5)


def test_unmapped_terms(tmp_path: Path) -> None:
    """Unmapped top terms: ranked by weighted share, glossary terms skipped, their rank kept."""
    g = read_glossary(_write(tmp_path, "concept,language,term\nprice,de,preis\n"), ["de"])
    rc = _rc("de", ["app", "preis", "service"], [["preis", "app"], ["preis"], ["service", "app"], ["preis"]], [1, 1, 1, 1])
    table = unmapped_terms(rc, g, top_n=5)
    assert list(table["term"]) == ["app", "service"]
    assert list(table["rank"]) == [2, 3]
    assert list(table["share"]) == [0.5, 0.25]
    assert list(unmapped_terms(rc, None, top_n=1)["term"]) == ["preis"]
