"""Writing the column roles chosen in the Sources view back into the study file.

Only the ``[columns]`` table changes. When the file has a plain ``[columns]``
header, just that section's text is replaced, so the user's comments and the
layout of every other table survive; otherwise (inline or dotted keys) the
whole file is re-serialised with tomli-w, which keeps every value but not the
comments. Either way the result is parsed again and must equal the old
settings with the new columns before it replaces the file (atomically).
"""

from __future__ import annotations

import re
import tomllib
from pathlib import Path
from typing import Any

import tomli_w

from workbench.core.atomic import write_text
from workbench.core.errors import SettingsError
from workbench.core.settings import read_study_table, study_from_dict

_HEADER = re.compile(r"^\s*\[\s*columns\s*\]\s*(#.*)?$")
_ANY_HEADER = re.compile(r"^\s*\[")


def columns_table(id_column: str | None, text: list[str], groups: list[str], weight: str | None, hint: str | None) -> dict[str, Any]:
    """The ``[columns]`` table as TOML data; unset roles are left out."""
    table: dict[str, Any] = {}
    if id_column:
        table["id"] = id_column
    table["text"] = list(text)
    if groups:
        table["groups"] = list(groups)
    if weight:
        table["weight"] = weight
    if hint:
        table["language_hint"] = hint
    return table


def _replace_section(text: str, section: str) -> str | None:
    lines = text.splitlines(keepends=True)
    starts = [i for i, line in enumerate(lines) if _HEADER.match(line)]
    if len(starts) != 1:
        return None
    start = starts[0]
    end = next((j for j in range(start + 1, len(lines)) if _ANY_HEADER.match(lines[j])), len(lines))
    # Keep comment lines and blank lines that sit right before the next table with that table.
    while end - 1 > start and (not lines[end - 1].strip() or lines[end - 1].lstrip().startswith("#")):
        end -= 1
    tail = "\n" if end < len(lines) else ""
    return "".join(lines[:start]) + section + tail + "".join(lines[end:])


def write_columns(study_path: Path, columns: dict[str, Any]) -> None:
    """Replace the study's ``[columns]`` table with ``columns``; everything else is kept.

    Raises :class:`SettingsError` when the new roles make the study invalid
    (the file is then left untouched).
    """
    study_path = Path(study_path)
    data = read_study_table(study_path)
    wanted = {**data, "columns": columns}
    study_from_dict(wanted, base_dir=study_path.parent)
    text = study_path.read_text(encoding="utf-8-sig")
    section = tomli_w.dumps({"columns": columns})
    if "columns" not in data:
        new_text = text.rstrip("\n") + "\n\n" + section
    else:
        new_text = _replace_section(text, section)
    if new_text is None or tomllib.loads(new_text) != wanted:
        new_text = tomli_w.dumps(wanted)
    if tomllib.loads(new_text) != wanted:
        raise SettingsError(f"could not write column roles into {study_path}; edit its [columns] table by hand")
    write_text(study_path, new_text)
