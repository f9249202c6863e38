"""Dependencies point one way: the core and the CLI never load the terminal UI framework."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]

_PROBE = """
import sys, pkgutil, importlib
import workbench.core, workbench.cli
for info in pkgutil.walk_packages(workbench.core.__path__, "workbench.core."):
    importlib.import_module(info.name)
bad = sorted(m for m in sys.modules if m.split(".")[0] in {"textual", "rich"} or m.startswith("workbench.ui"))
print(",".join(bad))
"""


def test_core_and_cli_import_no_ui_in_a_fresh_interpreter() -> None:
    result = subprocess.run([sys.executable, "-c", _PROBE], capture_output=True, text=True, check=True)
    assert result.stdout.strip() == "", f"UI modules loaded by the core: {result.stdout}"


def test_import_linter_contracts_hold() -> None:
    """The layer contracts in pyproject.toml, checked by import-linter (lint-imports)."""
    lint = Path(sys.executable).with_name("lint-imports")
    if not lint.exists():
        pytest.skip("import-linter is not installed (it is in the test extra)")
    result = subprocess.run([str(lint)], capture_output=True, text=True, cwd=ROOT)
    assert result.returncode == 0, result.stdout[-2000:]


def test_help_does_not_load_heavy_libraries() -> None:
    """``termloom --help`` stays fast because spaCy, pandas and Textual load lazily."""
    probe = "import sys\nfrom workbench.cli import build_parser\nbuild_parser()\nprint(','.join(m for m in ('spacy','pandas','textual','sklearn') if m in sys.modules))"
    result = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, check=True)
    assert result.stdout.strip() == ""
