"""Which text encoding a file is in: byte-order marks, then UTF-8, then an informed guess.

Order of evidence (first match wins):

1. ``sources.encoding`` in the study, when it is not ``"auto"``;
2. a byte-order mark (Unicode Standard §23.8 and Table 2-4: UTF-8 ``EF BB BF``,
   UTF-16 LE ``FF FE``, UTF-16 BE ``FE FF``, UTF-32 LE ``FF FE 00 00``,
   UTF-32 BE ``00 00 FE FF``); the mark is removed from the text;
3. UTF-8, if every byte of the file decodes strictly;
4. charset-normalizer's reading of a sample. Short survey answers give it little
   to go on and it often ranks a Mac or DOS code page first for Western
   European text, so cp1252 (the code page spreadsheet software on Windows
   writes for Western Europe — common practice) wins whenever it reads the
   sample about as cleanly as the best guess; among exact ties a Windows or
   national-standard code page wins over the rest;
5. cp1252 if charset-normalizer has no answer but cp1252 decodes the file.

Anything not UTF-8 leaves a warning note in the import report naming the
encoding chosen, so the analyst can override it.
"""

from __future__ import annotations

import codecs
import hashlib
from dataclasses import dataclass, field
from pathlib import Path

import charset_normalizer

from workbench.core.errors import InputError, SettingsError
from workbench.core.readers.files import BLOCK_BYTES, HEAD_BYTES, describe_magic, read_head

#: Longest-first, so the UTF-32 LE mark (FF FE 00 00) is not taken for UTF-16 LE (FF FE).
BOMS: list[tuple[bytes, str, str]] = [
    (codecs.BOM_UTF32_LE, "utf-32", "UTF-32"),
    (codecs.BOM_UTF32_BE, "utf-32", "UTF-32"),
    (codecs.BOM_UTF8, "utf-8-sig", "UTF-8"),
    (codecs.BOM_UTF16_LE, "utf-16", "UTF-16"),
    (codecs.BOM_UTF16_BE, "utf-16", "UTF-16"),
]

#: Preferred code pages when charset-normalizer's candidates are tied.
PREFERRED = (
    "cp1252", "cp1250", "cp1251", "cp1253", "cp1254", "cp1257", "cp1255", "cp1256", "cp1258",
    "cp874", "shift_jis", "cp932", "gb18030", "big5", "euc_kr", "cp949", "euc_jp", "koi8_r",
)  # fmt: skip
#: How much more "chaos" (charset-normalizer's mess score, in percent) cp1252 may show
#: than the best candidate and still be chosen.
NEAR_CHAOS = 8.0


@dataclass
class Scan:
    """What one pass over a text file found."""

    #: Python codec name to open the file with (``utf-8-sig`` / ``utf-16`` consume the BOM).
    encoding: str
    sha256: str = ""
    #: Number of ``\n`` bytes: an upper bound on records, used for progress only.
    newlines: int = 0
    notes: list[str] = field(default_factory=list)


@dataclass
class _Bad:
    offset: int
    line: int
    byte: int


def bom_encoding(head: bytes) -> tuple[str, str] | None:
    """``(codec, name)`` of the byte-order mark that starts ``head``, or ``None``."""
    for mark, codec, name in BOMS:
        if head.startswith(mark):
            return codec, name
    return None


def guess_legacy_encoding(sample: bytes) -> tuple[str | None, str | None]:
    """Return ``(chosen, charset_normalizer_best)`` for bytes that are not UTF-8."""
    results = list(charset_normalizer.from_bytes(sample))
    if not results:
        return None, None
    best = results[0].encoding
    floor = min(match.percent_chaos for match in results)
    near = {name for m in results if m.percent_chaos <= floor + NEAR_CHAOS for name in m.could_be_from_charset}
    if "cp1252" in near:
        return "cp1252", best
    tied = {name for m in results if m.percent_chaos <= floor + 1e-9 for name in m.could_be_from_charset}
    for codec in PREFERRED:
        if codec in tied:
            return codec, best
    return best, best


