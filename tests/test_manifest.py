"""manifest.json and verify_run: checksums, versions, and tamper detection."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from workbench.core.errors import InputError
from workbench.core.manifest import (
    MANIFEST_NAME,
    lookup_tables,
    package_versions,
    sha256_file,
    verify_run,
    write_manifest,
)


def test_sha256_matches_the_fips_examples(tmp_path: Path) -> None:
    """FIPS 180-2, Appendix B: SHA-256("abc") and SHA-256 of one million "a" [recalled from memory].
    A small chunk size makes the file reader cross chunk boundaries."""
    abc = tmp_path / "abc"
    abc.write_bytes(b"abc")
    assert sha256_file(abc) == "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
    million = tmp_path / "million"
    million.write_bytes(b"a" * 1_000_000)
    assert sha256_file(million, chunk=4096) == "cdc76e5c9914fb9281a1c7e284d73e67f1809a48a497200e046d39ccc7112cd0"


def _folder(tmp_path: Path) -> Path:
    out = tmp_path / "run"
    (out / "matrices").mkdir(parents=True)
    files = [out / "ledger.csv", out / "matrices" / "de.weights.mtx", out / "matrices" / "de.terms.txt"]
    files[0].write_text("level,key\n", encoding="utf-8")
    files[1].write_text("%%MatrixMarket matrix coordinate real general\n1 1 1\n1 1 0.5\n", encoding="utf-8")
    files[2].write_text("preis\n", encoding="utf-8")
    write_manifest(out, {"study": "t"}, files)
    return out


def test_fresh_folder_verifies(tmp_path: Path) -> None:
    out = _folder(tmp_path)
    report = verify_run(out)
    assert report.ok and report.checked == 3
    assert report.lines()[-1].startswith("OK: 3 file(s)")
    manifest = json.loads((out / MANIFEST_NAME).read_text(encoding="utf-8"))
    assert [e["path"] for e in manifest["files"]] == ["ledger.csv", "matrices/de.terms.txt", "matrices/de.weights.mtx"]


def test_one_changed_byte_fails(tmp_path: Path) -> None:
    """Changing one byte (same size) must change the SHA-256 and fail verification."""
    out = _folder(tmp_path)
    target = out / "matrices" / "de.weights.mtx"
    data = bytearray(target.read_bytes())
    data[-2] = ord("6")  # 0.5 -> 0.6
    target.write_bytes(bytes(data))
    report = verify_run(out)
    assert not report.ok
    assert report.changed == ["matrices/de.weights.mtx"] and report.missing == []
    assert "changed: matrices/de.weights.mtx" in report.lines()


def test_missing_and_extra_files_are_listed(tmp_path: Path) -> None:
    out = _folder(tmp_path)
    (out / "ledger.csv").unlink()
    (out / "notes.txt").write_text("mine", encoding="utf-8")
    report = verify_run(out)
    assert not report.ok
    assert report.missing == ["ledger.csv"] and report.extra == ["notes.txt"]


def test_extra_files_alone_do_not_fail(tmp_path: Path) -> None:
    out = _folder(tmp_path)
    (out / "README-analyst.txt").write_text("mine", encoding="utf-8")
    report = verify_run(out)
    assert report.ok and report.extra == ["README-analyst.txt"]


def test_entries_outside_the_folder_are_refused(tmp_path: Path) -> None:
    out = _folder(tmp_path)
    secret = tmp_path / "secret.txt"
    secret.write_text("x", encoding="utf-8")
    manifest = json.loads((out / MANIFEST_NAME).read_text(encoding="utf-8"))
    manifest["files"].append({"path": "../secret.txt", "bytes": 1, "sha256": "0" * 64})
    manifest["files"].append({"path": "/etc/hostname", "bytes": 1, "sha256": "0" * 64})
    (out / MANIFEST_NAME).write_text(json.dumps(manifest), encoding="utf-8")
    report = verify_run(out)
    assert not report.ok and len(report.problems) == 2 and report.checked == 3


@pytest.mark.parametrize(
    ("setup", "message"),
    [
        ("nothing", "has no manifest.json"),
        ("garbage", "is not valid JSON"),
        ("no_files", "has no 'files' list"),
        ("file", "is not a folder"),
    ],
)
def test_bad_folders_give_one_line_errors(tmp_path: Path, setup: str, message: str) -> None:
    out = tmp_path / "out"
    if setup == "file":
        out.write_text("x", encoding="utf-8")
    else:
        out.mkdir()
    if setup == "garbage":
        (out / MANIFEST_NAME).write_bytes(b"{not json")
    if setup == "no_files":
        (out / MANIFEST_NAME).write_text('{"study": "x"}', encoding="utf-8")
    with pytest.raises(InputError) as caught:
        verify_run(out)
    assert message in str(caught.value) and "\n" not in str(caught.value)


def test_package_versions_and_lookup_tables() -> None:
    """importlib.metadata gives the installed versions; spaCy lookup tables are identified by the
    spacy-lookups-data version and each lemma table file's SHA-256."""
    versions = package_versions(["numpy", "no-such-distribution-termloom-test"])
    import numpy

    assert versions == {"numpy": numpy.__version__, "no-such-distribution-termloom-test": None}
    tables = lookup_tables(["de", "zz"])
    assert tables["version"] == package_versions(["spacy-lookups-data"])["spacy-lookups-data"]
    assert "zz" not in tables["tables"]
    entry = tables["tables"]["de"]["lemma_lookup"]
    assert entry["file"].startswith("de_lemma_lookup") and len(entry["sha256"]) == 64
