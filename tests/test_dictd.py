"""The dictd reader, checked on dictionaries built here and on a real FreeDict dictionary."""

from __future__ import annotations

import gzip
import struct
import zlib
from pathlib import Path

import pytest

from workbench.core.dictd import (
    decode_number,
    encode_number,
    language_pair,
    open_dictionary,
    parse_translations,
    propose_links,
)
from workbench.core.errors import InputError

DICTD_FOLDER = Path("/usr/share/dictd")
# Pairs read off the installed files (Debian dict-freedict-spa-eng and -deu-eng, 2022.04.21-1).
KNOWN = {
    "freedict-spa-eng": [("casa", "house"), ("precio", "price")],
    "freedict-deu-eng": [("haus", "house"), ("preis", "price")],
}


def test_number_codec_by_hand() -> None:
    """dictd index numbers (dictfmt(1)/dictd(8) index format): base 64 over A-Z a-z 0-9 + /, most
    significant digit first: "A" = 0, "B" = 1, "/" = 63, "BA" = 64, "CgE" = 2·64² + 32·64 + 4 = 10244."""
    assert decode_number("A") == 0
    assert decode_number("B") == 1
    assert decode_number("/") == 63
    assert decode_number("BA") == 64
    assert decode_number("CgE") == 2 * 64 * 64 + 32 * 64 + 4
    for value in (0, 1, 63, 64, 4095, 4096, 10244, 2**31 + 7):
        assert decode_number(encode_number(value)) == value
    with pytest.raises(ValueError):
        decode_number("A-")


def _dictzip(data: bytes, chunk: int) -> bytes:
    """A dictzip file as the dictzip(1) format describes it: gzip (RFC 1952) with an 'RA' extra field
    (version 1, chunk length, chunk count, compressed chunk sizes); each chunk deflated on its own."""
    pieces = []
    chunks = [data[i : i + chunk] for i in range(0, len(data), chunk)] or [b""]
    for number, part in enumerate(chunks):
        comp = zlib.compressobj(9, zlib.DEFLATED, -15)
        last = number == len(chunks) - 1
        pieces.append(comp.compress(part) + comp.flush(zlib.Z_FINISH if last else zlib.Z_FULL_FLUSH))
    ra = struct.pack("<HHH", 1, chunk, len(chunks)) + b"".join(struct.pack("<H", len(p)) for p in pieces)
    extra = b"RA" + struct.pack("<H", len(ra)) + ra
    header = b"\x1f\x8b\x08\x04" + b"\x00\x00\x00\x00" + b"\x02\x03" + struct.pack("<H", len(extra)) + extra
    trailer = struct.pack("<II", zlib.crc32(data) & 0xFFFFFFFF, len(data) & 0xFFFFFFFF)
    return header + b"".join(pieces) + trailer


ENTRIES = [
    ("00databaseutf8", "\n"),
    ("casa", "casa /kˈasa/\nhouse, home\n"),
    ("entrega", "entrega\n1. delivery\n2. handover; surrender\n"),
    ("precio", "precio /pɾˈeθjo/ <n, masc>\n [econ.] price <n>\n   Synonym: {coste}\n see: {precios}\n"),
    ("casarse", "casarse\nto marry, be married\n      \"se casó ayer\"  - she married yesterday\n"),
]


def _write_dictionary(folder: Path, name: str, entries: list[tuple[str, str]], compress: str = "none",
                      chunk: int = 16) -> Path:  # fmt: skip
    """Write NAME.index and NAME.dict[.dz] per the dictd format: headword<TAB>offset<TAB>length."""
    data = b""
    lines = []
    for headword, text in entries:
        raw = text.encode("utf-8")
        lines.append(f"{headword}\t{encode_number(len(data))}\t{encode_number(len(raw))}\n")
        data += raw
    index = folder / f"{name}.index"
    index.write_text("".join(lines), encoding="utf-8")
    if compress == "none":
        (folder / f"{name}.dict").write_bytes(data)
    elif compress == "gzip":
        (folder / f"{name}.dict.dz").write_bytes(gzip.compress(data))
    else:
        (folder / f"{name}.dict.dz").write_bytes(_dictzip(data, chunk))
    return index


