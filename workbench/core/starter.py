"""``termloom init``: guess a starter study from the first rows of a data file.

The guesses are rules of thumb (common practice, not a published method),
applied to the first :data:`PEEK_ROWS` records read exactly as ingest reads
them. "Filled" means not blank; shares are over filled cells.

* **id** — every row filled, every value distinct, short (mean length <= 40)
  and without spaces, not a decimal number; a name such as ``id``,
  ``respondent``, ``uuid`` wins, else the leftmost such column.
* **text** — free text: not numeric, not dates, mean length >= 15 characters,
  at least 40 % of values hold a space, at least 40 % of values distinct and
  most values hold letters.
* **weight** — numeric and positive; named like ``weight``/``wt``/``gewicht``/
  ``poids``/``peso``, or else with a mean between 0.8 and 1.25, not all whole
  numbers, more than two distinct values.
* **language hint** — named like ``lang``/``language``/``locale``/``sprache``,
  or else >= 90 % of values look like lower-case language codes (``de``,
  ``pt-br``) and the column is not named like a country.
* **groups** — what is left with 2 to 30 distinct values (and at most half as
  many values as filled rows), at least half filled, not dates.

Expected languages are the hint column's codes that have a language profile,
most frequent first; without a hint column, ``["en"]``.
"""

from __future__ import annotations

import os
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import pandas as pd
import tomli_w

from workbench.core.errors import InputError, OutputError
from workbench.core.ingest import peek_source
from workbench.core.profiles import available_languages
from workbench.core.settings import study_from_dict

PEEK_ROWS = 2000
MAX_GROUP_VALUES = 30

_ID_NAME = re.compile(r"(^|[^a-z])(id|ids|ident|identifier|respondent|resp|case|record|uuid|guid|token)([^a-z]|$)", re.I)
_WEIGHT_NAME = re.compile(r"(^|[^a-z])(weights?|wt|wgt|weighting|gewicht|gewichtung|poids|peso|waga|vikt|gewicht)([^a-z]|$)", re.I)
_HINT_NAME = re.compile(r"lang|locale|sprache|idioma|lingua|taal|jezyk|język|spr[aå]k", re.I)
_COUNTRY_NAME = re.compile(r"countr|land|pays|pa[ií]s|paese|kraj|region|market|nation", re.I)
_CODE = re.compile(r"^[a-z]{2,3}([-_][a-z0-9]{2,4})?$")
_DATE = re.compile(r"^\d{1,4}[-/.]\d{1,2}[-/.]\d{1,4}([ T]\d{1,2}:\d{2}(:\d{2}(\.\d+)?)?([+-]\d{2}:?\d{2}|Z)?)?$")
_DECIMAL_COMMA = re.compile(r"^[+-]?\d+,\d+$")


@dataclass
class _Stats:
    name: str
    position: int
    rows: int
    filled: int
    distinct: int
    mean_length: float
    space_share: float
    letter_share: float
    date_share: float
    numeric_share: float
    numbers: pd.Series
    values: pd.Series

    @property
    def numeric(self) -> bool:
        return self.filled > 0 and self.numeric_share >= 0.95

    @property
    def distinct_share(self) -> float:
        return self.distinct / self.filled if self.filled else 0.0


def _stats(frame: pd.DataFrame) -> list[_Stats]:
    result = []
    rows = len(frame)
    for position, name in enumerate(frame.columns):
        raw = frame[name].fillna("").astype(str).str.strip()
        values = raw[raw.str.len() > 0]
        filled = len(values)
        text = values.str.replace(",", ".", regex=False).where(values.str.fullmatch(_DECIMAL_COMMA.pattern), values)
        numbers = pd.to_numeric(text, errors="coerce")
        share = (lambda mask: float(mask.mean()) if filled else 0.0)
        result.append(_Stats(
            name=str(name),
            position=position,
            rows=rows,
            filled=filled,
            distinct=int(values.nunique()),
            mean_length=float(values.str.len().mean()) if filled else 0.0,
            space_share=share(values.str.contains(" ", regex=False)),
            letter_share=share(values.map(lambda v: any(ch.isalpha() for ch in v), na_action="ignore").astype(bool)),
            date_share=share(values.str.fullmatch(_DATE.pattern)),
            numeric_share=share(numbers.notna()),
            numbers=numbers.dropna(),
            values=values,
        ))
    return result


