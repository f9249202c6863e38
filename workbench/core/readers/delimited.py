"""CSV and TSV files: encoding and delimiter sniffed, RFC 4180 quoting, read in chunks.

Quoting follows RFC 4180 §2: a field may be enclosed in double quotes; a
quoted field may hold the delimiter, CR/LF line breaks and double quotes, the
latter written twice (``""``). Lines may end in CRLF or LF. Blank lines are not
records. A first line ``sep=;`` (written by some spreadsheet software) names
the delimiter and is skipped.

Clean files go through pyarrow's streaming CSV reader (which produces the
Arrow strings the later stages work on, with no per-row Python). Ragged
records are handled by switching, at the first one, to the standard-library
``csv`` reader for the rest of the file:

* **too many fields**: the row is kept with the first *n* fields (n = header
  width); if any extra field holds text, the row is flagged ``ragged_row`` and
  the ledger message shows what was dropped. Extra fields that are all empty
  (a trailing delimiter) are dropped silently.
* **too few fields**: the missing trailing cells read as empty — exporters
  routinely omit trailing empty fields, so this is not flagged.

Both parsers read a quote that never closes as running to the end of the
file (as Python's ``csv`` module does with ``strict=False``). When the last
record's last field holds further lines that look like records, that record
is flagged ``unclosed_quote`` and the import report carries a warning.
"""

from __future__ import annotations

import csv
import io
import itertools
import re
from collections.abc import Iterator
from pathlib import Path

import numpy as np
import pandas as pd

from workbench.core.corpus import ImportReport
from workbench.core.errors import InputError
from workbench.core.readers.base import Chunk, ChunkBuilder, Opened, RowProblem, preview, repair_header, string_frame
from workbench.core.readers.encoding import scan_file
from workbench.core.readers.files import check_readable_file
from workbench.core.settings import Source

DELIMITERS = ",;\t|"
#: Characters of decoded text used to sniff the delimiter and read the header.
SAMPLE_CHARS = 256 * 1024
#: Smallest pyarrow block (bytes). A record longer than a block cannot be parsed
#: by pyarrow's streaming reader; such files continue with the csv module.
MIN_BLOCK = 4 * 1024**2
_SEP_LINE = re.compile(r"^sep=([,;\t|])\r?\n")


_STRADDLE = "straddl"  # pyarrow: "straddling object straddles two block boundaries"


def _shown(delimiter: str) -> str:
    return {"\t": "tab", ",": "comma", ";": "semicolon", "|": "pipe"}[delimiter]


def _records(text: str, delimiter: str, limit: int = 200) -> list[list[str]]:
    reader = csv.reader(io.StringIO(text, newline=""), delimiter=delimiter)
    try:
        return [r for r in itertools.islice(reader, limit) if r]
    except csv.Error:
        return []


def _consistency(text: str, delimiter: str) -> tuple[float, int]:
    """Share of sample records as wide as the first one, and that width."""
    records = _records(text, delimiter)
    if not records:
        return 0.0, 0
    width = len(records[0])
    body = records[1:] or records
    return sum(len(r) == width for r in body) / len(body), width


def sniff_delimiter(text: str) -> tuple[str, str]:
    """Pick the delimiter among ``, ; tab |`` for a decoded sample; return ``(delimiter, how)``.

    ``csv.Sniffer`` (restricted to the four candidates) is asked first and kept
    when its choice splits the header into more than one column and at least
    90 % of the sampled records into the same number of fields. Otherwise the
    candidates are ranked by that share, then by the number of columns.
    """
    complete = text[: text.rfind("\n")] if "\n" in text else text
    scores = {d: _consistency(complete, d) for d in DELIMITERS}
    try:
        sniffed = csv.Sniffer().sniff(complete[:65536], delimiters=DELIMITERS).delimiter
    except csv.Error:
        sniffed = None
    if sniffed in scores and scores[sniffed][1] > 1 and scores[sniffed][0] >= 0.9:
        return sniffed, "sniffed"
    ranked = sorted(
        ((share, width, -DELIMITERS.index(d), d) for d, (share, width) in scores.items() if width > 1),
        reverse=True,
    )
    if not ranked:
        return ",", "one column, no delimiter found"
    return ranked[0][3], "counted"