@pytest.mark.parametrize("compress", ["none", "gzip", "dictzip"])
def test_tiny_dictionary_round_trip(tmp_path: Path, compress: str) -> None:
    """A dictionary written here per the dictd format reads back entry by entry, from a plain .dict,
    a plain gzip .dz and a random-access dictzip .dz with 16-byte chunks (entries span chunks)."""
    index = _write_dictionary(tmp_path, "freedict-spa-eng", ENTRIES, compress)
    d = open_dictionary(index)
    assert (d.source, d.target) == ("es", "en")
    assert d.utf8
    for headword, text in ENTRIES[1:]:
        assert d.definitions(headword) == [text]
        assert d.definitions(headword.upper()) == [text]
    assert d.definitions("nada") == []
    assert sorted(d.headwords()) == ["casa", "casarse", "entrega", "precio"]


def test_dictzip_built_here_is_valid_gzip(tmp_path: Path) -> None:
    """The dictzip built by the test helper is a valid gzip stream (Python's gzip module reads it whole),
    so the random-access reader is checked against a well-formed file."""
    data = "".join(t for _h, t in ENTRIES).encode()
    assert gzip.decompress(_dictzip(data, 16)) == data


def test_parse_translations() -> None:
    """FreeDict entry layout (headword line, numbered senses, <pos>, [domain], examples, see:/Synonym:
    lines) as in the Debian dict-freedict packages: only the translations are kept."""
    assert parse_translations(ENTRIES[1][1]) == ["house", "home"]
    assert parse_translations(ENTRIES[2][1]) == ["delivery", "handover", "surrender"]
    assert parse_translations(ENTRIES[3][1]) == ["price"]
    assert parse_translations(ENTRIES[4][1]) == ["marry", "be married"]


def test_language_pair_from_file_name() -> None:
    """FreeDict names dictionaries by ISO 639-3 codes (freedict-deu-eng); mapped to the study's codes."""
    assert language_pair(Path("freedict-deu-eng.index")) == ("de", "en")
    assert language_pair(Path("x/freedict-fra-eng.dict.dz")) == ("fr", "en")
    assert language_pair(Path("mine.index")) == (None, None)


def test_propose_links_both_ways(tmp_path: Path) -> None:
    """Proposals from the tiny dictionary: forward (top Spanish term -> English vocabulary), reverse
    (top English term found among translations of Spanish vocabulary), a link already in the glossary
    left out, and one whose terms sit in two concepts reported as a conflict."""
    d = open_dictionary(_write_dictionary(tmp_path, "freedict-spa-eng", ENTRIES))
    table = propose_links(
        top_terms={"es": ["precio", "casa"], "en": ["delivery", "house"]},
        vocabulary={"es": {"precio", "casa", "entrega"}, "en": {"price", "delivery", "house", "home"}},
        dictionaries=[d],
        glossary={("es", "casa"): "home", ("en", "home"): "home", ("en", "house"): "building"},
    )
    rows = {(r.term_a, r.term_b): r for r in table.itertuples()}
    assert rows[("precio", "price")].evidence == "forward"
    assert rows[("precio", "price")].proposed_concept == "price"  # the English side names a new concept
    assert rows[("entrega", "delivery")].evidence == "reverse"
    assert ("casa", "home") not in rows  # already one concept
    assert rows[("casa", "house")].status == "conflict"
    assert rows[("casa", "house")].evidence == "both"


def test_missing_and_corrupt_files(tmp_path: Path) -> None:
    """Bad input: every unreadable dictionary gives one InputError line naming the file."""
    with pytest.raises(InputError, match="not found"):
        open_dictionary(tmp_path / "nothing.index")
    index = _write_dictionary(tmp_path, "freedict-spa-eng", ENTRIES, "dictzip")
    (tmp_path / "freedict-spa-eng.dict.dz").write_bytes(b"this is not gzip at all, not even close")
    with pytest.raises(InputError, match="not a valid dictzip/gzip"):
        open_dictionary(index).definitions("casa")
    (tmp_path / "freedict-spa-eng.dict.dz").unlink()
    with pytest.raises(InputError, match="no data file"):
        open_dictionary(index)


