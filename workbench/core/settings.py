"""The study file: one declaration of every setting, validated strictly.

A study is a TOML file (``*.study.toml``). Precedence is
defaults < study file < command-line overrides (``--set section.key=value``).
Unknown keys are errors that suggest the nearest valid key; ``check_study``
reports every problem at once, ``load_study`` stops at the first.
Relative paths resolve against the folder holding the study file.
"""

from __future__ import annotations

import re
import tomllib
from pathlib import Path
from typing import Any, Literal

from pydantic import BaseModel, ConfigDict, Field, ValidationError, field_validator, model_validator

from workbench.core.errors import SettingsError, did_you_mean

#: Language codes termloom ships a profile for (see ``lang_profiles/``).
LANGUAGE_CODE = re.compile(r"^[a-z]{2,3}$")
UNDETERMINED = "und"
#: Name of the pooled corpus (every language together) in every per-language dict.
POOLED = "pooled"


class _Section(BaseModel):
    model_config = ConfigDict(extra="forbid", validate_assignment=True)


class StudyInfo(_Section):
    name: str = "study"
    seed: int = Field(default=20240601, ge=0, le=2**32 - 1)


class Source(_Section):
    path: Path
    format: Literal["auto", "csv", "tsv", "xlsx", "jsonl", "parquet", "txt"] = "auto"
    encoding: str = "auto"
    delimiter: str = "auto"
    sheet: str | int = 0
    #: Label written into the ledger and the corpus; defaults to the file name.
    label: str | None = None

    @field_validator("delimiter")
    @classmethod
    def _one_char(cls, value: str) -> str:
        if value != "auto" and value not in {",", ";", "\t", "|", "\\t"}:
            raise ValueError("must be 'auto' or one of , ; | \\t")
        return "\t" if value == "\\t" else value


class Columns(_Section):
    id: str | None = None
    text: list[str] = Field(default_factory=list)
    groups: list[str] = Field(default_factory=list)
    weight: str | None = None
    language_hint: str | None = None


class Languages(_Section):
    expected: list[str] = Field(default_factory=lambda: ["en"])
    #: What an answer gets when detection is unsure: the hint column, a fixed
    #: language (``default``) or ``und``.
    fallback: Literal["hint", "default", "und"] = "hint"
    default: str | None = None

    @field_validator("expected")
    @classmethod
    def _codes(cls, value: list[str]) -> list[str]:
        if not value:
            raise ValueError("name at least one language code, e.g. ['en', 'de']")
        for code in value:
            if not LANGUAGE_CODE.match(code):
                raise ValueError(f"'{code}' is not a two- or three-letter language code")
        if len(set(value)) != len(value):
            raise ValueError("a language is listed twice")
        return value

    @model_validator(mode="after")
    def _default_needed(self) -> Languages:
        if self.fallback == "default" and not self.default:
            raise ValueError("fallback = 'default' needs languages.default, e.g. default = 'en'")
        return self


class Clean(_Section):
    #: Placeholder types to mask; masking always happens before export.
    mask: list[Literal["email", "phone", "url", "iban", "card"]] = Field(
        default_factory=lambda: ["email", "phone", "url", "iban", "card"]
    )
    #: ISO 3166 regions used to parse national phone formats.
    phone_regions: list[str] = Field(default_factory=list)
    #: Answers with fewer non-space characters are flagged ``too_short``.
    min_chars: int = Field(default=2, ge=0, le=10_000)
    #: Normalised similarity in [0, 1] above which two answers are near-duplicates.
    near_duplicate: float = Field(default=0.92, ge=0.0, le=1.0)
    #: Near-duplicate search only compares answers at least this long.
    near_duplicate_min_chars: int = Field(default=30, ge=1, le=100_000)
    #: Whether answers flagged as non-answers/duplicates still enter weighting.
    flagged_enter_weighting: bool = False
    #: Extra non-answer phrases, all languages.
    non_answers: list[str] = Field(default_factory=list)
    repair_mojibake: bool = True


class Identify(_Section):
    detector: Literal["py3langid", "langdetect", "ensemble"] = "py3langid"
    #: Confidence bar in [0, 1]; below it the answer falls back. 0.6 measured
    #: on chatterbot-corpus (tests/bench/bench_identify.py): 97.9 % right on
    #: 4+ word answers, 1.3 % wrong on 1-3-word answers.
    min_confidence: float = Field(default=0.6, ge=0.0, le=1.0)
    #: Answers with fewer letters fall back without detection.
    min_letters: int = Field(default=8, ge=0, le=10_000)
    #: A second language must cover at least this many letters to flag mixing.
    mixed_min_letters: int = Field(default=20, ge=1, le=100_000)


