"""Ingest of delimited files: encodings, delimiters, quoting, ids, copied values and the ledger."""

from __future__ import annotations

import threading
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from workbench.core import ingest as ingest_module
from workbench.core.corpus import ANSWER_ID, HINT, QUESTION, RAW_TEXT, RESPONDENT_ID, ROW, SOURCE, WEIGHT
from workbench.core.errors import Cancelled
from workbench.core.ingest import MAX_CELL_CHARS, read_corpus
from workbench.core.ledger import Ledger
from workbench.core.progress import Reporter
from workbench.core.readers.delimited import sniff_delimiter
from workbench.core.settings import study_from_dict


def make_study(tmp_path: Path, sources: list[dict] | str, **columns):
    if isinstance(sources, str):
        sources = [{"path": sources}]
    return study_from_dict({"sources": sources, "columns": columns}, base_dir=tmp_path)


def run(study, chunk_rows: int = 100_000):
    ledger = Ledger()
    corpus = read_corpus(study, ledger, Reporter(), chunk_rows=chunk_rows)
    return corpus, ledger


def events(ledger: Ledger, level: str | None = None, code: str | None = None) -> pd.DataFrame:
    frame = ledger.frame()
    if level:
        frame = frame[frame.level == level]
    if code:
        frame = frame[frame.code == code]
    return frame


def assert_accounted(corpus, ledger: Ledger) -> None:
    """The ledger invariant of issue 2: rows in = rows accounted for, answers in = answers accounted for."""
    rows_in = sum(report.rows for report in corpus.reports)
    assert len(ledger.accounted("row")) == rows_in
    assert ledger.accounted("answer") == set(corpus.answers[ANSWER_ID])
    assert corpus.answers[ANSWER_ID].is_unique
    assert corpus.respondents[RESPONDENT_ID].is_unique


# --------------------------------------------------------------------------- quoting (RFC 4180)


def test_rfc4180_quoting_examples(tmp_path):
    """RFC 4180 §2 rules 1, 2, 5, 6 and 7, with the RFC's own example fields [recalled from memory]:
    CRLF line ends, a last record without a line break, a quoted field holding CRLF
    (``"b CRLF bb"``), and a doubled quote inside a quoted field (``"b""bb"`` is ``b"bb``)."""
    data = b'id,text,other\r\n1,"aaa","b\r\nbb"\r\n2,"b""bb","ccc"\r\n3,zzz,"x, y"'
    (tmp_path / "rfc.csv").write_bytes(data)
    corpus, ledger = run(make_study(tmp_path, "rfc.csv", id="id", text=["text", "other"]))
    texts = dict(zip(corpus.answers[ANSWER_ID], corpus.answers[RAW_TEXT]))
    assert texts == {
        "1|text": "aaa",
        "1|other": "b\r\nbb",
        "2|text": 'b"bb',
        "2|other": "ccc",
        "3|text": "zzz",
        "3|other": "x, y",
    }
    assert corpus.reports[0].rows == 3
    assert_accounted(corpus, ledger)


@pytest.mark.parametrize(
    ("data", "question"),
    [
        (b'id,"open\nanswer",g\n1,"first\nline",a\n2,second,b\n', "open\nanswer"),  # line break in a quoted header
        (b"id,open answer,g\r1,first,a\r2,second,b\r", "open answer"),  # CR-only line ends (classic Mac OS)
        (b"\n  \nid,open answer,g\n\n1,first,a\n2,second,b", "open answer"),  # blank lines first, no final break
    ],
)
def test_header_and_line_end_variants(tmp_path, data, question):
    (tmp_path / "v.csv").write_bytes(data)
    corpus, ledger = run(make_study(tmp_path, "v.csv", id="id", groups=["g"], text=[question]))
    assert corpus.reports[0].columns == ["id", question, "g"]
    assert corpus.respondents[RESPONDENT_ID].tolist() == ["1", "2"]
    assert corpus.respondents["g"].tolist() == ["a", "b"]
    assert corpus.answers[RAW_TEXT].tolist()[1] == "second"
    assert_accounted(corpus, ledger)


def test_answers_are_in_input_order_record_then_question(tmp_path):
    (tmp_path / "a.csv").write_text("id,q1,q2\n1,a,b\n2,,c\n3,d,\n", encoding="utf-8")
    corpus, _ = run(make_study(tmp_path, "a.csv", id="id", text=["q1", "q2"]), chunk_rows=2)
    assert corpus.answers[ANSWER_ID].tolist() == ["1|q1", "1|q2", "2|q2", "3|q1"]
    assert corpus.answers[QUESTION].tolist() == ["q1", "q2", "q2", "q1"]
    assert corpus.answers[ROW].tolist() == [1, 1, 2, 3]


