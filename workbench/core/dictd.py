"""Bilingual dictionaries in the open dictd format, and glossary proposals drawn from them.

The dictd format (the ``dictd``/``dictfmt`` tools; used by the FreeDict
project, whose dictionaries Debian packages as ``dict-freedict-<src>-<tgt>``)
is two files side by side:

``<name>.index``
    One line per entry: ``headword<TAB>offset<TAB>length``. Offset and length
    locate the entry's text in the ``.dict`` file (in bytes, after
    decompression) and are written as base-64 numbers with the alphabet
    ``A–Z a–z 0–9 + /`` (A = 0 … / = 63), most significant digit first, no
    padding: ``"B"`` = 1, ``"BA"`` = 64. Headwords may repeat (one line per
    sense) and may be lower-cased by the indexer; lookups here ignore case.
    Entries whose headword starts with ``00database`` (or ``00-database-``)
    hold metadata (``00databaseutf8`` marks a UTF-8 dictionary).

``<name>.dict`` or ``<name>.dict.dz``
    The entry texts. ``.dz`` is dictzip: a gzip file (RFC 1952) whose header
    carries an extra field ``RA`` (version, chunk length, chunk count, the
    compressed size of every chunk); each chunk is deflated independently, so
    one entry can be read by inflating only the chunks that hold it. A
    ``.dz`` without that field is read whole with :mod:`gzip`.

FreeDict entry texts start with the headword line (headword, pronunciation,
``<grammar>``), followed by translation lines, optionally numbered ``1.``,
``2.``; comma- or semicolon-separated; with ``[domain]`` labels, ``<pos>``
tags, quoted examples and ``see:``/``Synonym:``/``Note:`` lines, which are not
translations. :func:`parse_translations` keeps the translations only.
"""

from __future__ import annotations

import gzip
import re
import struct
import unicodedata
import zlib
from collections import OrderedDict
from dataclasses import dataclass, field
from pathlib import Path

import pandas as pd

from workbench.core.errors import InputError
from workbench.core.glossary import normalise_term

B64_ALPHABET = "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/"
_B64_VALUE = {c: i for i, c in enumerate(B64_ALPHABET)}

#: ISO 639-3 / 639-2 codes in dictionary file names -> the study's codes.
ISO639_3 = {
    "eng": "en", "deu": "de", "ger": "de", "fra": "fr", "fre": "fr", "spa": "es", "ita": "it",
    "por": "pt", "nld": "nl", "dut": "nl", "pol": "pl", "swe": "sv", "dan": "da", "nob": "nb",
    "rus": "ru", "ces": "cs", "cze": "cs", "ron": "ro", "rum": "ro", "cat": "ca", "tur": "tr",
    "hun": "hu", "ell": "el", "gre": "el", "fin": "fi",
}  # fmt: skip

_PAIR = re.compile(r"(?:^|[-_.])([a-z]{3})-([a-z]{3})$")


def decode_number(text: str) -> int:
    """Decode a dictd base-64 number (most significant digit first)."""
    value = 0
    for char in text:
        digit = _B64_VALUE.get(char)
        if digit is None:
            raise ValueError(f"'{char}' is not a dictd base-64 digit")
        value = value * 64 + digit
    if not text:
        raise ValueError("empty number")
    return value


def encode_number(value: int) -> str:
    """Encode a non-negative integer as a dictd base-64 number."""
    if value < 0:
        raise ValueError("dictd numbers are non-negative")
    digits = []
    while True:
        value, digit = divmod(value, 64)
        digits.append(B64_ALPHABET[digit])
        if value == 0:
            return "".join(reversed(digits))


# --------------------------------------------------------------------------- reading the .dict data


class _Plain:
    def __init__(self, path: Path) -> None:
        self.data = _read_bytes(path)

    def read(self, offset: int, length: int) -> bytes:
        return self.data[offset : offset + length]

    @property
    def size(self) -> int:
        return len(self.data)


class _Dictzip:
    """Random access to a dictzip file: inflate only the chunks an entry spans (small chunk cache)."""

    def __init__(self, path: Path, raw: bytes, chunk_length: int, sizes: list[int], data_start: int) -> None:
        self.path = path
        self.raw = raw
        self.chunk_length = chunk_length
        self.starts = [data_start]
        for size in sizes:
            self.starts.append(self.starts[-1] + size)
        self.count = len(sizes)
        self._cache: OrderedDict[int, bytes] = OrderedDict()

    def _chunk(self, index: int) -> bytes:
        cached = self._cache.get(index)
        if cached is not None:
            self._cache.move_to_end(index)
            return cached
        try:
            block = zlib.decompressobj(-15).decompress(self.raw[self.starts[index] : self.starts[index + 1]])
        except zlib.error as exc:
            raise InputError(
                f"dictionary data {self.path} is corrupt (chunk {index + 1} of {self.count}: {exc}); "
                "reinstall the dictionary package or remove it from compare.dictionaries"
            ) from None
        self._cache[index] = block
        if len(self._cache) > 32:
            self._cache.popitem(last=False)
        return block

    def read(self, offset: int, length: int) -> bytes:
        first = offset // self.chunk_length
        last = (offset + max(length, 1) - 1) // self.chunk_length
        if last >= self.count:
            return b""
        data = b"".join(self._chunk(i) for i in range(first, last + 1))
        start = offset - first * self.chunk_length
        return data[start : start + length]

    @property
    def size(self) -> int:
        return (self.count - 1) * self.chunk_length + len(self._chunk(self.count - 1)) if self.count else 0