class Terms(_Section):
    min_length: int = Field(default=2, ge=1, le=100)
    keep_numbers: bool = False
    keep_emoji: bool = True
    #: Longest n-gram formed (1 = single terms only).
    ngrams: int = Field(default=1, ge=1, le=3)
    #: Multi-word expressions always joined into one term, per language.
    expressions: dict[str, list[str]] = Field(default_factory=dict)
    stop_words_add: dict[str, list[str]] = Field(default_factory=dict)
    stop_words_remove: dict[str, list[str]] = Field(default_factory=dict)
    #: ``{lang = {form = "lemma"}}``.
    lemma_overrides: dict[str, dict[str, str]] = Field(default_factory=dict)
    #: Trained spaCy pipelines the user installed, by language.
    pipelines: dict[str, str] = Field(default_factory=dict)
    #: Whether ``und`` answers get their own matrix.
    include_und: bool = False


class Weigh(_Section):
    tf: Literal["raw", "relative", "log", "binary", "augmented"] = "raw"
    idf: Literal["none", "log10", "ln", "log2", "smooth", "prob"] = "smooth"
    norm: Literal["l2", "l1", "none"] = "l2"
    #: Three-letter SMART shorthand (e.g. "ltc"); overrides tf/idf/norm when set.
    smart: str | None = None
    #: Minimum document frequency: a count (int) or a share of answers (float < 1).
    min_df: int | float = 2
    max_df: int | float = 1.0
    max_terms: int | None = Field(default=None, ge=1, le=100_000_000)
    #: How the pooled matrix names terms: language-tagged, or glossary concepts.
    pooled: Literal["tagged", "glossary"] = "tagged"
    top_k: int = Field(default=30, ge=1, le=100_000)


class Compare(_Section):
    #: Group columns to compare; empty means every ``columns.groups`` column.
    groups: list[str] = Field(default_factory=list)
    combinations: list[list[str]] = Field(default_factory=list)
    count: Literal["respondents", "tokens"] = "respondents"
    #: A term needs at least this many mentions in the group and the rest together.
    min_freq: int = Field(default=5, ge=1, le=1_000_000_000)
    min_group_size: int = Field(default=30, ge=1, le=1_000_000_000)
    fdr: float = Field(default=0.05, gt=0.0, lt=1.0)
    #: Compare against this group value instead of the rest.
    reference: str | None = None
    glossary: Path | None = None
    dictionaries: list[Path] = Field(default_factory=list)
    bootstrap: int = Field(default=200, ge=0, le=100_000)
    top_k: int = Field(default=20, ge=1, le=100_000)
    kwic_terms: list[str] = Field(default_factory=list)
    kwic_width: int = Field(default=40, ge=5, le=10_000)


class Export(_Section):
    formats: list[
        Literal["csv", "xlsx", "json", "mtx", "npz", "parquet", "dta", "png", "svg"]
    ] = Field(default_factory=lambda: ["csv", "xlsx", "json", "mtx", "npz", "parquet", "dta", "png", "svg"])
    dense_csv: bool = False
    #: Largest matrix (rows x columns) written as dense CSV.
    dense_limit: int = Field(default=2_000_000, ge=1, le=10**12)


class Engine(_Section):
    kind: Literal["local", "dask"] = "local"
    scheduler: str | None = None
    workers: int | None = Field(default=None, ge=1, le=10_000)
    partition_rows: int = Field(default=50_000, ge=100, le=100_000_000)


class Study(_Section):
    """A fully resolved study: every section present, paths absolute."""

    study: StudyInfo = Field(default_factory=StudyInfo)
    sources: list[Source] = Field(default_factory=list, validate_default=True)
    columns: Columns = Field(default_factory=Columns)
    languages: Languages = Field(default_factory=Languages)
    clean: Clean = Field(default_factory=Clean)
    identify: Identify = Field(default_factory=Identify)
    terms: Terms = Field(default_factory=Terms)
    weigh: Weigh = Field(default_factory=Weigh)
    compare: Compare = Field(default_factory=Compare)
    export: Export = Field(default_factory=Export)
    engine: Engine = Field(default_factory=Engine)

    #: Where the study file lives (not a TOML key; set by the loader).
    study_path: Path | None = Field(default=None, exclude=True)

    @field_validator("sources")
    @classmethod
    def _some_source(cls, value: list[Source]) -> list[Source]:
        if not value:
            raise ValueError("add at least one [[sources]] table with a path")
        return value

    @property
    def base_dir(self) -> Path:
        return self.study_path.parent if self.study_path else Path.cwd()

    @property
    def decisions_path(self) -> Path:
        """The SQLite decision store beside the study file."""
        base = self.study_path if self.study_path else Path.cwd() / "study.toml"
        name = base.name.removesuffix(".toml").removesuffix(".study")
        return base.with_name(f"{name}.decisions.sqlite")

    def resolved_settings(self) -> dict[str, Any]:
        """JSON-ready settings as used, for the manifest."""
        return self.model_dump(mode="json")


