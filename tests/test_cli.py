"""The command line: documented exit codes, one-line errors, no tracebacks."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest

from workbench import __version__
from workbench.cli import main


def run_cli(*args: str, cwd: Path | None = None) -> subprocess.CompletedProcess[str]:
    env = {**os.environ, "NO_COLOR": "1"}
    return subprocess.run([sys.executable, "-m", "workbench", *args], capture_output=True, text=True, cwd=cwd, env=env)


def test_version_and_help() -> None:
    result = run_cli("--version")
    assert result.returncode == 0 and result.stdout.strip() == f"termloom {__version__}"
    for command in ("run", "check", "init", "open", "verify", "languages"):
        result = run_cli(command, "--help")
        assert result.returncode == 0, command
        assert "usage: termloom" in result.stdout


def test_missing_study_is_a_settings_error(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["run", str(tmp_path / "absent.study.toml")]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1
    assert err[0].startswith("termloom: error: study file") and "termloom init DATAFILE" in err[0]


def test_check_lists_every_problem_and_exits_2(tmp_path: Path) -> None:
    study = tmp_path / "x.study.toml"
    study.write_text("[[sources]]\npath = 'gone.csv'\n[weigh]\ntf = 'lg'\nnorm = 'l3'\n", encoding="utf-8")
    result = run_cli("check", str(study))
    assert result.returncode == 2
    lines = result.stderr.strip().splitlines()
    assert lines[-1] == f"termloom: 2 problem(s) in {study}"
    assert "Traceback" not in result.stderr


def test_bad_override_is_one_line(tmp_path: Path) -> None:
    study = tmp_path / "x.study.toml"
    study.write_text("[[sources]]\npath = 'a.csv'\n", encoding="utf-8")
    result = run_cli("run", str(study), "--set", "weigh.tf")
    assert result.returncode == 2
    assert result.stderr.strip() == "termloom: error: override 'weigh.tf' needs the form section.key=value, e.g. weigh.tf=log"


def test_languages_lists_profiles() -> None:
    result = run_cli("languages")
    assert result.returncode == 0
    assert any(line.startswith("de ") for line in result.stdout.splitlines())


def test_quiet_is_accepted_after_the_command(tmp_path: Path) -> None:
    result = run_cli("check", str(tmp_path / "absent.study.toml"), "-q")
    assert result.returncode == 2
    assert "unrecognized arguments" not in result.stderr