def _read_bytes(path: Path) -> bytes:
    try:
        return path.read_bytes()
    except OSError as exc:
        raise InputError(f"dictionary file {path} cannot be read ({exc.strerror}); check the path and its permissions") from None


def _open_data(path: Path) -> _Plain | _Dictzip:
    if not path.name.endswith(".dz"):
        return _Plain(path)
    raw = _read_bytes(path)
    corrupt = (
        f"dictionary data {path} is not a valid dictzip/gzip file; "
        "reinstall the dictionary package or remove it from compare.dictionaries"
    )
    if len(raw) < 18 or raw[:2] != b"\x1f\x8b" or raw[2] != 8:
        raise InputError(corrupt)
    flags = raw[3]
    position = 10
    chunk_length, sizes = 0, []
    if flags & 0x04:
        (extra_length,) = struct.unpack_from("<H", raw, position)
        extra = raw[position + 2 : position + 2 + extra_length]
        position += 2 + extra_length
        cursor = 0
        while cursor + 4 <= len(extra):
            tag, length = extra[cursor : cursor + 2], struct.unpack_from("<H", extra, cursor + 2)[0]
            body = extra[cursor + 4 : cursor + 4 + length]
            if tag == b"RA" and len(body) >= 6:
                _version, chunk_length, count = struct.unpack_from("<HHH", body, 0)
                sizes = list(struct.unpack_from(f"<{count}H", body, 6)) if len(body) >= 6 + 2 * count else []
            cursor += 4 + length
    for flag in (0x08, 0x10):  # FNAME, FCOMMENT: zero-terminated strings
        if flags & flag:
            end = raw.find(b"\x00", position)
            if end < 0:
                raise InputError(corrupt)
            position = end + 1
    if flags & 0x02:  # FHCRC
        position += 2
    if chunk_length and sizes and position + sum(sizes) <= len(raw):
        return _Dictzip(path, raw, chunk_length, sizes, position)
    plain = _Plain.__new__(_Plain)
    try:
        plain.data = gzip.decompress(raw)
    except (OSError, EOFError, zlib.error) as exc:
        raise InputError(f"{corrupt} ({exc})") from None
    return plain


# --------------------------------------------------------------------------- the dictionary


@dataclass
class DictdDictionary:
    """One dictd dictionary: its index in memory, its data read on demand.

    ``source``/``target`` are the study's language codes of the headwords and
    of the translations, taken from the file name (``freedict-deu-eng`` ->
    ``de``, ``en``) unless given.
    """

    name: str
    index_path: Path
    data_path: Path
    source: str | None
    target: str | None
    #: case-folded headword -> (offset, length) pairs, still base-64 (decoded on lookup: an index
    #: can hold half a million lines and most are never looked up).
    entries: dict[str, list[tuple[str, str]]] = field(repr=False)
    utf8: bool = True
    #: ``False`` when the index keys drop punctuation (dictfmt's default, no ``00databaseallchars``).
    allchars: bool = False
    _data: _Plain | _Dictzip | None = field(default=None, repr=False)

    @property
    def data(self) -> _Plain | _Dictzip:
        if self._data is None:
            self._data = _open_data(self.data_path)
        return self._data

    def __len__(self) -> int:
        return len(self.entries)

    def headwords(self) -> list[str]:
        """Every (case-folded) headword except the ``00database`` metadata entries."""
        return [h for h in self.entries if not _is_meta(h)]

    def locations(self, headword: str) -> list[tuple[int, int]]:
        """``(offset, length)`` of every entry filed under ``headword`` (case ignored)."""
        return [(decode_number(o), decode_number(n)) for o, n in self.entries.get(self.key(headword), [])]

    def key(self, word: str) -> str:
        """The index key of ``word``: NFC, case-folded, and (unless the dictionary was indexed with all
        characters) without the punctuation dictfmt leaves out of keys ("Hunde-Egel" -> "hundeegel")."""
        key = _key(word)
        if not self.allchars:
            key = " ".join("".join(c for c in key if c.isalnum() or c.isspace()).split())
        return key

    def definitions(self, headword: str) -> list[str]:
        """Entry texts filed under ``headword`` (case ignored); empty when absent."""
        out = []
        for offset, length in self.locations(headword):
            raw = self.data.read(offset, length)
            if len(raw) != length:
                raise InputError(
                    f"dictionary {self.index_path}: entry '{headword}' points past the end of {self.data_path} "
                    f"(offset {offset}, length {length}); the .index and .dict files do not belong together"
                )
            out.append(raw.decode("utf-8", errors="replace") if self.utf8 else raw.decode("latin-1"))
        return out

    def translations(self, headword: str) -> list[str]:
        """Distinct translations of ``headword`` (normalised by :func:`normalise_term`), in entry order."""
        seen: dict[str, None] = {}
        for text in self.definitions(headword):
            for item in parse_translations(text, self.target or ""):
                seen.setdefault(item, None)
        return list(seen)