# --------------------------------------------------------------------------- loading


def _shown(value: Any) -> str:
    """A short repr for messages: a 5 MB string or a table nested 500 deep stays one readable line."""
    import reprlib

    short = reprlib.Repr()
    short.maxstring, short.maxother, short.maxlevel, short.maxdict, short.maxlist = 80, 80, 2, 4, 6
    return short.repr(value)


def _describe(error: dict[str, Any], where: str) -> str:
    loc = ".".join(str(part) for part in error["loc"])
    if len(loc) > 120:
        loc = loc[:117] + "..."
    kind = error["type"]
    if kind == "extra_forbidden":
        parent = _model_at(error["loc"][:-1])
        key = str(error["loc"][-1])
        keys = [k for k in parent.model_fields if k != "study_path"] if parent else []  # set by the loader, not a key
        hint = did_you_mean(key, keys)
        valid = ", ".join(sorted(keys))
        return f"{where}: unknown key '{loc}'{hint}; valid keys here: {valid}"
    if kind == "literal_error":
        return f"{where}: '{loc}' {error['msg'].lower()}; got {_shown(error.get('input'))}"
    if kind == "missing":
        return f"{where}: '{loc}' is required"
    return f"{where}: '{loc}': {error['msg']}; got {_shown(error.get('input'))}"


def _model_at(loc: tuple[Any, ...]) -> type[BaseModel] | None:
    model: type[BaseModel] = Study
    for part in loc:
        if isinstance(part, int):
            continue
        field = model.model_fields.get(str(part))
        if field is None:
            return None
        annotation = field.annotation
        inner = getattr(annotation, "__args__", None)
        candidates = [annotation, *(inner or ())]
        found = next((c for c in candidates if isinstance(c, type) and issubclass(c, BaseModel)), None)
        if found is None:
            return None
        model = found
    return model


def parse_override(text: str) -> tuple[list[str], Any]:
    """Split ``section.key=value`` into a key path and a TOML-parsed value.

    Values that are not valid TOML are taken as plain strings, so
    ``--set weigh.tf=log`` works without quotes.
    """
    if "=" not in text:
        raise SettingsError(f"override '{text}' needs the form section.key=value, e.g. weigh.tf=log")
    key, raw = text.split("=", 1)
    path = [part.strip() for part in key.strip().split(".") if part.strip()]
    if not path:
        raise SettingsError(f"override '{text}' has no key before '='; use e.g. weigh.tf=log")
    if len(path) > MAX_KEY_PARTS:
        raise SettingsError(
            f"override key '{key[:60]}...' has {len(path)} parts; study keys have at most three (e.g. terms.expressions.en)"
        )
    try:
        value = tomllib.loads(f"v = {raw.strip()}")["v"]
    except (tomllib.TOMLDecodeError, RecursionError):
        value = raw.strip()
    except ValueError:  # an integer beyond Python's 4,300-digit conversion limit
        raise SettingsError(f"override '{key.strip()}' has a number with {len(raw.strip()):,} digits; use a sensible value") from None
    return path, value


def apply_overrides(data: dict[str, Any], overrides: list[str]) -> dict[str, Any]:
    """Return a copy of the raw study table with ``--set`` overrides applied."""
    import copy

    merged = copy.deepcopy(data)
    for text in overrides:
        path, value = parse_override(text)
        node = merged
        for part in path[:-1]:
            child = node.setdefault(part, {})
            if not isinstance(child, dict):
                raise SettingsError(f"override '{text}': '{part}' is not a table in the study")
            node = child
        node[path[-1]] = value
    return merged


#: Endings of the data files a study reads; given as the study itself, they get a pointer to ``init``.
_DATA_SUFFIXES = frozenset({".csv", ".tsv", ".tab", ".xlsx", ".xlsm", ".xls", ".jsonl", ".ndjson", ".json", ".parquet", ".pq"})