def _codec(name: str) -> str:
    try:
        return codecs.lookup(name).name
    except LookupError:
        raise SettingsError(
            f"sources.encoding = '{name}' is not an encoding Python knows; use e.g. 'utf-8', 'cp1252', 'utf-16' or 'auto'"
        ) from None


def _check_binary(path: Path | str, head: bytes, what: str) -> None:
    kind = describe_magic(head)
    if kind:
        raise InputError(f"{path} looks like {kind}, not a {what}; point sources.path at the exported answers")
    nul = head.find(b"\x00")
    if nul >= 0:
        raise InputError(
            f"{path} looks like a binary file, not a {what} (NUL byte at offset {nul}); point sources.path at the "
            "exported answers, or if it is UTF-16 text without a byte-order mark set sources.encoding = 'utf-16-le'"
        )


def _pass(path: Path, codec: str, full: bool, digest: bool) -> tuple[str, int, _Bad | None]:
    """One read of the file: hash, count newlines, decode strictly with ``codec``."""
    sha = hashlib.sha256() if digest else None
    decoder = codecs.getincrementaldecoder(codec)(errors="strict")
    newlines = 0
    start = 0
    bad = None
    with path.open("rb") as handle:
        while block := handle.read(BLOCK_BYTES if full else HEAD_BYTES):
            if sha is not None:
                sha.update(block)
            if bad is None:
                pending = len(decoder.getstate()[0])
                try:
                    decoder.decode(block, final=False)
                except UnicodeDecodeError as exc:
                    at = max(exc.start - pending, 0)
                    bad = _Bad(start + at, newlines + block[:at].count(b"\n") + 1, block[at] if at < len(block) else 0)
            newlines += block.count(b"\n")
            start += len(block)
            if not full:
                break
        if bad is None and full:
            try:
                decoder.decode(b"", final=True)
            except UnicodeDecodeError:
                bad = _Bad(start, newlines + 1, 0)
    return (sha.hexdigest() if sha is not None else ""), newlines, bad


