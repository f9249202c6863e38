"""``manifest.json``: what a run used and what it wrote, and the check that the folder still matches.

The manifest is written last (atomically), so a folder whose manifest is
present and verifies is a complete run. It holds the resolved settings,
library versions, the spaCy lookup tables in use (package version and the
SHA-256 of each lemma table file), the SHA-256 of every input file, the
ledger's counts per status and per ``stage:code``, the engine (in-process, or
Dask with its cluster size and partitioning), per-stage timings and
summaries, notes the export made (cut spreadsheet cells, split sheets...), and
the size and SHA-256 of every file written, with paths relative to the folder.

:func:`verify_run` recomputes every checksum and lists missing, changed and
extra files; ``termloom verify OUTDIR`` prints its lines.
"""

from __future__ import annotations

import hashlib
import json
from collections.abc import Iterable
from dataclasses import dataclass, field
from importlib import metadata
from pathlib import Path, PurePosixPath
from datetime import UTC, datetime
from typing import TYPE_CHECKING, Any

from workbench.core import corpus as C
from workbench.core.errors import InputError
from workbench.core.tables import to_jsonable, write_json

if TYPE_CHECKING:
    from workbench.core.pipeline import RunOutputs

MANIFEST_NAME = "manifest.json"
MANIFEST_FORMAT = "termloom-run/1"

#: Distributions whose versions shape the results.
PACKAGES: tuple[str, ...] = (
    "termloom",
    "spacy",
    "spacy-lookups-data",
    "simplemma",
    "scikit-learn",
    "scipy",
    "numpy",
    "pandas",
    "pyarrow",
    "py3langid",
    "langdetect",
    "matplotlib",
    "XlsxWriter",
)


def sha256_file(path: Path, chunk: int = 1 << 20) -> str:
    """Hex SHA-256 of a file, read in 1 MiB chunks."""
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        while block := handle.read(chunk):
            digest.update(block)
    return digest.hexdigest()