def test_missing_markers_typed_by_respondents_are_answers(tmp_path):
    """pandas treats NA, None, null, N/A, NaN as missing by default; a respondent who typed them answered."""
    (tmp_path / "a.csv").write_text("id,q\n1,NA\n2,None\n3,null\n4,N/A\n5,NaN\n6,\n7,#N/A\n", encoding="utf-8")
    corpus, _ = run(make_study(tmp_path, "a.csv", id="id", text=["q"]))
    assert corpus.answers[RAW_TEXT].tolist() == ["NA", "None", "null", "N/A", "NaN", "#N/A"]
    assert len(corpus.respondents) == 7


# --------------------------------------------------------------------------- encodings


@pytest.mark.parametrize(
    ("bom", "codec"),
    [
        (b"\xef\xbb\xbf", "utf-8"),
        (b"\xff\xfe", "utf-16-le"),
        (b"\xfe\xff", "utf-16-be"),
    ],
)
def test_byte_order_marks_are_detected_and_removed(tmp_path, bom, codec):
    """BOM byte sequences from the Unicode Standard (ch. 2, Table 2-4 "The Seven Unicode
    Encoding Schemes" and §23.8) [recalled from memory]: UTF-8 EF BB BF, UTF-16LE FF FE, UTF-16BE FE FF."""
    text = "id,q\r\n1,Grüße aus Łódź — ça va?\r\n2,東京\r\n"
    (tmp_path / "bom.csv").write_bytes(bom + text.encode(codec))
    corpus, _ = run(make_study(tmp_path, "bom.csv", id="id", text=["q"]))
    assert list(corpus.respondents.columns[:4]) == [RESPONDENT_ID, SOURCE, ROW, "id"]  # no U+FEFF glued to 'id'
    assert corpus.answers[RAW_TEXT].tolist() == ["Grüße aus Łódź — ça va?", "東京"]
    assert any("byte-order mark removed" in note for note in corpus.reports[0].notes)


def test_windows_1252_falls_back_with_a_warning(tmp_path):
    """windows-1252 (WHATWG Encoding Standard, index-windows-1252) [recalled from memory]:
    0xE9 = é, 0xE8 = è, 0x80 = €, 0xE0 = à. Neither byte sequence is valid UTF-8."""
    data = b"id;text\r\n1;Le caf\xe9 \xe9tait tr\xe8s bon, 5 \x80 seulement\r\n2;\xc0 revoir, d\xe9\xe7u du service \xe0 bord\r\n"
    (tmp_path / "fr.csv").write_bytes(data)
    corpus, _ = run(make_study(tmp_path, "fr.csv", id="id", text=["text"]))
    assert corpus.answers[RAW_TEXT].tolist() == [
        "Le café était très bon, 5 € seulement",
        "À revoir, déçu du service à bord",
    ]
    report = corpus.reports[0]
    assert report.encoding == "cp1252"
    assert any(note.startswith("warning: not UTF-8") and "sources.encoding" in note for note in report.notes)


@pytest.mark.parametrize(
    ("codec", "text"),
    [
        ("cp1250", "Pociąg był spóźniony o godzinę, ale obsługa była miła. Łóżko było niewygodne i zimne."),
        ("cp1251", "Поезд опоздал на час, но персонал был вежлив. Кровать была удобной, завтрак холодным."),
        ("cp1253", "Το τρένο άργησε μία ώρα αλλά το προσωπικό ήταν ευγενικό. Το κρεβάτι ήταν άνετο."),
    ],
)
def test_central_european_cyrillic_greek_code_pages_are_guessed(tmp_path, codec, text):
    """Legacy Windows code pages, encoded with Python's codec tables; charset-normalizer must not
    turn them into cp1252 mojibake."""
    (tmp_path / "legacy.csv").write_bytes(f'id,q\n1,"{text}"\n2,"{text[::-1]}"\n'.encode(codec))
    corpus, _ = run(make_study(tmp_path, "legacy.csv", id="id", text=["q"]))
    assert corpus.reports[0].encoding == codec
    assert corpus.answers[RAW_TEXT].tolist() == [text, text[::-1]]


