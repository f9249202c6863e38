"""The study file: strict validation, suggestions, precedence and path resolution."""

from __future__ import annotations

from pathlib import Path

import pytest

from workbench.core.errors import SettingsError
from workbench.core.settings import apply_overrides, check_study, load_study, parse_override

MINIMAL = """
[study]
name = "t"

[[sources]]
path = "answers.csv"

[columns]
id = "rid"
text = ["q1"]

[languages]
expected = ["en", "de"]
"""


def write(tmp_path: Path, text: str) -> Path:
    (tmp_path / "answers.csv").write_text("rid,q1\n1,hello there\n", encoding="utf-8")
    path = tmp_path / "t.study.toml"
    path.write_text(text, encoding="utf-8")
    return path


def test_minimal_study_loads_with_defaults_and_resolves_paths(tmp_path: Path) -> None:
    study = load_study(write(tmp_path, MINIMAL))
    assert study.sources[0].path == (tmp_path / "answers.csv").resolve()
    assert study.weigh.idf == "smooth"
    assert study.decisions_path.name == "t.decisions.sqlite"


def test_unknown_key_suggests_the_nearest(tmp_path: Path) -> None:
    path = write(tmp_path, MINIMAL + "\n[weigh]\ntff = 'log'\n")
    with pytest.raises(SettingsError, match=r"unknown key 'weigh.tff' \(did you mean 'tf'\?\)"):
        load_study(path)


def test_unknown_section_suggests_the_nearest(tmp_path: Path) -> None:
    path = write(tmp_path, MINIMAL + "\n[wiegh]\ntf = 'log'\n")
    with pytest.raises(SettingsError, match=r"unknown key 'wiegh' \(did you mean 'weigh'\?\)"):
        load_study(path)


def test_check_reports_every_problem_at_once(tmp_path: Path) -> None:
    text = MINIMAL.replace('expected = ["en", "de"]', 'expected = ["en", "DE"]') + "\n[weigh]\ntf = 'loga'\n[clean]\nmin_chars = 'two'\n"
    problems = check_study(write(tmp_path, text))
    assert len(problems) == 3, problems
    assert any("languages.expected" in p and "'DE'" in p for p in problems)
    assert any("weigh.tf" in p and "'loga'" in p for p in problems)
    assert any("clean.min_chars" in p for p in problems)
    assert all("\n" not in p for p in problems)


def test_toml_syntax_error_names_line_and_column(tmp_path: Path) -> None:
    path = write(tmp_path, "[study\nname = 1\n")
    with pytest.raises(SettingsError, match=r"TOML syntax error: .*line 1, column 7"):
        load_study(path)


def test_wrong_type_names_key_and_expected_type(tmp_path: Path) -> None:
    path = write(tmp_path, MINIMAL + "\n[compare]\nbootstrap = 'many'\n")
    with pytest.raises(SettingsError, match=r"'compare.bootstrap': Input should be a valid integer"):
        load_study(path)


def test_precedence_defaults_file_overrides(tmp_path: Path) -> None:
    path = write(tmp_path, MINIMAL + "\n[weigh]\ntf = 'log'\nnorm = 'l1'\n")
    study = load_study(path, ["weigh.norm=none", "compare.kwic_terms=['price', 'staff']"])
    assert study.weigh.tf == "log"  # file beats default
    assert study.weigh.norm == "none"  # override beats file
    assert study.weigh.idf == "smooth"  # default stays
    assert study.compare.kwic_terms == ["price", "staff"]


def test_override_without_equals_is_explained() -> None:
    with pytest.raises(SettingsError, match="needs the form section.key=value"):
        parse_override("weigh.tf")


def test_override_into_a_non_table_is_explained() -> None:
    with pytest.raises(SettingsError, match="'tf' is not a table"):
        apply_overrides({"weigh": {"tf": "raw"}}, ["weigh.tf.x=1"])


def test_missing_source_file_and_self_reference_are_reported(tmp_path: Path) -> None:
    path = write(tmp_path, MINIMAL.replace("answers.csv", "t.study.toml"))
    problems = check_study(path)
    assert any("points at the study file itself" in p for p in problems)
    path.write_text(MINIMAL.replace("answers.csv", "gone.csv"), encoding="utf-8")
    assert any("gone.csv does not exist" in p for p in check_study(path))


def test_no_sources_is_an_error(tmp_path: Path) -> None:
    path = write(tmp_path, "[study]\nname = 'x'\n")
    with pytest.raises(SettingsError, match=r"add at least one \[\[sources\]\]"):
        load_study(path)


def test_study_path_that_is_a_folder(tmp_path: Path) -> None:
    with pytest.raises(SettingsError, match="is a folder"):
        load_study(tmp_path)


def test_huge_integer_and_deep_nesting_are_refused(tmp_path: Path) -> None:
    path = write(tmp_path, MINIMAL + "\n[compare]\nbootstrap = 99999999999999999999999999\n")
    with pytest.raises(SettingsError, match="compare.bootstrap"):
        load_study(path)
    path.write_text("a = " + "[" * 5000 + "]" * 5000 + "\n", encoding="utf-8")
    with pytest.raises(SettingsError):
        load_study(path)


def test_fallback_default_needs_a_language(tmp_path: Path) -> None:
    path = write(tmp_path, MINIMAL.replace('expected = ["en", "de"]', 'expected = ["en"]\nfallback = "default"'))
    with pytest.raises(SettingsError, match="needs languages.default"):
        load_study(path)