def _key(word: str) -> str:
    return unicodedata.normalize("NFC", word).strip().casefold()


def _is_meta(headword: str) -> bool:
    return headword.startswith("00database") or headword.startswith("00-database-")


def language_pair(path: Path) -> tuple[str | None, str | None]:
    """Study language codes from a file name like ``freedict-spa-eng.index`` (``(None, None)`` if absent)."""
    stem = path.name
    for suffix in (".index", ".dict.dz", ".dict", ".dz"):
        if stem.endswith(suffix):
            stem = stem[: -len(suffix)]
            break
    match = _PAIR.search(stem.lower())
    if not match:
        return None, None
    return ISO639_3.get(match.group(1)), ISO639_3.get(match.group(2))


def open_dictionary(path: Path | str, source: str | None = None, target: str | None = None) -> DictdDictionary:
    """Open a dictd dictionary given its ``.index``, ``.dict``, ``.dict.dz`` or common stem.

    Raises
    ------
    InputError
        One line naming the file and the fix, when a file is missing or
        unreadable, an index line is malformed (with its line number), or
        the data file is not valid (dict)gzip.
    """
    path = Path(path)
    name = path.name
    for suffix in (".index", ".dict.dz", ".dict"):
        if name.endswith(suffix):
            name = name[: -len(suffix)]
            break
    folder = path.parent
    index_path = folder / f"{name}.index"
    candidates = [folder / f"{name}.dict.dz", folder / f"{name}.dict"]
    data_path = next((c for c in candidates if c.is_file()), None)
    if not index_path.is_file():
        raise InputError(
            f"dictionary index {index_path} not found; a dictd dictionary is a .index file with a .dict or "
            ".dict.dz file beside it — fix compare.dictionaries"
        )
    if data_path is None:
        raise InputError(
            f"dictionary {index_path} has no data file ({name}.dict.dz or {name}.dict) beside it; "
            "copy both files or fix compare.dictionaries"
        )
    raw = _read_bytes(index_path)
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = raw[: exc.start].count(b"\n") + 1
        raise InputError(
            f"dictionary index {index_path}: line {line} is not UTF-8; is this really a dictd .index file?"
        ) from None
    entries: dict[str, list[tuple[str, str]]] = {}
    lines = _INDEX_LINE.findall(text)
    if len(lines) != sum(1 for line in text.split("\n") if line.strip()):
        _raise_bad_line(index_path, text)
    for headword, offset, length in lines:
        key = headword.strip().casefold() if headword.isascii() else _key(headword)
        entries.setdefault(key, []).append((offset, length))
    if not entries:
        raise InputError(f"dictionary index {index_path} holds no entries; the file is empty or damaged")
    guessed = language_pair(index_path)
    return DictdDictionary(
        name=name,
        index_path=index_path,
        data_path=data_path,
        source=source or guessed[0],
        target=target or guessed[1],
        entries=entries,
        utf8="00databaseutf8" in entries or "00-database-utf8" in entries,
        allchars="00databaseallchars" in entries or "00-database-allchars" in entries,
    )


_INDEX_LINE = re.compile(r"^([^\t\n]*)\t[ ]*([A-Za-z0-9+/]+)[ ]*\t[ ]*([A-Za-z0-9+/]+)[ \r]*$", re.MULTILINE)


def _raise_bad_line(index_path: Path, text: str) -> None:
    for number, line in enumerate(text.split("\n"), start=1):
        if line.strip() and not _INDEX_LINE.fullmatch(line):
            raise InputError(
                f"dictionary index {index_path}: line {number} is not a dictd index line "
                "(expected headword<TAB>offset<TAB>length in base-64 digits A-Z a-z 0-9 + /); "
                "the file is damaged or not a dictd index"
            )
    raise InputError(f"dictionary index {index_path} could not be read as a dictd index")


# --------------------------------------------------------------------------- entry texts