def _pick_id(stats: list[_Stats]) -> _Stats | None:
    def fits(s: _Stats) -> bool:
        whole = s.numbers.empty or bool((s.numbers == s.numbers.round()).all())
        return (
            s.rows > 1 and s.filled == s.rows and s.distinct == s.filled and s.mean_length <= 40
            and s.space_share <= 0.05 and s.date_share < 0.5 and (not s.numeric or whole)
        )

    candidates = [s for s in stats if fits(s)]
    named = [s for s in candidates if _ID_NAME.search(s.name)]
    return (named or candidates or [None])[0]


def _is_text(s: _Stats) -> bool:
    return (
        s.filled > 0 and not s.numeric and s.date_share < 0.5 and s.mean_length >= 15
        and s.space_share >= 0.4 and s.distinct_share >= 0.4 and s.letter_share >= 0.5
    )


def _pick_weight(stats: list[_Stats]) -> _Stats | None:
    positive = [s for s in stats if s.numeric and len(s.numbers) and bool((s.numbers > 0).all())]
    named = [s for s in positive if _WEIGHT_NAME.search(s.name)]
    if named:
        return named[0]
    for s in positive:
        whole = bool((s.numbers == s.numbers.round()).all())
        if 0.8 <= float(s.numbers.mean()) <= 1.25 and not whole and s.distinct > 2:
            return s
    return None


def _pick_hint(stats: list[_Stats]) -> _Stats | None:
    def codes(s: _Stats) -> bool:
        return (
            s.filled > 0 and s.distinct <= 50 and not _COUNTRY_NAME.search(s.name)
            and float(s.values.str.fullmatch(_CODE.pattern).mean()) >= 0.9
        )

    named = [s for s in stats if _HINT_NAME.search(s.name) and s.filled and s.distinct <= 200 and not s.numeric]
    return (named or [s for s in stats if codes(s)] or [None])[0]


