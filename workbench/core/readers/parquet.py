"""Parquet files through pyarrow, read in record batches.

Text columns must hold text (Arrow ``string``, ``large_string``,
``string_view``, a dictionary of those, or all-null); anything else is refused
with the column's Arrow type, since casting numbers to "answers" would hide a
wrongly chosen column. Other columns are cast to strings (Arrow's cast:
``1.0`` -> ``"1"``, ``true`` -> ``"true"``); nulls become ``""``.
"""

from __future__ import annotations

import json
from collections.abc import Iterator
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.parquet as pq

from workbench.core.corpus import ImportReport
from workbench.core.errors import InputError
from workbench.core.readers.base import Chunk, Opened, repair_header
from workbench.core.readers.files import check_readable_file, sha256_of
from workbench.core.settings import Source


def is_text_type(kind: pa.DataType) -> bool:
    if pa.types.is_dictionary(kind):
        return is_text_type(kind.value_type)
    return (
        pa.types.is_string(kind)
        or pa.types.is_large_string(kind)
        or pa.types.is_string_view(kind)
        or pa.types.is_null(kind)
    )


def _as_text(column: pa.ChunkedArray | pa.Array) -> pa.Array | pa.ChunkedArray:
    try:
        text = pc.cast(column, pa.large_string())
    except (pa.ArrowNotImplementedError, pa.ArrowInvalid):
        # nested or binary values: compact JSON / decoded text, one value at a time
        text = pa.array(
            ["" if v is None else (json.dumps(v, ensure_ascii=False, default=str) if not isinstance(v, bytes)
             else v.decode("utf-8", "replace")) for v in column.to_pylist()],
            type=pa.large_string(),
        )
    return pc.fill_null(text, "")


def open_parquet(
    source: Source, report: ImportReport, *, text_columns: list[str], chunk_rows: int, full: bool = True
) -> Opened:
    path = Path(source.path)
    check_readable_file(path, "Parquet file")
    try:
        handle = pq.ParquetFile(path)
        schema = handle.schema_arrow
    except (pa.ArrowException, OSError) as exc:
        raise InputError(f"{path} is not a readable Parquet file ({exc}); it may be truncated or another format") from None
    raw_names = list(schema.names)
    names, duplicated, notes = repair_header(raw_names)
    report.columns = names
    report.notes.extend(notes)
    report.sha256 = sha256_of(path) if full else ""
    for position, name in enumerate(names):
        if name in text_columns and not is_text_type(schema.field(position).type):
            raise InputError(
                f"{path}: text column '{name}' holds {schema.field(position).type} values, not text; "
                "name the column that holds the answers in columns.text, or store this one as strings"
            )
    rows = handle.metadata.num_rows if handle.metadata is not None else 0
    return Opened(columns=names, chunks=_chunks(path, handle, names, chunk_rows), duplicated=duplicated, expected_rows=rows)


def _chunks(path: Path, handle: pq.ParquetFile, names: list[str], chunk_rows: int) -> Iterator[Chunk]:
    done = 0
    try:
        for batch in handle.iter_batches(batch_size=chunk_rows):
            arrays = [_as_text(batch.column(i)) for i in range(batch.num_columns)]
            frame = pd.DataFrame({name: pd.Series(array.to_pandas(), dtype=str) for name, array in zip(names, arrays)})
            rows = np.arange(done + 1, done + batch.num_rows + 1, dtype=np.int64)
            done += batch.num_rows
            yield Chunk(frame, rows)
    except (pa.ArrowException, OSError) as exc:
        raise InputError(f"{path}: cannot read row group after record {done:,} ({exc}); the file may be damaged") from None
    finally:
        handle.close()