_SKIP_LINE = re.compile(r"^\s*(see:|synonyms?:|note:|antonyms?:|\")", re.IGNORECASE)
_NUMBERING = re.compile(r"^\s*\d+\.\s*")
# An annotation holds no bracket of its own kind: with "[^\]]*" a line of 100,000 "[" took 100 s
# (every "[" scanned to the end of the line); this form is linear and gives the same result on the
# 147,761 entry lines of the first 20,000 headwords of FreeDict deu-eng and spa-eng (tests/bench/bench_regex.py).
_BRACKETS = re.compile(r"\[[^\[\]]*\]|<[^<>]*>|\([^()]*\)|\{[^{}]*\}|/[^/\n]*/")


def parse_translations(entry: str, language: str = "") -> list[str]:
    """Translations in one FreeDict entry text (heuristic, see the module docstring).

    Drops the first (headword) line, example, cross-reference and note lines,
    ``[..]``/``<..>``/``(..)``/``{..}`` annotations, ``/pronunciations/`` and numbering; splits on
    ``,`` and ``;``; strips a leading English infinitive marker ``to ``.
    """
    lines = entry.split("\n")[1:]
    out: list[str] = []
    for line in lines:
        if not line.strip() or _SKIP_LINE.match(line):
            continue
        line = _BRACKETS.sub(" ", _NUMBERING.sub("", line))
        for piece in re.split(r"[,;]", line):
            term = normalise_term(piece.strip(" .…!?:\"'"), language)
            if term.startswith("to ") and len(term) > 3:
                term = term[3:]
            if term and term not in out:
                out.append(term)
    return out


# --------------------------------------------------------------------------- proposals


PROPOSAL_COLUMNS = [
    "language_a", "term_a", "language_b", "term_b", "evidence", "dictionaries",
    "concept_a", "concept_b", "proposed_concept", "status",
]  # fmt: skip


def propose_links(
    top_terms: dict[str, list[str]],
    vocabulary: dict[str, set[str]],
    dictionaries: list[DictdDictionary],
    glossary: dict[tuple[str, str], str] | None = None,
) -> pd.DataFrame:
    """Propose glossary links between the study's terms from bilingual dictionaries.

    For a dictionary from language A to language B, both in the study:

    * forward — a top term of A whose translations include a term of B's
      vocabulary;
    * reverse — a top term of B found among the translations of a term of A's
      vocabulary (the dictionary read backwards, limited to terms the study has).

    A pair found both ways (or by two dictionaries) has ``evidence = "both"``.
    Pairs already in one concept of the glossary are left out; a pair whose
    terms sit in two different concepts is kept with ``status = "conflict"``.
    ``proposed_concept`` is the existing concept of either term, else the
    English term when one side is English, else ``term_a``. Nothing is applied:
    the analyst accepts a proposal by adding the rows to the glossary CSV.

    Returns
    -------
    pandas.DataFrame
        Columns :data:`PROPOSAL_COLUMNS`, sorted by language pair and term.
    """
    glossary = glossary or {}
    found: dict[tuple[str, str, str, str], dict[str, set[str]]] = {}
    for dictionary in dictionaries:
        a, b = dictionary.source, dictionary.target
        if a is None or b is None or a not in vocabulary or b not in vocabulary:
            continue
        vocab_b = vocabulary[b]
        for term in top_terms.get(a, []):
            for translation in dictionary.translations(term):
                if translation in vocab_b:
                    _add(found, (a, term, b, translation), "forward", dictionary.name)
        wanted = set(top_terms.get(b, []))
        if wanted:
            for term in sorted(vocabulary[a]):
                for translation in dictionary.translations(term):
                    if translation in wanted:
                        _add(found, (a, term, b, translation), "reverse", dictionary.name)
    rows = []
    for (la, ta, lb, tb), evidence in sorted(found.items()):
        ca, cb = glossary.get((la, ta)), glossary.get((lb, tb))
        if ca is not None and ca == cb:
            continue
        english = tb if lb == "en" else ta if la == "en" else ta
        status = "conflict" if ca and cb else "new link"
        kinds = evidence["kind"]
        rows.append(
            {
                "language_a": la,
                "term_a": ta,
                "language_b": lb,
                "term_b": tb,
                "evidence": "both" if len(kinds) > 1 or len(evidence["dictionary"]) > 1 else next(iter(kinds)),
                "dictionaries": ", ".join(sorted(evidence["dictionary"])),
                "concept_a": ca or "",
                "concept_b": cb or "",
                "proposed_concept": ca or cb or english,
                "status": status,
            }
        )
    return pd.DataFrame(rows, columns=PROPOSAL_COLUMNS)


def _add(found: dict, key: tuple[str, str, str, str], kind: str, name: str) -> None:
    entry = found.setdefault(key, {"kind": set(), "dictionary": set()})
    entry["kind"].add(kind)
    entry["dictionary"].add(name)
