"""Checks every reader runs before it parses: the path exists, is readable, is not empty,
is the kind of thing the format expects; plus the one pass over the bytes that
computes the SHA-256 written into the import report and the manifest.
"""

from __future__ import annotations

import hashlib
from pathlib import Path

from workbench.core.errors import InputError

#: How much of a file is read to sniff its kind, encoding and delimiter.
HEAD_BYTES = 1 << 20
#: Block size of the hashing pass (large blocks keep the pass near disk speed).
BLOCK_BYTES = 1 << 22

#: File signatures ("magic numbers") of formats people mistake for text exports.
#: Sources: PNG spec §5.2 (89 50 4E 47 0D 0A 1A 0A); PDF 1.7 (ISO 32000-1) §7.5.2 "%PDF-";
#: ZIP APPNOTE §4.3.7 local file header 50 4B 03 04; RFC 1952 §2.3.1 gzip 1F 8B;
#: Compound File Binary (.xls, .doc) D0 CF 11 E0 A1 B1 1A E1; Apache Parquet "PAR1";
#: JPEG FF D8 FF; GIF "GIF8".
MAGIC: list[tuple[bytes, str]] = [
    (b"\x89PNG\r\n\x1a\n", "a PNG image"),
    (b"%PDF-", "a PDF document"),
    (b"PK\x03\x04", "a ZIP archive (an .xlsx workbook is one; set format = 'xlsx' if it is)"),
    (b"\x1f\x8b", "a gzip-compressed file (decompress it first)"),
    (b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1", "an old Office 97-2003 file (.xls/.doc; save it as .xlsx or CSV)"),
    (b"PAR1", "a Parquet file (set format = 'parquet')"),
    (b"\xff\xd8\xff", "a JPEG image"),
    (b"GIF8", "a GIF image"),
]


def describe_magic(head: bytes) -> str | None:
    """Name the binary format whose signature starts ``head``, if any."""
    for signature, name in MAGIC:
        if head.startswith(signature):
            return name
    return None


def check_readable_file(path: Path, what: str) -> None:
    """Raise a one-line :class:`InputError` unless ``path`` is an existing, readable, non-empty file.

    ``what`` names the expected kind of file in the message, e.g. ``"CSV file"``.
    """
    if not path.exists():
        raise InputError(
            f"{path} does not exist; fix sources.path in the study (relative paths start at the study file's folder)"
        )
    if path.is_dir():
        raise InputError(
            f"{path} is a folder, not a {what}; point sources.path at the file, "
            "or set format = 'txt' (or 'auto') to read a folder of .txt files"
        )
    if not path.is_file():
        raise InputError(f"{path} is not a regular file; point sources.path at the exported {what}")
    try:
        with path.open("rb") as handle:
            first = handle.read(1)
    except OSError as exc:
        raise InputError(
            f"{path} cannot be read ({exc.strerror or exc}); check the file's permissions or copy it somewhere readable"
        ) from None
    if not first:
        raise InputError(f"{path} is empty (0 bytes); export the data again or point sources.path at the right file")


def read_head(path: Path, size: int = HEAD_BYTES) -> bytes:
    with path.open("rb") as handle:
        return handle.read(size)


def sha256_of(path: Path) -> str:
    """Hex SHA-256 of the file's bytes (FIPS 180-4)."""
    digest = hashlib.sha256()
    with path.open("rb") as handle:
        while block := handle.read(BLOCK_BYTES):
            digest.update(block)
    return digest.hexdigest()