def _is_group(s: _Stats) -> bool:
    return (
        2 <= s.distinct <= MAX_GROUP_VALUES and s.distinct <= max(2, s.filled // 2)
        and s.filled * 2 >= s.rows and s.date_share < 0.5
    )


def _languages(hint: _Stats) -> tuple[list[str], list[str]]:
    """Codes with a profile (most frequent first) and codes without one."""
    primary = hint.values.str.lower().str.split(r"[-_]", regex=True).str[0]
    counts = primary.value_counts()
    known = set(available_languages())
    ordered = sorted(counts.items(), key=lambda kv: (-kv[1], kv[0]))
    return [c for c, _n in ordered if c in known], [c for c, _n in ordered if c not in known]


def guess_study(data_path: Path) -> tuple[dict[str, Any], list[str]]:
    """Guess a starter study for ``data_path`` (a data file or a folder of .txt files).

    Returns
    -------
    study, lines
        The study as a TOML-ready table (``sources[0].path`` is ``data_path``
        as given; :func:`write_starter_study` makes it relative to the study
        file) and one human-readable line per guess.
    """
    data_path = Path(data_path)
    if not data_path.exists():
        raise InputError(f"{data_path} does not exist; give init the exported answers (a data file or a folder of .txt files)")
    frame, report = peek_source(data_path, PEEK_ROWS)
    if frame.empty:
        raise InputError(f"{data_path} has a header row but no data rows; init guesses column roles from the answers")
    lines = []
    how = [report.format]
    if report.encoding:
        how.append(f"encoding {report.encoding}")
    if report.delimiter:
        how.append("delimiter " + {"\t": "tab"}.get(report.delimiter, repr(report.delimiter)))
    if report.sheet:
        how.append(f"sheet '{report.sheet}'")
    lines.append(f"read the first {len(frame):,} rows of {data_path.name} ({', '.join(how)})")
    lines.extend(f"note: {note}" for note in report.notes)

    columns: dict[str, Any] = {}
    languages: dict[str, Any] = {"expected": ["en"], "fallback": "und"}
    if report.format == "txt":
        columns = {"id": "file", "text": ["text"]}
        lines.append("id column: the file name of each .txt file")
        lines.append("text columns: the text of each file")
    else:
        stats = _stats(frame)
        used: set[str] = set()
        ident = _pick_id(stats)
        if ident:
            columns["id"] = ident.name
            used.add(ident.name)
            lines.append(f"id column: {ident.name} ({ident.distinct:,} unique values)")
        else:
            lines.append("id column: none found (no column with unique, short values); respondents are numbered by row")
        texts = [s for s in stats if s.name not in used and _is_text(s)]
        columns["text"] = [s.name for s in texts]
        used.update(columns["text"])
        if texts:
            lines.append("text columns: " + ", ".join(
                f"{s.name} (mean {s.mean_length:.0f} characters, {s.distinct_share:.0%} distinct)" for s in texts))
        else:
            lines.append("text columns: none found — set columns.text to the open-ended question column(s) by hand")
        weight = _pick_weight([s for s in stats if s.name not in used])
        if weight:
            columns["weight"] = weight.name
            used.add(weight.name)
            lines.append(f"weight column: {weight.name} (mean {weight.numbers.mean():.2f})")
        else:
            lines.append("weight column: none (every respondent counts 1)")
        hint = _pick_hint([s for s in stats if s.name not in used])
        if hint:
            columns["language_hint"] = hint.name
            used.add(hint.name)
            codes, unknown = _languages(hint)
            shown = ", ".join(sorted(hint.values.str.lower().unique())[:12])
            lines.append(f"language hint: {hint.name} ({shown})")
            if codes:
                languages = {"expected": codes, "fallback": "hint"}
            if unknown:
                lines.append(f"hint values without a language profile, left out of expected languages: {', '.join(unknown[:10])}")
        else:
            lines.append("language hint: none")
        groups = [s for s in stats if s.name not in used and _is_group(s)]
        columns["groups"] = [s.name for s in groups]
        lines.append("group columns: " + (", ".join(f"{s.name} ({s.distinct} values)" for s in groups) or "none"))
    lines.append(f"expected languages: {', '.join(languages['expected'])}")

    study: dict[str, Any] = {
        "study": {"name": data_path.stem if data_path.is_file() else data_path.name},
        "sources": [{"path": str(data_path)}],
        "columns": columns,
        "languages": languages,
    }
    return study, lines


def _toml(study: dict[str, Any]) -> str:
    """The study as TOML in reading order, with ``[[sources]]`` tables rather than an inline array."""
    parts = [tomli_w.dumps({"study": study["study"]})]
    parts += [f"[[sources]]\n{tomli_w.dumps(source)}" for source in study["sources"]]
    parts.append(tomli_w.dumps({key: value for key, value in study.items() if key not in ("study", "sources")}))
    return "\n".join(parts)


def default_study_path(data_path: Path) -> Path:
    """``<folder>/<name>.study.toml`` beside the data."""
    data_path = Path(data_path)
    stem = data_path.name if data_path.is_dir() else data_path.stem
    return data_path.resolve().parent / f"{stem}.study.toml"


def write_starter_study(data_path: Path, out_path: Path | None = None) -> tuple[Path, list[str]]:
    """Guess a study for ``data_path`` and write it; never overwrite an existing file.

    Returns the path written and the lines describing the guesses.
    """
    data_path = Path(data_path)
    out_path = Path(out_path) if out_path else default_study_path(data_path)
    if out_path.exists():
        raise OutputError(f"{out_path} already exists; termloom init never overwrites a study — delete it or choose another path")
    study, lines = guess_study(data_path)
    relative = os.path.relpath(data_path.resolve(), out_path.resolve().parent)
    study["sources"][0]["path"] = Path(relative).as_posix()
    study_from_dict(study, base_dir=out_path.resolve().parent)  # the guess must be a valid study
    header = (
        f"# Starter study written by termloom init from {data_path.name}.\n"
        "# Every column role below is a guess from the first rows: check it before a run.\n\n"
    )
    try:
        with out_path.open("x", encoding="utf-8") as handle:
            handle.write(header + _toml(study))
    except FileExistsError:
        raise OutputError(f"{out_path} already exists; termloom init never overwrites a study — delete it or choose another path") from None
    except OSError as exc:
        raise OutputError(f"cannot write {out_path} ({exc.strerror or exc}); choose a folder you can write to") from None
    return out_path, lines
