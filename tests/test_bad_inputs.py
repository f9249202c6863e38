"""Bad inputs through the real command line: one line that says what, where and how to fix it,
the documented exit code (cli.py: 2 settings, 3 input data, 4 output folder), never a traceback,
and — where a data problem lets the run go on — a ledger entry for the row or answer it touched.

Each case below builds its hostile input in ``tmp_path`` and runs ``workbench.cli.main`` (the
function behind ``termloom``); :func:`test_no_traceback_in_a_fresh_interpreter` runs a few of them
as ``python -m workbench`` in a subprocess, so nothing imported or configured by earlier tests
(the csv module's field limit, warm caches) can hide a crash.

Count of distinct bad inputs: 37 cases in :data:`CASES` (one, a folder without write permission,
skips when run as root, which bypasses permissions) plus 45 covered by tests elsewhere and listed in
:data:`COVERED_ELSEWHERE` (their names are checked to exist) — 82 in all.
"""

from __future__ import annotations

import errno
import gzip
import os
import shutil
import subprocess
import sys
import zipfile
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

import openpyxl
import pandas as pd
import pytest
import tomli_w

from workbench.cli import main
from workbench.core import atomic
from workbench.core.manifest import verify_run
from workbench.core.profiles import profiles_root

TINY = "id,q\n1,the train was late again\n2,the coffee on the train was cold\n3,late train and cold coffee\n"
Setup = Callable[[Path, pytest.MonkeyPatch], list[str]]


def study(tmp: Path, data: str, *, text: list[str] | None = None, languages: list[str] | None = None,
          formats: list[str] | None = None, compare: dict | None = None, name: str = "t.study.toml") -> Path:
    """A small study that runs fast: one language, min_df 1, no bootstrap, CSV output only."""
    table = {
        "sources": [{"path": data}],
        "columns": {"id": "id", "text": text or ["q"]},
        "languages": {"expected": languages or ["en"]},
        "weigh": {"min_df": 1},
        "compare": {"bootstrap": 0, **(compare or {})},
        "export": {"formats": formats or ["csv"]},
    }
    path = tmp / name
    path.write_text(tomli_w.dumps(table), encoding="utf-8")
    return path


def run(tmp: Path, data: str, *extra: str, **settings: object) -> list[str]:
    return ["run", str(study(tmp, data, **settings)), "--out", str(tmp / "out"), *extra]


def raw_study(tmp: Path, body: str) -> list[str]:
    path = tmp / "raw.study.toml"
    path.write_text('[[sources]]\npath = "answers.csv"\n[columns]\ntext = ["q"]\n' + body, encoding="utf-8")
    (tmp / "answers.csv").write_text(TINY, encoding="utf-8")
    return ["run", str(path), "--out", str(tmp / "out")]


def ledger(out: Path) -> pd.DataFrame:
    return pd.read_csv(out / "ledger.csv", encoding="utf-8-sig", dtype=str, keep_default_na=False)


# --------------------------------------------------------------------------- data files