def test_study_encoding_overrides_the_guess(tmp_path):
    """Byte 0xE8 is è in windows-1252 but č in windows-1250 (both per the WHATWG index) [recalled from memory]."""
    (tmp_path / "a.csv").write_bytes(b"id,q\n1,tr\xe8s\n")
    study = make_study(tmp_path, [{"path": "a.csv", "encoding": "cp1250"}], id="id", text=["q"])
    corpus, _ = run(study)
    assert corpus.answers[RAW_TEXT].tolist() == ["trčs"]
    assert corpus.reports[0].encoding == "cp1250"


# --------------------------------------------------------------------------- delimiters


@pytest.mark.parametrize("delimiter", [",", ";", "\t", "|"])
def test_delimiter_is_sniffed(tmp_path, delimiter):
    rows = [["id", "answer", "country"]] + [[str(i), f'"Nice, quiet; fast | {i}"', "DE"] for i in range(1, 30)]
    (tmp_path / "d.csv").write_text("\n".join(delimiter.join(r) for r in rows) + "\n", encoding="utf-8")
    corpus, _ = run(make_study(tmp_path, "d.csv", id="id", text=["answer"], groups=["country"]))
    assert corpus.reports[0].delimiter == delimiter
    assert corpus.answers[RAW_TEXT].iloc[0] == "Nice, quiet; fast | 1"


def test_sniffer_fallback_counts_fields_consistently():
    """When csv.Sniffer errs or is unsure, the delimiter that splits every record alike wins."""
    sample = "a;b;c\n1;x, y, z;3\n2;p, q;4\n"
    assert sniff_delimiter(sample)[0] == ";"
    assert sniff_delimiter("just one column\nanother line\n")[0] == ","


def test_study_delimiter_and_tsv_format(tmp_path):
    (tmp_path / "a.txt").write_text("id|q\n1|a,b\n", encoding="utf-8")
    corpus, _ = run(make_study(tmp_path, [{"path": "a.txt", "delimiter": "|"}], id="id", text=["q"]))
    assert corpus.answers[RAW_TEXT].tolist() == ["a,b"]
    (tmp_path / "b.tsv").write_text("id\tq\n1\ta;b,c\n", encoding="utf-8")
    corpus, _ = run(make_study(tmp_path, "b.tsv", id="id", text=["q"]))
    assert corpus.reports[0].delimiter == "\t"
    assert corpus.answers[RAW_TEXT].tolist() == ["a;b,c"]


def test_sep_line_names_the_delimiter(tmp_path):
    (tmp_path / "a.csv").write_text("sep=;\nid;q\n1;a, b\n", encoding="utf-8")
    corpus, _ = run(make_study(tmp_path, "a.csv", id="id", text=["q"]))
    assert corpus.reports[0].delimiter == ";"
    assert corpus.answers[RAW_TEXT].tolist() == ["a, b"]


# --------------------------------------------------------------------------- wide files, ids


def test_wide_file_gives_one_answer_per_non_empty_cell(tmp_path):
    (tmp_path / "w.csv").write_text("id,q1,q2,q3\n1,a,,c\n2,  ,\t,\n3,d,e,f\n", encoding="utf-8")
    corpus, ledger = run(make_study(tmp_path, "w.csv", id="id", text=["q1", "q2", "q3"]))
    assert corpus.answers[ANSWER_ID].tolist() == ["1|q1", "1|q3", "3|q1", "3|q2", "3|q3"]
    assert len(corpus.respondents) == 3
    assert "q1" not in corpus.respondents.columns  # the text lives in answers.raw_text
    assert "4 empty text cells (not answers)" in corpus.reports[0].notes
    no_text = events(ledger, "row", "no_text")
    assert no_text.key.tolist() == ["2"]
    assert no_text.status.tolist() == ["kept"]
    assert_accounted(corpus, ledger)


def test_duplicate_and_missing_ids_are_flagged_and_made_unique(tmp_path):
    (tmp_path / "a.csv").write_text("id,q\n7,a\n8,b\n7,c\n 7 ,d\n,e\n7#2,f\n", encoding="utf-8")
    corpus, ledger = run(make_study(tmp_path, "a.csv", id="id", text=["q"]))
    assert corpus.respondents[RESPONDENT_ID].tolist() == ["7", "8", "7#3", "7#4", "row-5", "7#2"]
    dup = events(ledger, "row", "duplicate_id")
    assert dup.key.tolist() == ["7#3", "7#4"]
    assert set(dup.status) == {"flagged"}
    assert "already used by record 1 of a.csv" in dup.message.iloc[0] and "'7#3'" in dup.message.iloc[0]
    missing = events(ledger, "row", "missing_id")
    assert missing.key.tolist() == ["row-5"] and "record 5" in missing.message.iloc[0]
    notes = corpus.reports[0].notes
    assert any(n.startswith("1 records had no id") for n in notes)
    assert any(n.startswith("2 records repeat an id used before") for n in notes)
    assert_accounted(corpus, ledger)