def open_delimited(
    source: Source, report: ImportReport, *, tab: bool, chunk_rows: int, full: bool = True
) -> Opened:
    """Sniff and open a CSV/TSV file; fill ``report`` with what was decided."""
    path = Path(source.path)
    what = "TSV file" if tab else "CSV file"
    check_readable_file(path, what)
    scan = scan_file(path, source.encoding, what=what, full=full)
    report.encoding = scan.encoding
    report.sha256 = scan.sha256
    report.notes.extend(scan.notes)

    with path.open(encoding=scan.encoding, newline="") as handle:
        sample = handle.read(SAMPLE_CHARS)
    skip = 0
    sep_line = _SEP_LINE.match(sample)
    if sep_line:
        skip = 1
        sample = sample[sep_line.end():]
    if source.delimiter != "auto":
        delimiter, how = source.delimiter, "set in the study"
    elif sep_line:
        delimiter, how = sep_line.group(1), "named by the file's 'sep=' line"
    elif tab:
        delimiter, how = "\t", "TSV"
    else:
        delimiter, how = sniff_delimiter(sample)
    report.delimiter = delimiter
    if how not in ("set in the study", "TSV", "sniffed"):
        report.notes.append(f"delimiter: {_shown(delimiter)} ({how})")

    if len(sample) >= SAMPLE_CHARS and "\n" not in sample and "\r" not in sample:
        raise InputError(
            f"{path}: the first {SAMPLE_CHARS:,} characters hold no line break, so there is no header row; "
            "a CSV export starts with one line of column names — point sources.path at the exported answers"
        )
    reader = csv.reader(io.StringIO(sample, newline=""), delimiter=delimiter)
    # like the parsers, skip blank and whitespace-only lines before the header
    try:
        header = next((r for r in reader if r and not (len(r) == 1 and not r[0].strip())), None)
    except csv.Error as exc:  # e.g. a header cell over the csv module's field limit
        raise InputError(f"{path}: the header row cannot be read ({exc}); the first line must name the columns") from None
    if header is None:
        raise InputError(f"{path} holds only blank lines; export the data again with a header row and answers")
    # physical lines up to the end of the header; pyarrow skips lines, not records
    header_lines = skip + reader.line_num
    names, duplicated, notes = repair_header(header)
    report.columns = names
    report.notes.extend(notes)
    # pyarrow batches by bytes: size blocks so a batch holds about chunk_rows records
    records_in_sample = max(len(_records(sample, delimiter, limit=1_000_000)), 1)
    per_record = max(len(sample.encode("utf-8", "replace")) // records_in_sample, 16)
    block = int(min(max(chunk_rows * per_record, MIN_BLOCK), 64 * 1024**2))
    chunks = _chunks(path, scan.encoding, delimiter, names, skip, header_lines, chunk_rows, block)
    return Opened(columns=names, chunks=chunks, duplicated=duplicated, expected_rows=max(scan.newlines - header_lines, 0))


def _arrow_codec(codec: str) -> str:
    # pyarrow decodes UTF-8 natively (and drops a UTF-8 BOM); other codecs go through Python's.
    return "utf8" if codec in ("utf-8", "utf-8-sig") else codec


def _unclosed_quote(last: Chunk, delimiter: str, width: int) -> RowProblem | None:
    """A problem for the file's last record if its last field swallowed lines that look like records."""
    frame = last.frame
    if not len(frame) or width < 2:
        return None
    values = [str(v) for v in frame.iloc[-1].tolist() if isinstance(v, str) and v]
    lines = values[-1].splitlines()[1:] if values else []
    if not any(line.count(delimiter) >= width - 1 for line in lines):
        return None
    number = int(last.rows[-1])
    return RowProblem(
        number, "flagged", "unclosed_quote",
        f"record {number}: a quoted field seems never to close — its text runs to the end of the file and holds "
        f"{len(lines):,} more lines that look like records; fix the quotes near record {number} and read again",
    )


def _chunks(
    path: Path, codec: str, delimiter: str, names: list[str], skip: int, header_lines: int, chunk_rows: int, block: int
) -> Iterator[Chunk]:
    last: Chunk | None = None
    for chunk in _arrow_then_tolerant(path, codec, delimiter, names, skip, header_lines, chunk_rows, block):
        last = chunk
        yield chunk
    problem = _unclosed_quote(last, delimiter, len(names)) if last is not None else None
    if problem:
        # refers back to a record already delivered (index None, status flagged)
        yield Chunk(string_frame([], names), np.empty(0, dtype=np.int64), [problem])


def _arrow_then_tolerant(
    path: Path, codec: str, delimiter: str, names: list[str], skip: int, header_lines: int, chunk_rows: int, block: int
) -> Iterator[Chunk]:
    import pyarrow as pa
    import pyarrow.csv as pacsv

    ragged: list[str] = []

    def invalid(row: pacsv.InvalidRow) -> str:
        if not (row.text or "").strip():
            return "skip"  # a whitespace-only line, which is no record
        ragged.append(row.text or "")
        return "error"

    def fail(exc: Exception) -> InputError:
        return InputError(f"{path} cannot be parsed as delimited text ({exc}); check the delimiter and quotes")

    try:
        reader = pacsv.open_csv(
            path,
            read_options=pacsv.ReadOptions(
                column_names=names, skip_rows=header_lines, encoding=_arrow_codec(codec), block_size=block
            ),
            parse_options=pacsv.ParseOptions(
                delimiter=delimiter, quote_char='"', double_quote=True, escape_char=False,
                newlines_in_values=True, ignore_empty_lines=True, invalid_row_handler=invalid,
            ),
            convert_options=pacsv.ConvertOptions(
                column_types={name: pa.large_string() for name in names},
                strings_can_be_null=False, quoted_strings_can_be_null=False,
            ),
        )
    except pa.ArrowInvalid as exc:  # the first block is parsed on opening
        if not (ragged or _STRADDLE in str(exc)):
            raise fail(exc) from None
        yield from _tolerant_chunks(path, codec, delimiter, names, skip, chunk_rows, 0)
        return
    done = 0
    try:
        while True:
            try:
                batch = reader.read_next_batch()
            except StopIteration:
                return
            except pa.ArrowInvalid as exc:
                if ragged or _STRADDLE in str(exc):
                    break
                raise fail(exc) from None
            for offset in range(0, batch.num_rows, chunk_rows):
                piece = batch.slice(offset, chunk_rows)
                frame = pd.DataFrame({name: piece.column(i).to_pandas() for i, name in enumerate(names)})
                rows = np.arange(done + 1, done + piece.num_rows + 1, dtype=np.int64)
                done += piece.num_rows
                yield Chunk(frame, rows)
    finally:
        reader.close()
    yield from _tolerant_chunks(path, codec, delimiter, names, skip, chunk_rows, done)


def _decoded(records: Iterator[list[str]], path: Path, codec: str) -> Iterator[list[str]]:
    """Turn a decoding failure met while reading into a one-line error (full reads validate beforehand)."""
    try:
        yield from records
    except UnicodeDecodeError as exc:
        raise InputError(f"{path} is not valid {codec} ({exc.reason}); set sources.encoding to the file's encoding") from None


def _tolerant_chunks(
    path: Path, codec: str, delimiter: str, names: list[str], skip: int, chunk_rows: int, start: int
) -> Iterator[Chunk]:
    """Read records ``start + 1 ...`` with the csv module, fitting each to the header width."""
    # Survey answers can exceed the csv module's default 128 KiB field limit;
    # over-long cells are truncated later, with a ledger note.
    csv.field_size_limit(max(csv.field_size_limit(), 2**31 - 1))
    width = len(names)
    with path.open(encoding=codec, newline="") as handle:
        # strict=False reads quotes exactly as pyarrow does, so record counts agree
        reader = csv.reader(handle, delimiter=delimiter, quotechar='"', doublequote=True, strict=False)
        # blank and whitespace-only lines are no records (for one column, only blank ones: pyarrow keeps the rest)
        records = (r for r in reader if r and not (width > 1 and len(r) == 1 and not r[0].strip()))
        number = start
        builder = ChunkBuilder(names, chunk_rows)
        for record in _decoded(itertools.islice(records, skip + 1 + start, None), path, codec):
            number += 1
            if len(record) < width:
                record.extend([""] * (width - len(record)))
            elif len(record) > width:
                extra = record[width:]
                del record[width:]
                if any(field.strip() for field in extra):
                    builder.flag(
                        number, "ragged_row",
                        f"record {number} has {width + len(extra)} fields but the header has {width}; "
                        f"kept the first {width}, dropped {preview(extra, delimiter)!r}",
                    )
            if chunk := builder.add(record, number):
                yield chunk
        if chunk := builder.flush():
            yield chunk