def truncated_gzip(tmp: Path, mp: pytest.MonkeyPatch) -> list[str]:
    packed = gzip.compress(TINY.encode() * 50)
    (tmp / "answers.csv.gz").write_bytes(packed[: len(packed) // 2])
    return run(tmp, "answers.csv.gz")


def _workbook(path: Path, rows: int = 60) -> None:
    book = openpyxl.Workbook()
    sheet = book.active
    sheet.append(["id", "q"])
    for number in range(1, rows + 1):
        sheet.append([number, f"the train number {number} was late again"])
    book.save(path)


def damaged_xlsx_part(tmp: Path, mp: pytest.MonkeyPatch) -> list[str]:
    """The ZIP directory is intact; 40 bytes in the middle of the deflated sheet XML are overwritten."""
    _workbook(tmp / "good.xlsx")
    with zipfile.ZipFile(tmp / "good.xlsx") as archive:
        info = archive.getinfo("xl/worksheets/sheet1.xml")
    data = bytearray((tmp / "good.xlsx").read_bytes())
    start = info.header_offset + 30 + len(info.filename.encode()) + len(info.extra)  # APPNOTE.TXT §4.3.7
    middle = start + info.compress_size // 2
    data[middle : middle + 40] = b"\xff" * 40
    (tmp / "damaged.xlsx").write_bytes(bytes(data))
    return run(tmp, "damaged.xlsx")


def xlsx_decompression_bomb(tmp: Path, mp: pytest.MonkeyPatch) -> list[str]:
    """A real bomb under the default limits: 50 MiB of zeros deflate to ~50 KB (about 1,000:1)."""
    with zipfile.ZipFile(tmp / "bomb.xlsx", "w", zipfile.ZIP_DEFLATED) as archive:
        with archive.open("xl/worksheets/sheet1.xml", "w") as member:
            for _ in range(50):
                member.write(bytes(1 << 20))
    assert (tmp / "bomb.xlsx").stat().st_size < 100_000
    return run(tmp, "bomb.xlsx")


def nul_after_first_mebibyte(tmp: Path, mp: pytest.MonkeyPatch) -> list[str]:
    """A NUL byte past the first MiB (the part sniffed for binary content) is read and cleaned away."""
    rows = ["id,q,note", "1,the train was late again," + "n" * 1_000_000, "2,the coffee was cold," + "m" * 60_000,
            "3,the train was \x00cold and late,"]
    (tmp / "answers.csv").write_text("\n".join(rows) + "\n", encoding="utf-8")
    return run(tmp, "answers.csv", formats=["csv", "parquet"])


def check_nul_after_first_mebibyte(out: Path) -> None:
    answers = pd.read_parquet(out / "corpus" / "answers.parquet").set_index("answer_id")
    assert "\x00" in answers.loc["3|q", "raw_text"]  # the raw text is kept as read
    assert answers.loc["3|q", "clean_text"] == "the train was cold and late"


def fifty_mb_single_line(tmp: Path, mp: pytest.MonkeyPatch) -> list[str]:
    (tmp / "answers.csv").write_bytes(b"x" * 50_000_000)
    return run(tmp, "answers.csv")


def fifty_mb_record(tmp: Path, mp: pytest.MonkeyPatch) -> list[str]:
    """One record of 50 MB on one line (in a column the study does not analyse): truncated and flagged."""
    with (tmp / "answers.csv").open("w", encoding="utf-8") as handle:
        handle.write("id,q,note\n1,the train was late again,")
        handle.write("n" * 50_000_000)
        handle.write("\n2,the coffee was cold,\n3,late train and cold coffee,\n")
    return run(tmp, "answers.csv")


def mixed_encodings(tmp: Path, mp: pytest.MonkeyPatch) -> list[str]:
    """UTF-8 lines with one line pasted from a Windows-1252 tool."""
    (tmp / "answers.csv").write_bytes(
        "id,q\n1,the café near the station was naïve and cold\n2,".encode()
        + "the train to Zürich was late again; a déjà vu".encode("cp1252")
        + "\n3,great crème brûlée in the dining car\n".encode()
    )
    return run(tmp, "answers.csv")


def check_mixed_encodings(out: Path) -> None:
    answers = pd.read_csv(out / "corpus" / "answers.csv", encoding="utf-8-sig").set_index("answer_id")
    assert answers["clean_text"].tolist() == [
        "the café near the station was naïve and cold", "the train to Zürich was late again; a déjà vu",
        "great crème brûlée in the dining car",
    ]


def whitespace_only_column_name(tmp: Path, mp: pytest.MonkeyPatch) -> list[str]:
    (tmp / "answers.csv").write_text("id,   ,q\n1,a,the train was late\n", encoding="utf-8")
    return run(tmp, "answers.csv", text=["   "])


def _jsonl(tmp: Path, middle: str) -> list[str]:
    lines = ['{"id": 1, "q": "the train was late again"}', middle, '{"id": 3, "q": "late train and cold coffee"}']
    (tmp / "answers.jsonl").write_text("\n".join(lines) + "\n", encoding="utf-8")
    return run(tmp, "answers.jsonl")


def jsonl_lone_surrogate(tmp: Path, mp: pytest.MonkeyPatch) -> list[str]:
    """RFC 8259 §7 lets JSON escape half a UTF-16 pair; no UTF-8 text (Arrow, Parquet) can hold it."""
    return _jsonl(tmp, '{"id": 2, "q": "the coffee \\ud800 was cold"}')


def jsonl_deep_nesting(tmp: Path, mp: pytest.MonkeyPatch) -> list[str]:
    return _jsonl(tmp, '{"id": 2, "q": ' + "[" * 100_000 + "]" * 100_000 + "}")


def jsonl_number_with_5000_digits(tmp: Path, mp: pytest.MonkeyPatch) -> list[str]:
    """Python's int() refuses more than 4,300 digits by default (CVE-2020-10735 mitigation)."""
    return _jsonl(tmp, '{"id": 2, "q": ' + "7" * 5000 + "}")


def every_text_cell_blank(tmp: Path, mp: pytest.MonkeyPatch) -> list[str]:
    (tmp / "answers.csv").write_text("id,q\n1,\n2,   \n3,\n", encoding="utf-8")
    return run(tmp, "answers.csv")


# --------------------------------------------------------------------------- study settings


def study_not_utf8(tmp: Path, mp: pytest.MonkeyPatch) -> list[str]:
    path = study(tmp, "answers.csv")
    path.write_bytes(path.read_text(encoding="utf-8").encode("utf-16"))
    return ["run", str(path)]


def study_over_5_mb(tmp: Path, mp: pytest.MonkeyPatch) -> list[str]:
    path = tmp / "big.study.toml"
    path.write_text("# " + "x" * 6_000_000 + "\n", encoding="utf-8")
    return ["run", str(path)]


def data_file_given_as_study(tmp: Path, mp: pytest.MonkeyPatch) -> list[str]:
    (tmp / "answers.csv").write_text(TINY, encoding="utf-8")
    return ["run", str(tmp / "answers.csv")]


def toml_integer_with_5000_digits(tmp: Path, mp: pytest.MonkeyPatch) -> list[str]:
    return raw_study(tmp, "[compare]\nbootstrap = " + "9" * 5000 + "\n")


def toml_dotted_key_bomb(tmp: Path, mp: pytest.MonkeyPatch) -> list[str]:
    """A 200 KB line: tomllib's time and memory grow with the square of a dotted key's parts
    (measured here: 60,000 parts took 48 s and 3.5 GB before the check was added)."""
    return raw_study(tmp, "x" + ".y" * 100_000 + " = 1\n")


def toml_deep_inline_tables(tmp: Path, mp: pytest.MonkeyPatch) -> list[str]:
    return raw_study(tmp, "[study]\nname = " + "{a = " * 300 + "1" + "}" * 300 + "\n")


def toml_megabyte_string_for_a_number(tmp: Path, mp: pytest.MonkeyPatch) -> list[str]:
    return raw_study(tmp, '[clean]\nmin_chars = "' + "9" * 1_000_000 + '"\n')


def override_number_with_5000_digits(tmp: Path, mp: pytest.MonkeyPatch) -> list[str]:
    return [*raw_study(tmp, ""), "--set", "weigh.min_df=" + "9" * 5000]


def override_key_of_100_parts(tmp: Path, mp: pytest.MonkeyPatch) -> list[str]:
    return [*raw_study(tmp, ""), "--set", "weigh" + ".x" * 99 + "=1"]


def decision_store_not_sqlite(tmp: Path, mp: pytest.MonkeyPatch) -> list[str]:
    (tmp / "answers.csv").write_text(TINY, encoding="utf-8")
    (tmp / "t.decisions.sqlite").write_bytes(b"not a database at all " * 200)
    return run(tmp, "answers.csv")


def language_without_profile(tmp: Path, mp: pytest.MonkeyPatch) -> list[str]:
    (tmp / "answers.csv").write_text(TINY, encoding="utf-8")
    return run(tmp, "answers.csv", languages=["en", "xx"])


def max_df_not_a_number(tmp: Path, mp: pytest.MonkeyPatch) -> list[str]:
    (tmp / "answers.csv").write_text(TINY, encoding="utf-8")
    return run(tmp, "answers.csv", "--set", "weigh.max_df=nan")


def check_with_megabyte_values(tmp: Path, mp: pytest.MonkeyPatch) -> list[str]:
    path = tmp / "c.study.toml"
    path.write_text(
        '[[sources]]\npath = "' + "g" * 300 + '.csv"\n[clean]\nmin_chars = "' + "9" * 1_000_000 + '"\n'
        "[weigh]\ntf = [" + "1, " * 100_000 + "1]\n",
        encoding="utf-8",
    )
    return ["check", str(path)]


# --------------------------------------------------------------------------- language profiles


def _profiles(tmp: Path, mp: pytest.MonkeyPatch, name: str, text: str) -> list[str]:
    root = tmp / "profiles"
    shutil.copytree(profiles_root() / "en", root / "en")
    (root / "en" / name).write_text(text, encoding="utf-8")
    mp.setattr("workbench.core.profiles.profiles_root", lambda: root)
    (tmp / "answers.csv").write_text(TINY, encoding="utf-8")
    return run(tmp, "answers.csv")


def profile_dotted_key_bomb(tmp: Path, mp: pytest.MonkeyPatch) -> list[str]:
    text = (profiles_root() / "en" / "profile.toml").read_text(encoding="utf-8")
    return _profiles(tmp, mp, "profile.toml", text + "x" + ".y" * 100_000 + " = 1\n")


def profile_overrides_nested_too_deep(tmp: Path, mp: pytest.MonkeyPatch) -> list[str]:
    return _profiles(tmp, mp, "lemma_overrides.toml", "[overrides]\nx = " + "[" * 3000 + "]" * 3000 + "\n")


def profile_integer_with_5000_digits(tmp: Path, mp: pytest.MonkeyPatch) -> list[str]:
    text = (profiles_root() / "en" / "profile.toml").read_text(encoding="utf-8")
    return _profiles(tmp, mp, "profile.toml", text + "size = " + "1" * 5000 + "\n")


# --------------------------------------------------------------------------- glossaries and dictionaries


def glossary_is_a_folder(tmp: Path, mp: pytest.MonkeyPatch) -> list[str]:
    (tmp / "answers.csv").write_text(TINY, encoding="utf-8")
    (tmp / "glossary.csv").mkdir()
    return run(tmp, "answers.csv", compare={"glossary": "glossary.csv"})


def glossary_cell_over_128_kib(tmp: Path, mp: pytest.MonkeyPatch) -> list[str]:
    """The csv module refuses fields over 131,072 characters by default (csv.field_size_limit)."""
    (tmp / "answers.csv").write_text(TINY, encoding="utf-8")
    (tmp / "glossary.csv").write_text("concept,language,term\ntrain,en,train\nbig,en," + "x" * 200_000 + "\n")
    return run(tmp, "answers.csv", compare={"glossary": "glossary.csv"})


def glossary_unclosed_quote(tmp: Path, mp: pytest.MonkeyPatch) -> list[str]:
    (tmp / "answers.csv").write_text(TINY, encoding="utf-8")
    (tmp / "glossary.csv").write_text('concept,language,term\n"train,en,train\ncoffee,en,coffee\n')
    return run(tmp, "answers.csv", compare={"glossary": "glossary.csv"})


def check_glossary_unclosed_quote(out: Path) -> None:
    problems = pd.read_csv(out / "compare" / "glossary_problems.csv", encoding="utf-8-sig")
    # the unclosed quote swallows the rest of the file into one record, reported (not silently lost)
    assert len(problems) == 1 and problems["problem"].iloc[0].startswith("empty cell")


def dictionary_path_is_a_folder(tmp: Path, mp: pytest.MonkeyPatch) -> list[str]:
    (tmp / "answers.csv").write_text(TINY, encoding="utf-8")
    (tmp / "freedict-eng-deu").mkdir()
    return run(tmp, "answers.csv", compare={"dictionaries": ["freedict-eng-deu"]})


# --------------------------------------------------------------------------- output folder


def output_folder_is_the_data_folder(tmp: Path, mp: pytest.MonkeyPatch) -> list[str]:
    """--out at the study's folder whose data file is corpus/answers.csv, a name the export writes."""
    (tmp / "corpus").mkdir()
    (tmp / "corpus" / "answers.csv").write_text(TINY, encoding="utf-8")
    return ["run", str(study(tmp, "corpus/answers.csv")), "--out", str(tmp)]


def check_output_folder_is_the_data_folder(out: Path) -> None:
    assert (out / "corpus" / "answers.csv").read_text(encoding="utf-8") == TINY


def output_path_too_long(tmp: Path, mp: pytest.MonkeyPatch) -> list[str]:
    """Most file systems allow 255 bytes per name (POSIX NAME_MAX on Linux) [recalled from memory]."""
    (tmp / "answers.csv").write_text(TINY, encoding="utf-8")
    return ["run", str(study(tmp, "answers.csv")), "--out", str(tmp / ("o" * 300))]


def output_rename_refused(tmp: Path, mp: pytest.MonkeyPatch) -> list[str]:
    """A complete earlier run, then a run whose every atomic rename is refused (EACCES): the message, and the
    earlier run still verifies."""
    (tmp / "answers.csv").write_text(TINY, encoding="utf-8")
    argv = ["run", str(study(tmp, "answers.csv")), "--out", str(tmp / "out")]
    assert main(["-q", *argv]) == 0

    def refuse(source: object, target: object) -> None:
        raise PermissionError(errno.EACCES, "Permission denied", str(target))

    mp.setattr(atomic.os, "replace", refuse)
    return argv


def check_output_rename_refused(out: Path) -> None:
    report = verify_run(out)
    assert report.ok and not report.extra, report.lines()


def disk_full_while_packing_xlsx(tmp: Path, mp: pytest.MonkeyPatch) -> list[str]:
    """ENOSPC (POSIX errno 28) raised where XlsxWriter writes the parts of the ZIP package."""
    (tmp / "answers.csv").write_text(TINY, encoding="utf-8")

    def full(self: zipfile.ZipFile, *args: object, **kwargs: object) -> None:
        raise OSError(errno.ENOSPC, "No space left on device")

    mp.setattr(zipfile.ZipFile, "write", full)
    return run(tmp, "answers.csv", formats=["csv", "xlsx"])


def check_disk_full_while_packing_xlsx(out: Path) -> None:
    assert not (out / "manifest.json").exists()
    assert not list(out.rglob(f"{atomic.TEMP_PREFIX}*"))
    assert not list(out.rglob("*.xlsx"))


def output_folder_not_writable(tmp: Path, mp: pytest.MonkeyPatch) -> list[str]:
    (tmp / "answers.csv").write_text(TINY, encoding="utf-8")
    (tmp / "locked").mkdir()
    (tmp / "locked").chmod(0o500)
    return ["run", str(study(tmp, "answers.csv")), "--out", str(tmp / "locked" / "out")]


# --------------------------------------------------------------------------- the table


@dataclass(frozen=True)
class Case:
    setup: Setup
    code: int
    says: tuple[str, ...]
    #: (level, key, code) events the ledger must hold when the run goes on
    ledger: tuple[tuple[str, str, str], ...] = ()
    check: Callable[[Path], None] | None = None
    root_skips: bool = False

    @property
    def name(self) -> str:
        return self.setup.__name__


CASES = [
    # data files
    Case(truncated_gzip, 3, ("answers.csv.gz looks like a gzip-compressed file", "decompress it first", "point sources.path")),
    Case(damaged_xlsx_part, 3, ("damaged.xlsx", "save it again")),
    Case(xlsx_decompression_bomb, 3, ("bomb.xlsx", "unpacks 1,0", "decompression bomb", "save the sheet as CSV")),
    Case(nul_after_first_mebibyte, 0, (), (("answer", "3|q", "read"), ("answer", "3|q", "cleaned")),
         check_nul_after_first_mebibyte),
    Case(fifty_mb_single_line, 3, ("answers.csv: the first 262,144 characters hold no line break", "point sources.path")),
    Case(fifty_mb_record, 0, (), (("row", "1", "cell_truncated"), ("answer", "1|q", "read"))),
    Case(mixed_encodings, 0, (), (("answer", "1|q", "repaired_mojibake"), ("answer", "3|q", "repaired_mojibake")),
         check_mixed_encodings),
    Case(whitespace_only_column_name, 2, ("has no column", "a name of only spaces", "column_<position>", "fix columns.text")),
    Case(jsonl_lone_surrogate, 0, (), (("row", "2", "lone_surrogate"), ("answer", "2|q", "read"))),
    Case(jsonl_deep_nesting, 0, (), (("row", "answers.jsonl:2", "bad_json"), ("answer", "3|q", "read"))),
    Case(jsonl_number_with_5000_digits, 0, (), (("row", "answers.jsonl:2", "bad_json"), ("answer", "3|q", "read"))),
    Case(every_text_cell_blank, 3, ("the sources hold no answers", "text column(s) q", "check columns.text")),
    # study settings
    Case(study_not_utf8, 2, ("t.study.toml is not UTF-8", "save it as UTF-8")),
    Case(study_over_5_mb, 2, ("big.study.toml is 6,000,003 bytes", "a study file should be a few KB")),
    Case(data_file_given_as_study, 2, ("answers.csv is a data file, not a study file", "termloom init")),
    Case(toml_integer_with_5000_digits, 2, ("raw.study.toml holds an integer with thousands of digits", "sensible value")),
    Case(toml_dotted_key_bomb, 2, ("the key on line 5 has 100,001 dotted parts", "fix that line")),
    Case(toml_deep_inline_tables, 2, ("'study.name': Input should be a valid string", "got {'a': {'a': {...}}}")),
    Case(toml_megabyte_string_for_a_number, 2, ("'clean.min_chars'", "got '999")),
    Case(override_number_with_5000_digits, 2, ("override 'weigh.min_df' has a number with 5,000 digits", "sensible value")),
    Case(override_key_of_100_parts, 2, ("has 100 parts", "study keys have at most three")),
    Case(decision_store_not_sqlite, 2, ("decision store", "t.decisions.sqlite cannot be opened", "move the file aside")),
    Case(language_without_profile, 2, ("no language profile for 'xx'", "supported languages: ", "add a profile folder")),
    Case(max_df_not_a_number, 2, ("weigh.max_df = nan", "must lie in [0, 1]", "write a whole number")),
    Case(check_with_megabyte_values, 2, ("'clean.min_chars'", "got '9999", "'weigh.tf'", "got [1, 1,")),
    # language profiles
    Case(profile_dotted_key_bomb, 2, ("profile.toml: the key on line", "100,001 dotted parts", "fix that line")),
    Case(profile_overrides_nested_too_deep, 2, ("lemma_overrides.toml: tables or lists nest too deeply",)),
    Case(profile_integer_with_5000_digits, 2, ("profile.toml: an integer has thousands of digits", "fix the value")),
    # glossaries and dictionaries
    Case(glossary_is_a_folder, 3, ("glossary", "glossary.csv cannot be read", "check the path")),
    Case(glossary_cell_over_128_kib, 3, ("glossary", "line 3 has a cell of 200,000 characters", "fix that line")),
    Case(glossary_unclosed_quote, 0, (), (("answer", "1|q", "read"),), check_glossary_unclosed_quote),
    Case(dictionary_path_is_a_folder, 3, ("dictionary index", "freedict-eng-deu.index not found", "fix compare.dictionaries")),
    # output folder
    Case(output_folder_is_the_data_folder, 4, ("would overwrite", "(sources[1].path), an input of this study",
                                               "choose an output folder"), check=check_output_folder_is_the_data_folder),
    Case(output_path_too_long, 4, ("is too long for this file system", "choose a shorter output folder")),
    Case(output_rename_refused, 4, ("no permission to write", "choose an output folder you can write to"),
         check=check_output_rename_refused),
    Case(disk_full_while_packing_xlsx, 4, ("the disk is full while writing", ".xlsx", "free some space"),
         check=check_disk_full_while_packing_xlsx),
    Case(output_folder_not_writable, 4, ("no permission to write", "locked"), root_skips=True),
]


@pytest.mark.parametrize("case", CASES, ids=lambda case: case.name)
def test_bad_input(case: Case, tmp_path: Path, monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]) -> None:
    if case.root_skips and os.name == "posix" and os.geteuid() == 0:
        pytest.skip("running as root, which bypasses file permissions; test_export.py simulates EACCES instead")
    argv = case.setup(tmp_path, monkeypatch)
    capsys.readouterr()
    code = main(["-q", *argv])
    out, err = capsys.readouterr()
    assert "Traceback" not in out + err
    assert code == case.code, err
    out_dir = Path(argv[argv.index("--out") + 1]) if "--out" in argv else tmp_path / "out"
    if case.code:
        lines = err.splitlines()
        if argv[0] == "check":  # every problem on its own line, then the count
            assert lines[-1].endswith("problem(s) in " + argv[1]) and len(lines) == 3, lines
            assert all(len(line) < 400 for line in lines)
        else:
            assert len(lines) == 1 and lines[0].startswith("termloom: error: "), err
            assert len(lines[0]) < 600, "a one-line message a person can read"
        for fragment in case.says:
            assert fragment in err, f"{fragment!r} not in {err!r}"
    else:
        assert err == ""
        events = ledger(out_dir)
        for level, key, code_ in case.ledger:
            found = events[(events.level == level) & (events.key == key) & (events.code == code_)]
            assert len(found) == 1, f"no {level} event {code_} for {key}"
        answers = pd.read_csv(out_dir / "corpus" / "answers.csv", encoding="utf-8-sig", dtype=str)
        respondents = pd.read_csv(out_dir / "corpus" / "respondents.csv", encoding="utf-8-sig", dtype=str)
        assert set(answers["answer_id"]) <= set(events.loc[events.level == "answer", "key"])
        assert set(respondents["respondent_id"]) <= set(events.loc[events.level == "row", "key"])
    if case.check is not None:
        case.check(out_dir)


FRESH = ["fifty_mb_single_line", "toml_dotted_key_bomb", "truncated_gzip"]


@pytest.mark.parametrize("name", FRESH)
def test_no_traceback_in_a_fresh_interpreter(name: str, tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """The same inputs through ``python -m workbench``: the exit code, one stderr line, no traceback."""
    case = next(c for c in CASES if c.name == name)
    argv = case.setup(tmp_path, monkeypatch)
    env = {**os.environ, "NO_COLOR": "1"}
    result = subprocess.run([sys.executable, "-m", "workbench", "-q", *argv], capture_output=True, text=True, env=env)
    assert "Traceback" not in result.stdout + result.stderr
    assert result.returncode == case.code
    assert len(result.stderr.splitlines()) == 1 and all(f in result.stderr for f in case.says), result.stderr


#: Bad inputs tested elsewhere, counted toward the suite: (test file, test name, the bad input).
COVERED_ELSEWHERE: tuple[tuple[str, str, str], ...] = (
    ("test_ingest_bad_input.py", "test_missing_file", "data file missing"),
    ("test_ingest_bad_input.py", "test_empty_file", "data file of 0 bytes"),
    ("test_ingest_bad_input.py", "test_file_of_blank_lines", "data file of blank lines"),
    ("test_ingest_bad_input.py", "test_header_only", "header without rows"),
    ("test_ingest_bad_input.py", "test_missing_text_column_lists_columns_and_suggests_the_nearest", "text column missing"),
    ("test_ingest_bad_input.py", "test_missing_id_column_suggests_a_case_variant", "id column in another case"),
    ("test_ingest_bad_input.py", "test_file_without_header_row_is_named_as_such", "no header row"),
    ("test_ingest_bad_input.py", "test_study_without_text_column", "study names no text column"),
    ("test_ingest_bad_input.py", "test_column_in_two_roles", "one column in two roles"),
    ("test_ingest_bad_input.py", "test_repeated_column_name_the_study_uses", "duplicate column names"),
    ("test_ingest_bad_input.py", "test_binary_file_given_as_csv", "PNG, PDF, ZIP given as CSV; a CSV with a NUL byte"),
    ("test_ingest_bad_input.py", "test_undecodable_bytes_with_the_study_encoding", "bytes invalid in the set encoding"),
    ("test_ingest_bad_input.py", "test_undecodable_bytes_when_guessing", "bytes no encoding reads"),
    ("test_ingest_bad_input.py", "test_unknown_encoding_name", "unknown encoding name"),
    ("test_ingest_bad_input.py", "test_folder_given_as_csv", "a study with a path to a folder"),
    ("test_ingest_bad_input.py", "test_file_given_as_txt_folder", "a file given as a .txt folder"),
    ("test_ingest_bad_input.py", "test_txt_folder_without_files", "a folder without .txt files"),
    ("test_ingest_bad_input.py", "test_unreadable_file_message_also_under_root", "data file without read permission"),
    ("test_ingest_bad_input.py", "test_study_pointing_at_itself", "a study pointing at itself as data"),
    ("test_ingest_bad_input.py", "test_two_sources_with_one_label", "two sources with one label"),
    ("test_ingest_bad_input.py", "test_xlsx_empty_sheet", "empty sheet"),
    ("test_ingest_bad_input.py", "test_xlsx_unknown_sheet_name_and_index", "unknown sheet"),
    ("test_ingest_bad_input.py", "test_xlsx_truncated", "truncated xlsx"),
    ("test_ingest_bad_input.py", "test_old_xls_workbook", "old .xls workbook"),
    ("test_ingest_bad_input.py", "test_jsonl_with_one_broken_line_reads_the_rest", "broken JSON line"),
    ("test_ingest_bad_input.py", "test_jsonl_where_no_line_is_an_object", "JSON Lines without objects"),
    ("test_ingest_bad_input.py", "test_parquet_text_column_that_is_not_text", "Parquet text column of numbers"),
    ("test_ingest_bad_input.py", "test_damaged_parquet", "truncated Parquet"),
    ("test_ingest.py", "test_blank_and_repeated_unused_column_names_are_repaired", "whitespace-only column names"),
    ("test_ingest.py", "test_ragged_records_are_fitted_to_the_header", "ragged rows"),
    ("test_ingest.py", "test_unclosed_quote_is_flagged", "a quote that never closes"),
    ("test_ingest.py", "test_duplicate_and_missing_ids_are_flagged_and_made_unique", "duplicate and blank ids"),
    ("test_ingest_formats.py", "test_binary_file_in_txt_folder_is_dropped_with_a_reason", "binary file in a .txt folder"),
    ("test_settings.py", "test_huge_integer_and_deep_nesting_are_refused", "TOML tricks: huge integers, deep nesting"),
    ("test_settings.py", "test_study_path_that_is_a_folder", "a study path that is a folder"),
    ("test_settings.py", "test_unknown_key_suggests_the_nearest", "unknown study key"),
    ("test_settings.py", "test_toml_syntax_error_names_line_and_column", "TOML syntax error"),
    ("test_profiles.py", "test_toml_syntax_error_names_file_and_line", "profile TOML syntax error"),
    ("test_profiles.py", "test_word_list_not_utf8_names_the_line", "profile word list not UTF-8"),
    ("test_glossary.py", "test_unusable_files_raise", "empty glossary; glossary without its columns"),
    ("test_glossary.py", "test_missing_and_non_utf8", "glossary missing or not UTF-8"),
    ("test_dictd.py", "test_corrupt_chunk_and_truncated_gzip", "truncated gzip dictionary"),
    ("test_dictd.py", "test_malformed_index_lines", "malformed dictionary index"),
    ("test_export.py", "test_output_folder_that_is_a_file", "an output folder that is a file"),
    ("test_export.py", "test_disk_full_mid_export_leaves_old_files_and_no_temps", "disk full during export"),
)


def test_cases_covered_elsewhere_exist() -> None:
    """The references above stay true: each named test is defined in its file."""
    here = Path(__file__).parent
    for file, name, _what in COVERED_ELSEWHERE:
        assert f"def {name}(" in (here / file).read_text(encoding="utf-8"), f"{file}::{name} is gone"
    assert (len(CASES), len(COVERED_ELSEWHERE)) == (37, 45)  # the counts the module docstring states