def read_study_table(path: Path) -> dict[str, Any]:
    """Read the TOML file, mapping every failure to a one-line :class:`SettingsError`."""
    path = Path(path)
    if not path.exists():
        raise SettingsError(f"study file {path} does not exist; create one with 'termloom init DATAFILE'")
    if path.is_dir():
        raise SettingsError(f"study path {path} is a folder; give the *.study.toml file inside it")
    if path.suffix.lower() in _DATA_SUFFIXES:
        raise SettingsError(
            f"{path} is a data file, not a study file; start a study from it with 'termloom init {path}', "
            "then run the *.study.toml it writes"
        )
    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise SettingsError(f"study file {path} cannot be read ({exc.strerror}); check its permissions") from None
    if len(raw) > 5_000_000:
        raise SettingsError(f"study file {path} is {len(raw):,} bytes; a study file should be a few KB of settings")
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise SettingsError(f"study file {path} is not UTF-8 (byte {exc.start}); save it as UTF-8") from None
    check_key_depth(text, f"study file {path}")
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise SettingsError(f"study file {path}: TOML syntax error: {exc}; fix the file at that place") from None
    except RecursionError:
        raise SettingsError(f"study file {path} nests tables too deeply; a study needs two levels at most") from None
    except ValueError:  # tomllib lets int()'s 4,300-digit limit through as a ValueError
        raise SettingsError(f"study file {path} holds an integer with thousands of digits; use a sensible value") from None


#: Most parts a dotted TOML key or table header may have. A study needs three;
#: tomllib's work and memory grow with the square of a key's parts (a 60 KB line
#: ``a.b.b.b...`` costs gigabytes), so longer keys are refused before parsing.
MAX_KEY_PARTS = 32
# Leading blanks belong to the key class itself: a separate [ \t]* before it made a line of
# spaces cost quadratic time (tests/bench/bench_regex.py).
_KEY_LINE = re.compile(r"^(?:[ \t]*\[\[?([^\]\n]*)\]|([\w\-. \t\"']*)=)", re.MULTILINE)


def check_key_depth(text: str, where: str) -> None:
    """Raise :class:`SettingsError` when a key or table header has more than :data:`MAX_KEY_PARTS` parts."""
    if text.count(".") <= MAX_KEY_PARTS:
        return
    for match in _KEY_LINE.finditer(text):
        key = match.group(1) if match.group(1) is not None else match.group(2)
        if key.count(".") >= MAX_KEY_PARTS:
            line = text.count("\n", 0, match.start()) + 1
            raise SettingsError(
                f"{where}: the key on line {line} has {key.count('.') + 1:,} dotted parts; "
                "study keys have two or three (e.g. weigh.tf) — fix that line"
            )


def _validate(data: dict[str, Any], path: Path | None) -> tuple[Study | None, list[str]]:
    where = str(path) if path else "settings"
    try:
        study = Study.model_validate(data)
    except ValidationError as exc:
        return None, [_describe(err, where) for err in exc.errors()]
    study.study_path = path.resolve() if path else None
    _resolve_paths(study)
    return study, []


def _resolve_paths(study: Study) -> None:
    base = study.base_dir
    for source in study.sources:
        if not source.path.is_absolute():
            source.path = (base / source.path).resolve()
    if study.compare.glossary and not study.compare.glossary.is_absolute():
        study.compare.glossary = (base / study.compare.glossary).resolve()
    study.compare.dictionaries = [d if d.is_absolute() else (base / d).resolve() for d in study.compare.dictionaries]


def load_study(path: Path | str, overrides: list[str] | None = None) -> Study:
    """Load, override and validate a study; raise :class:`SettingsError` at the first problem."""
    path = Path(path)
    data = apply_overrides(read_study_table(path), overrides or [])
    study, problems = _validate(data, path)
    if problems:
        raise SettingsError(problems[0])
    assert study is not None
    return study


def check_study(path: Path | str, overrides: list[str] | None = None) -> list[str]:
    """Return every problem found in the study (empty when it is valid)."""
    path = Path(path)
    try:
        data = apply_overrides(read_study_table(path), overrides or [])
    except SettingsError as exc:
        return [str(exc)]
    study, problems = _validate(data, path)
    if study is not None:
        problems.extend(_check_files(study))
    return problems


def _check_files(study: Study) -> list[str]:
    where = str(study.study_path)
    problems = []
    for number, source in enumerate(study.sources, start=1):
        if not source.path.exists():
            problems.append(f"{where}: sources[{number}].path {source.path} does not exist; fix the path (relative to the study file)")
        elif study.study_path and source.path.resolve() == study.study_path.resolve():
            problems.append(f"{where}: sources[{number}].path points at the study file itself; name the data file instead")
    if study.compare.glossary and not study.compare.glossary.exists():
        problems.append(f"{where}: compare.glossary {study.compare.glossary} does not exist; fix the path or remove the key")
    return problems


def study_from_dict(data: dict[str, Any], base_dir: Path | None = None) -> Study:
    """Validate a study given as a dict (tests, the UI); paths resolve against ``base_dir``."""
    study, problems = _validate(data, (base_dir / "study.toml") if base_dir else None)
    if problems:
        raise SettingsError(problems[0])
    assert study is not None
    return study