def test_corrupt_chunk_and_truncated_gzip(tmp_path: Path) -> None:
    """Bad input: a dictzip whose chunk bytes are damaged, and a gzip .dz cut short."""
    index = _write_dictionary(tmp_path, "freedict-spa-eng", ENTRIES, "dictzip")
    dz = tmp_path / "freedict-spa-eng.dict.dz"
    raw = bytearray(dz.read_bytes())
    header_end = 12 + struct.unpack_from("<H", raw, 10)[0]
    raw[header_end : header_end + 6] = b"\xff" * 6
    dz.write_bytes(bytes(raw))
    with pytest.raises(InputError, match="corrupt"):
        open_dictionary(index).definitions("casa")
    _write_dictionary(tmp_path, "freedict-spa-eng", ENTRIES, "gzip")
    dz.write_bytes(dz.read_bytes()[:-12])
    with pytest.raises(InputError, match="not a valid dictzip/gzip"):
        open_dictionary(index).definitions("casa")


def test_malformed_index_lines(tmp_path: Path) -> None:
    """Bad input: a broken index line is reported with its line number; non-UTF-8 index; entry past the end."""
    index = _write_dictionary(tmp_path, "freedict-spa-eng", ENTRIES)
    lines = index.read_text(encoding="utf-8").splitlines(keepends=True)
    index.write_text("".join(lines[:2]) + "casa\tB-A\tC\n" + "".join(lines[2:]), encoding="utf-8")
    with pytest.raises(InputError, match="line 3 is not a dictd index line"):
        open_dictionary(index)
    index.write_bytes(b"casa\tA\tB\n\xff\xfe\tA\tB\n")
    with pytest.raises(InputError, match="line 2 is not UTF-8"):
        open_dictionary(index)
    index.write_text("casa\tA\tZZZ\n", encoding="utf-8")
    with pytest.raises(InputError, match="points past the end"):
        open_dictionary(index).definitions("casa")


def _installed() -> Path | None:
    found = sorted(DICTD_FOLDER.glob("freedict-*.index"), key=lambda p: p.stat().st_size) if DICTD_FOLDER.is_dir() else []
    known = [p for p in found if p.name.removesuffix(".index") in KNOWN]
    return (known or found or [None])[0]


@pytest.mark.skipif(
    _installed() is None,
    reason="no FreeDict dictionary under /usr/share/dictd; CI installs the Debian package dict-freedict-spa-eng (.ci/run)",
)
def test_real_freedict_dictionary() -> None:
    """A real FreeDict dictionary as packaged by Debian (dict-freedict-*): (1) the largest offset+length
    decoded from the index equals the size of the decompressed .dict.dz (read independently with
    Python's gzip), which checks the base-64 decoding against the file; (2) random-access reads equal
    slices of the fully decompressed data; (3) entries begin with their headword (keyed as the index
    keys it); (4) known pairs read off the installed packages."""
    index = _installed()
    assert index is not None
    d = open_dictionary(index)
    full = gzip.decompress(d.data_path.read_bytes())
    locations = [(h, o, n) for h in d.entries for o, n in d.locations(h)]
    assert max(o + n for _h, o, n in locations) == len(full)
    sample = locations[:: max(1, len(locations) // 300)]
    for _h, offset, length in sample:
        assert d.data.read(offset, length) == full[offset : offset + length]
    content = [(h, o, n) for h, o, n in sample if not h.startswith("00")]
    # Keys drop punctuation (dictfmt's default): compare the entry's first line keyed the same way.
    starts = sum(d.key(full[o : o + n].decode("utf-8").split("\n")[0]).startswith(h) for h, o, n in content)
    assert starts / len(content) > 0.95
    for headword, translation in KNOWN.get(d.name, []):
        assert translation in d.translations(headword)