def test_without_id_column_the_record_number_is_the_id(tmp_path):
    (tmp_path / "a.csv").write_text("q\nfirst\nsecond\n", encoding="utf-8")
    corpus, _ = run(make_study(tmp_path, "a.csv", text=["q"]))
    assert corpus.answers[ANSWER_ID].tolist() == ["1|q", "2|q"]


def test_weight_hint_and_groups_are_copied_onto_answers(tmp_path):
    (tmp_path / "a.csv").write_text(
        "id;q;country;wt;lang\n1;a; DE ;1,25;EN\n2;b;;abc;\n3;c;FR;;fr\n4;d;FR;0.5;de-CH\n", encoding="utf-8"
    )
    study = make_study(tmp_path, "a.csv", id="id", text=["q"], groups=["country"], weight="wt", language_hint="lang")
    corpus, ledger = run(study)
    answers = corpus.answers
    np.testing.assert_array_equal(answers[WEIGHT].to_numpy(), [1.25, np.nan, np.nan, 0.5])
    assert answers[HINT].tolist()[0] == "en" and answers[HINT].tolist()[3] == "de-ch"
    assert answers[HINT].isna().tolist() == [False, True, False, False]
    assert answers["group:country"].tolist()[0] == "DE" and answers["group:country"].isna().tolist()[1]
    bad = events(ledger, "row", "bad_weight")
    assert bad.key.tolist() == ["2", "3"]
    assert "'abc' is not a number" in bad.message.iloc[0] and "is blank" in bad.message.iloc[1]
    assert "1 weights written with a decimal comma were read as decimals" in corpus.reports[0].notes


def test_without_weight_column_every_weight_is_one(tmp_path):
    (tmp_path / "a.csv").write_text("id,q\n1,a\n2,b\n", encoding="utf-8")
    corpus, _ = run(make_study(tmp_path, "a.csv", id="id", text=["q"]))
    assert corpus.answers[WEIGHT].tolist() == [1.0, 1.0]
    assert corpus.answers[HINT].isna().all()


def test_original_columns_that_clash_with_ours_are_renamed(tmp_path):
    (tmp_path / "a.csv").write_text("id,q,source,row\n1,a,web,9\n", encoding="utf-8")
    corpus, _ = run(make_study(tmp_path, "a.csv", id="id", text=["q"]))
    assert corpus.respondents.columns.tolist() == [RESPONDENT_ID, SOURCE, ROW, "id", "column:source", "column:row"]
    assert corpus.respondents[SOURCE].tolist() == ["a.csv"]


def test_blank_and_repeated_unused_column_names_are_repaired(tmp_path):
    """R's write.csv leaves the row-name column without a name; ingest names it rather than refusing."""
    (tmp_path / "a.csv").write_text('"",id,q,x,x\n"1",1,a,u,v\n', encoding="utf-8")
    corpus, _ = run(make_study(tmp_path, "a.csv", id="id", text=["q"]))
    assert corpus.reports[0].columns == ["column_1", "id", "q", "x", "x (2)"]
    assert corpus.respondents["x (2)"].tolist() == ["v"]


# --------------------------------------------------------------------------- ragged, long cells, chunks


def test_ragged_records_are_fitted_to_the_header(tmp_path):
    """Decision: too many fields -> row kept with the header's fields, flagged ``ragged_row`` when the
    extras hold text (a trailing delimiter is silent); too few -> missing cells are empty."""
    (tmp_path / "r.csv").write_text("id,q,g\n1,a,x\n2,b,y,EXTRA,more\n3,c\n4,d,z,\n5,e,w\n", encoding="utf-8")
    corpus, ledger = run(make_study(tmp_path, "r.csv", id="id", text=["q"], groups=["g"]))
    assert corpus.respondents[RESPONDENT_ID].tolist() == ["1", "2", "3", "4", "5"]
    assert corpus.respondents["g"].tolist() == ["x", "y", "", "z", "w"]
    ragged = events(ledger, "row", "ragged_row")
    assert ragged.key.tolist() == ["2"]
    assert "has 5 fields but the header has 3" in ragged.message.iloc[0] and "EXTRA,more" in ragged.message.iloc[0]
    assert "1 records had more fields than the header" in corpus.reports[0].notes[-1] or any(
        "more fields than the header" in n for n in corpus.reports[0].notes
    )
    assert_accounted(corpus, ledger)