def package_versions(names: Iterable[str] = PACKAGES) -> dict[str, str | None]:
    """Installed version of each distribution (``None`` when it is not installed)."""
    versions: dict[str, str | None] = {}
    for name in names:
        try:
            versions[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            versions[name] = None
    return versions


def lookup_tables(languages: Iterable[str]) -> dict[str, Any]:
    """spaCy lookup data in use: package version and, per language, each lemma table's file and SHA-256.

    The tables carry no version of their own, so the package version plus a
    checksum of each file identifies them exactly.
    """
    try:
        import spacy_lookups_data
    except ImportError:
        return {"version": None, "tables": {}}
    folder = Path(spacy_lookups_data.__file__).parent / "data"
    tables: dict[str, dict[str, Any]] = {}
    for code in sorted(set(languages)):
        found = {}
        for path in sorted(folder.glob(f"{code}_lemma_*")):
            table = path.name.removeprefix(f"{code}_").split(".")[0]
            found[table] = {"file": path.name, "sha256": sha256_file(path)}
        if found:
            tables[code] = found
    return {"version": package_versions(["spacy-lookups-data"])["spacy-lookups-data"], "tables": tables}


def file_entries(out_dir: Path, files: Iterable[Path]) -> list[dict[str, Any]]:
    """``{"path", "bytes", "sha256"}`` for each file, paths relative to ``out_dir`` (POSIX), sorted."""
    entries = []
    for path in sorted(set(files)):
        relative = path.resolve().relative_to(out_dir.resolve()).as_posix()
        entries.append({"path": relative, "bytes": path.stat().st_size, "sha256": sha256_file(path)})
    return sorted(entries, key=lambda e: e["path"])


def write_manifest(out_dir: Path, content: dict[str, Any], files: Iterable[Path]) -> Path:
    """Add the checksums of ``files`` to ``content`` and write ``manifest.json`` atomically."""
    manifest = {"format": MANIFEST_FORMAT, **content, "files": file_entries(out_dir, files)}
    return write_json(out_dir / MANIFEST_NAME, to_jsonable(manifest))


def read_manifest(out_dir: Path) -> dict[str, Any]:
    """The manifest of a run folder; a missing or damaged one is an :class:`InputError`."""
    out_dir = Path(out_dir)
    path = out_dir / MANIFEST_NAME
    if not out_dir.is_dir():
        raise InputError(f"{out_dir} is not a folder; give the output folder of a termloom run")
    if not path.is_file():
        raise InputError(f"{out_dir} has no {MANIFEST_NAME}; give the output folder of a finished termloom run")
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise InputError(f"{path} is not valid JSON ({exc}); the manifest was damaged, re-run the study") from None
    if not isinstance(data, dict) or not isinstance(data.get("files"), list):
        raise InputError(f"{path} has no 'files' list; it was not written by termloom or was edited")
    return data


@dataclass
class VerifyReport:
    """The outcome of :func:`verify_run`; ``ok`` when nothing listed is missing or changed."""

    out_dir: Path
    checked: int = 0
    missing: list[str] = field(default_factory=list)
    changed: list[str] = field(default_factory=list)
    extra: list[str] = field(default_factory=list)
    problems: list[str] = field(default_factory=list)

    @property
    def ok(self) -> bool:
        """Extra files are listed but do not fail the check: they do not alter what the run wrote."""
        return not (self.missing or self.changed or self.problems)

    def lines(self) -> list[str]:
        """Human-readable lines, one per finding, then a summary."""
        out = [f"missing: {p}" for p in self.missing]
        out += [f"changed: {p}" for p in self.changed]
        out += [f"extra (not written by this run): {p}" for p in self.extra]
        out += [f"problem: {p}" for p in self.problems]
        verdict = "OK" if self.ok else "FAILED"
        out.append(
            f"{verdict}: {self.checked} file(s) listed in {self.out_dir / MANIFEST_NAME}; "
            f"{len(self.missing)} missing, {len(self.changed)} changed, {len(self.extra)} extra"
        )
        return out


def _safe_relative(text: Any) -> PurePosixPath | None:
    if not isinstance(text, str) or not text:
        return None
    path = PurePosixPath(text)
    if path.is_absolute() or ".." in path.parts or "\\" in text or ":" in path.parts[0]:
        return None
    return path


def verify_run(out_dir: Path | str) -> VerifyReport:
    """Recheck every file listed in ``manifest.json`` against its size and SHA-256.

    Returns
    -------
    A report listing files that are missing, changed (different size or
    checksum), or extra (present in the folder but not listed: left by another
    tool or an interrupted run), and manifest entries that point outside the
    folder (refused, never read).
    """
    out_dir = Path(out_dir)
    manifest = read_manifest(out_dir)
    report = VerifyReport(out_dir=out_dir)
    listed: set[str] = set()
    for entry in manifest["files"]:
        relative = _safe_relative(entry.get("path") if isinstance(entry, dict) else None)
        if relative is None:
            report.problems.append(f"manifest entry {entry!r} is not a path inside the folder; it was not checked")
            continue
        listed.add(relative.as_posix())
        report.checked += 1
        path = out_dir / relative
        if not path.is_file():
            report.missing.append(relative.as_posix())
        elif path.stat().st_size != entry.get("bytes") or sha256_file(path) != entry.get("sha256"):
            report.changed.append(relative.as_posix())
    manifest_path = out_dir / MANIFEST_NAME
    for path in sorted(out_dir.rglob("*")):
        if path.is_file() and path != manifest_path:
            relative = path.relative_to(out_dir).as_posix()
            if relative not in listed:
                report.extra.append(relative)
    return report


# --------------------------------------------------------------------------- what the run did


def _weighted(weighed: Any) -> dict[str, Any]:
    out = dict(getattr(weighed, "weighted", None) or {})
    if getattr(weighed, "pooled_weighted", None) is not None:
        out["pooled"] = weighed.pooled_weighted
    return out




def _stage_summaries(run: RunOutputs) -> dict[str, Any]:
    summary: dict[str, Any] = {}
    if run.corpus is not None:
        summary["corpus"] = {
            "respondents": int(len(run.corpus.respondents)),
            "answers": int(len(run.corpus.answers)),
            "sources": len(run.corpus.reports),
        }
    try:
        answers = run.answers
    except ValueError:
        answers = None
    if answers is not None and C.LANGUAGE in answers:
        summary["languages"] = {str(k): int(v) for k, v in answers[C.LANGUAGE].value_counts().sort_index().items()}
    terms = run.terms
    if terms is not None:
        vocab = getattr(terms, "vocabularies", None) or {}
        summary["terms"] = {
            "vocabulary_sizes": {str(k): int(len(v)) for k, v in sorted(vocab.items())},
            "stop_words": {
                str(k): int(len(v)) for k, v in sorted((getattr(terms, "stop_words", None) or {}).items())
            },
            "overrides_applied": to_jsonable(getattr(terms, "overrides_applied", None)),
            "backends": to_jsonable(getattr(terms, "backends", None)),
            "notes": to_jsonable(list(getattr(terms, "notes", None) or [])),
        }
    weighed = run.weighed
    if weighed is not None:
        described = weighed.describe() if hasattr(weighed, "describe") else ""
        summary["weigh"] = {
            "scheme": to_jsonable(getattr(weighed, "scheme", None)),
            "description": [line.strip() for line in str(described).splitlines() if line.strip()],
            "effective_n": to_jsonable(getattr(weighed, "effective_n", None)),
            "n_documents": to_jsonable(getattr(weighed, "n_documents", None)),
            "matrices": {
                name: {"rows": int(m.shape[0]), "terms": int(m.shape[1]), "nonzero": int(m.nnz)}
                for name, m in _weighted(weighed).items()
            },
            "notes": to_jsonable(list(getattr(weighed, "notes", None) or [])),
            "warnings": to_jsonable(list(getattr(weighed, "warnings", None) or [])),
        }
    compared = run.compared
    if compared is not None:
        tables = getattr(compared, "tables", None) or {}
        descriptions = getattr(compared, "table_notes", None) or {}
        summary["compare"] = {
            "tables": {
                str(name): {"rows": int(len(frame)), "description": descriptions.get(name, "")}
                for name, frame in tables.items()
            },
            "findings": to_jsonable(list(getattr(compared, "findings", None) or [])),
            "notes": to_jsonable(list(getattr(compared, "notes", None) or [])),
            "warnings": to_jsonable(list(getattr(compared, "warnings", None) or [])),
        }
    return summary


def _decision_counts(run: RunOutputs) -> dict[str, int]:
    decisions = getattr(run, "decisions", None)
    if decisions is None:
        return {}
    counts = {}
    for kind in ("language", "non_answer", "exclude", "stop_add", "stop_remove", "lemma"):
        value = getattr(decisions, kind, None) or {}
        counts[kind] = sum(len(v) if isinstance(v, (set, dict)) else 1 for v in value.values())
    return counts


def run_content(run: RunOutputs, notes: list[str], removed: list[str], export_seconds: float) -> dict[str, Any]:
    """Everything the manifest says about ``run`` except the file list (added by :func:`write_manifest`)."""
    study = run.study
    timings = {str(k): round(float(v), 6) for k, v in (run.timings or {}).items()}
    timings["export"] = round(export_seconds, 6)
    return {
        "termloom": package_versions(["termloom"])["termloom"],
        "study": study.study.name,
        "study_file": study.study_path.as_posix() if study.study_path else None,
        "started": run.started.isoformat() if run.started else None,
        "finished": run.finished.isoformat() if run.finished else None,
        "written": datetime.now(UTC).isoformat(),
        "settings": study.resolved_settings(),
        "packages": package_versions(),
        "spacy_lookups": lookup_tables(study.languages.expected),
        "inputs": [report.as_dict() for report in (run.corpus.reports if run.corpus is not None else [])],
        "decisions": _decision_counts(run),
        "ledger": {"counts": run.ledger.counts(), "reasons": dict(sorted(run.ledger.reasons().items()))},
        "stages": _stage_summaries(run),
        # The engine, its cluster size and how the per-text work was partitioned.
        "engine": to_jsonable(getattr(run, "engine", None) or {"kind": "local"}),
        "timings": timings,
        "notes": notes,
        "removed_from_previous_run": removed,
    }