def scan_file(path: Path, forced: str = "auto", *, what: str = "CSV file", full: bool = True) -> Scan:
    """Decide the encoding of a text file and hash it, in as few passes as the evidence allows.

    With ``full=False`` only the first block is examined and no hash is computed
    (used by ``termloom init`` to peek at large files).
    """
    head = read_head(path)
    if forced != "auto":
        codec = _codec(forced)
        notes: list[str] = []
        if codec == "utf-8" and head.startswith(codecs.BOM_UTF8):
            codec = "utf-8-sig"
            notes.append("UTF-8 byte-order mark removed")
        sha, newlines, bad = _pass(path, codec, full, digest=full)
        if bad:
            raise InputError(
                f"{path}: byte 0x{bad.byte:02X} on line {bad.line} (byte offset {bad.offset:,}) is not valid {forced} "
                f"as set in sources.encoding; set the file's real encoding (e.g. 'cp1252') or 'auto' to let termloom guess"
            )
        return Scan(codec, sha, newlines, notes)

    marked = bom_encoding(head)
    if marked:
        codec, name = marked
        sha, newlines, bad = _pass(path, codec, full, digest=full)
        if bad:
            raise InputError(
                f"{path} starts with a {name} byte-order mark but line {bad.line} (byte offset {bad.offset:,}) is not "
                f"valid {name}; re-export the file, or set sources.encoding to its real encoding"
            )
        return Scan(codec, sha, newlines, [f"{name} byte-order mark removed"])

    _check_binary(path, head, what)
    sha, newlines, bad = _pass(path, "utf-8", full, digest=full)
    if bad is None:
        return Scan("utf-8", sha, newlines, [])

    sample = head
    if bad.offset >= len(head):
        with path.open("rb") as handle:
            handle.seek(max(bad.offset - HEAD_BYTES // 2, 0))
            sample = head + b"\n" + handle.read(HEAD_BYTES)
    if _mostly_utf8(sample):
        # Mixed encodings (a UTF-8 export with lines pasted from a Windows-1252 tool): no single
        # encoding reads every line. cp1252 reads the legacy lines right and turns the UTF-8 ones
        # into classic mojibake ("fÃ¼r"), which clean repairs with a ledger entry per answer;
        # any other code page would garble the UTF-8 lines past repair.
        _sha, _n, still_bad = _pass(path, "cp1252", full, digest=False)
        if still_bad is None:
            return Scan("cp1252", sha, newlines, [
                f"warning: mixed encodings: most non-ASCII text is UTF-8 but byte 0x{bad.byte:02X} on line {bad.line} "
                "is not; read as cp1252 so that clean repairs the UTF-8 lines (ledger code repaired_mojibake); "
                "re-save the file as UTF-8 to be sure"
            ])
    chosen, best = guess_legacy_encoding(sample)
    tried = []
    for codec in dict.fromkeys(c for c in (chosen, "cp1252") if c):
        tried.append(codec)
        _sha, _n, still_bad = _pass(path, codec, full, digest=False)
        if still_bad is None:
            why = "charset-normalizer's guess" if codec == best else (
                f"charset-normalizer ranked {best} first; {codec} reads the sample about as cleanly"
                if best else "fallback"
            )
            return Scan(codec, sha, newlines, [
                f"warning: not UTF-8 (byte 0x{bad.byte:02X} on line {bad.line}); read as {codec} ({why}); "
                "if accented letters look wrong set sources.encoding"
            ])
    raise InputError(
        f"{path}: cannot tell the text encoding: byte 0x{bad.byte:02X} on line {bad.line} (byte offset {bad.offset:,}) "
        f"is not UTF-8 and the file is not {' or '.join(tried) or 'cp1252'} either; set sources.encoding to the "
        "file's encoding or re-export it as UTF-8"
    )


def _mostly_utf8(sample: bytes) -> bool:
    """Whether a sample that is not valid UTF-8 still holds mostly valid UTF-8 non-ASCII characters.

    In a legacy code page a valid UTF-8 sequence is an accident (a lead byte
    followed by the right continuation bytes); in a file that mixes encodings
    a good share of the non-ASCII characters are such sequences.
    """
    text = sample.decode("utf-8", "replace")
    invalid = text.count("\ufffd")
    valid = len(text) - len(text.encode("ascii", "ignore")) - invalid
    return valid >= 3 and valid >= 0.2 * (valid + invalid)


def decode_bytes(data: bytes, forced: str = "auto", where: str = "file", what: str = "text file") -> tuple[str, str, str | None]:
    """Decode one small file held in memory with the same rules; return ``(text, codec, note)``."""
    if forced != "auto":
        codec = _codec(forced)
        try:
            return data.decode("utf-8-sig" if codec == "utf-8" else codec), codec, None
        except UnicodeDecodeError as exc:
            line = data[: exc.start].count(b"\n") + 1
            raise InputError(
                f"{where}: byte 0x{data[exc.start]:02X} on line {line} is not valid {forced} as set in sources.encoding"
            ) from None
    marked = bom_encoding(data)
    if marked:
        codec, name = marked
        try:
            return data.decode(codec), codec, None
        except UnicodeDecodeError:
            raise InputError(f"{where} starts with a {name} byte-order mark but is not valid {name}") from None
    _check_binary(where, data[:HEAD_BYTES], what)
    try:
        return data.decode("utf-8"), "utf-8", None
    except UnicodeDecodeError as exc:
        first = exc.start
    chosen, _best = guess_legacy_encoding(data[: HEAD_BYTES * 2])
    for codec in dict.fromkeys(c for c in (chosen, "cp1252") if c):
        try:
            return data.decode(codec), codec, f"{where} read as {codec}"
        except UnicodeDecodeError:
            continue
    line = data[:first].count(b"\n") + 1
    raise InputError(f"{where}: cannot tell the text encoding (byte 0x{data[first]:02X} on line {line} is not UTF-8 or cp1252)")