def spy_on_fallback(monkeypatch) -> list[int]:
    """Record where the csv-module fallback starts (0 = from the first record)."""
    from workbench.core.readers import delimited

    starts: list[int] = []
    real = delimited._tolerant_chunks

    def spy(*args):
        starts.append(args[-1])
        return real(*args)

    monkeypatch.setattr(delimited, "_tolerant_chunks", spy)
    monkeypatch.setattr(delimited, "MIN_BLOCK", 64)  # many small parser blocks
    return starts


def test_ragged_record_after_several_chunks_loses_and_repeats_nothing(tmp_path, monkeypatch):
    starts = spy_on_fallback(monkeypatch)
    lines = ["id,q"] + [f"{i},answer {i}" for i in range(1, 40)]
    lines[33] += ",surplus"
    lines.insert(10, "   ")  # whitespace-only line: no record
    (tmp_path / "r.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    corpus, ledger = run(make_study(tmp_path, "r.csv", id="id", text=["q"]), chunk_rows=5)
    assert len(starts) == 1 and 5 <= starts[0] < 33  # resumed mid-file
    assert corpus.respondents[RESPONDENT_ID].tolist() == [str(i) for i in range(1, 40)]
    assert corpus.respondents[ROW].tolist() == list(range(1, 40))
    assert events(ledger, "row", "ragged_row").key.tolist() == ["33"]
    assert_accounted(corpus, ledger)


def test_chunked_reading_gives_the_same_tables(tmp_path):
    rng = np.random.default_rng(5)
    frame = pd.DataFrame({
        "id": [f"r{i}" for i in range(57)],
        "q1": [("x y " * int(k)).strip() for k in rng.integers(0, 3, 57)],
        "q2": [f'he said "hi"\nline {i}' if i % 4 else "" for i in range(57)],
        "w": rng.uniform(0.5, 2, 57).round(3).astype(str),
    })
    frame.to_csv(tmp_path / "c.csv", index=False)
    study = make_study(tmp_path, "c.csv", id="id", text=["q1", "q2"], weight="w")
    whole, ledger_whole = run(study)
    pieces, ledger_pieces = run(study, chunk_rows=4)
    pd.testing.assert_frame_equal(whole.answers, pieces.answers)
    pd.testing.assert_frame_equal(whole.respondents, pieces.respondents)
    assert ledger_whole.events == ledger_pieces.events


def test_cell_over_one_megabyte_is_truncated_and_flagged(tmp_path):
    """Decision: cells over MAX_CELL_CHARS (1,000,000 characters) keep their first 1,000,000 characters."""
    big = "word " * 220_000  # 1.1 MB
    (tmp_path / "big.csv").write_text(f'id,q,g\n1,"{big}",{big}\n2,short,x\n', encoding="utf-8")
    corpus, ledger = run(make_study(tmp_path, "big.csv", id="id", text=["q"], groups=["g"]))
    assert corpus.answers[RAW_TEXT].str.len().tolist() == [MAX_CELL_CHARS, 5]
    cut = events(ledger, "answer", "cell_truncated")
    assert cut.key.tolist() == ["1|q"] and "1,100,000 characters" in cut.message.iloc[0]
    assert events(ledger, "row", "cell_truncated").key.tolist() == ["1"]
    assert any("2 cells over 1,000,000 characters were truncated" in n for n in corpus.reports[0].notes)


def test_record_longer_than_a_parser_block_switches_parser_without_loss(tmp_path, monkeypatch):
    """pyarrow's streaming reader cannot parse a record longer than its block; reading goes on with
    the csv module from the next unread record."""
    starts = spy_on_fallback(monkeypatch)
    lines = ["id,q"] + [f"{i},short {i}" for i in range(1, 30)]
    lines[20] = f'20,"{"long text, " * 600}"'
    (tmp_path / "l.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    corpus, ledger = run(make_study(tmp_path, "l.csv", id="id", text=["q"]), chunk_rows=3)
    assert corpus.respondents[RESPONDENT_ID].tolist() == [str(i) for i in range(1, 30)]
    assert corpus.answers[RAW_TEXT].str.len().tolist()[19] == len("long text, " * 600)
    assert len(starts) == 1 and 0 < starts[0] < 20
    assert_accounted(corpus, ledger)


def test_unclosed_quote_is_flagged(tmp_path):
    (tmp_path / "q.csv").write_text('id,q,g\n1,fine,a\n2,"oops,b\n3,lost,c\n4,lost too,d\n', encoding="utf-8")
    corpus, ledger = run(make_study(tmp_path, "q.csv", id="id", text=["q"]))
    flagged = events(ledger, "row", "unclosed_quote")
    assert flagged.key.tolist() == ["2"]
    assert "never to close" in flagged.message.iloc[0]
    assert any(n.startswith("warning: the last record's text runs to the end") for n in corpus.reports[0].notes)


# --------------------------------------------------------------------------- sources, progress


def test_several_sources_are_concatenated(tmp_path):
    (tmp_path / "w1.csv").write_text("id,q,wave\n1,a,1\n2,b,1\n", encoding="utf-8")
    (tmp_path / "w2.csv").write_text("wave;id;q;extra\n2;2;c;z\n2;3;d;z\n", encoding="utf-8")
    study = make_study(tmp_path, [{"path": "w1.csv"}, {"path": "w2.csv", "label": "wave 2"}], id="id", text=["q"], groups=["wave"])
    corpus, ledger = run(study)
    assert corpus.respondents[RESPONDENT_ID].tolist() == ["1", "2", "2#2", "3"]
    assert corpus.respondents[SOURCE].tolist() == ["w1.csv", "w1.csv", "wave 2", "wave 2"]
    assert corpus.respondents["extra"].isna().tolist() == [True, True, False, False]
    assert [r.delimiter for r in corpus.reports] == [",", ";"]
    assert "of w1.csv" in events(ledger, "row", "duplicate_id").message.iloc[0]
    assert_accounted(corpus, ledger)


def test_several_sources_without_id_prefix_the_label(tmp_path):
    (tmp_path / "a.csv").write_text("q\nx\n", encoding="utf-8")
    (tmp_path / "b.csv").write_text("q\ny\n", encoding="utf-8")
    corpus, _ = run(make_study(tmp_path, [{"path": "a.csv"}, {"path": "b.csv"}], text=["q"]))
    assert corpus.answers[ANSWER_ID].tolist() == ["a.csv:1|q", "b.csv:1|q"]


def test_progress_is_reported_and_cancel_stops(tmp_path):
    (tmp_path / "a.csv").write_text("id,q\n" + "".join(f"{i},x\n" for i in range(50)), encoding="utf-8")
    study = make_study(tmp_path, "a.csv", id="id", text=["q"])
    seen = []
    read_corpus(study, Ledger(), Reporter(callback=lambda *a: seen.append(a)), chunk_rows=10)
    assert seen[0][0] == "ingest" and seen[-1][1] == seen[-1][2] == 50
    cancel = threading.Event()
    cancel.set()
    with pytest.raises(Cancelled):
        read_corpus(study, Ledger(), Reporter(cancel=cancel), chunk_rows=10)


def test_ledger_invariant_over_a_messy_file(tmp_path, monkeypatch):
    monkeypatch.setattr(ingest_module, "MAX_CELL_CHARS", 30)
    lines = ["id,q1,q2,w"]
    for i in range(1, 120):
        ident = "" if i % 17 == 0 else str(i % 50)
        q1 = "" if i % 3 == 0 else f"answer {i} " * (1 + i % 5)
        q2 = "  " if i % 4 == 0 else f"other {i}"
        w = "x" if i % 11 == 0 else f"{1 + i % 3},5"
        extra = ",spill" if i % 29 == 0 else ""
        lines.append(f'{ident},"{q1}",{q2},"{w}"{extra}')
    (tmp_path / "m.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    corpus, ledger = run(make_study(tmp_path, "m.csv", id="id", text=["q1", "q2"], weight="w"), chunk_rows=13)
    assert_accounted(corpus, ledger)
    assert corpus.reports[0].rows == 119
    cells = 119 * 2 - sum(1 for i in range(1, 120) if i % 3 == 0) - sum(1 for i in range(1, 120) if i % 4 == 0)
    assert len(corpus.answers) == cells
    counts = ledger.frame().groupby(["level", "code"]).size().to_dict()
    assert counts[("row", "missing_id")] == 7 and counts[("row", "ragged_row")] == 4
    assert counts[("answer", "cell_truncated")] > 0
