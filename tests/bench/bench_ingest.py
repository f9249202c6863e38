"""Benchmark: ingest of a wide CSV, side by side with plain pandas and pyarrow reads of the same file.

Run on demand (not part of the test suite)::

    python tests/bench/bench_ingest.py [--sizes 100000,1000000] [--repeats 3] [--ragged] [--formats 20000]

A seeded synthetic survey export is written to a temporary folder: an id,
two open-ended questions (0-13 words each, so some cells are empty), two
group columns, a design weight and an interview-language column (about 95
bytes per row). Each reader runs in a fresh child process, ``--repeats``
times, alternating; the table shows the median seconds, rows per second, the
child's peak resident memory, and the ratio to ``pandas.read_csv(dtype=str,
keep_default_na=False)`` (which only parses: no ledger, no answers table).

``termloom ingest`` is the whole stage: encoding check and SHA-256 pass,
parsing, one answer per non-empty cell, ids, weights, hints, groups and one
ledger event per row and per answer. ``--ragged`` adds one record with an extra
field a tenth of the way in, which moves the rest of the file to the
standard-library csv reader. ``--formats N`` also writes the first N rows as
JSON Lines, Parquet and XLSX and compares ingest of each with
``pandas.read_json(lines=True)``, ``pandas.read_parquet`` and
``pandas.read_excel`` (openpyxl).
"""

from __future__ import annotations

import argparse
import json
import statistics
import subprocess
import sys
import tempfile
from pathlib import Path

import numpy as np
import pandas as pd

WORDS = np.array(
    "the train was late but staff were friendly and the bed comfortable coffee cold window view quiet noisy "
    "Zug Verspätung freundlich Bett bequem café froid calme rumoroso treno pociąg".split()
)

CHILD = r"""
import json, resource, sys, time
kind, path = sys.argv[1], sys.argv[2]
start = time.perf_counter()
if kind.startswith("termloom"):
    from workbench.core.ingest import read_corpus
    from workbench.core.ledger import Ledger
    from workbench.core.progress import Reporter
    from workbench.core.settings import study_from_dict
    study = study_from_dict({"sources": [{"path": path}], "columns": {"id": "id", "text": ["q1", "q2"],
        "groups": ["country", "wave"], "weight": "weight", "language_hint": "lang"}})
    ledger = Ledger()
    start = time.perf_counter()
    corpus = read_corpus(study, ledger, Reporter())
    rows, extra = len(corpus.respondents), f"{len(corpus.answers):,} answers, {len(ledger.events):,} ledger events"
elif kind in ("pandas.read_json", "pandas.read_parquet", "pandas.read_excel"):
    import pandas as pd
    start = time.perf_counter()
    frame = {"pandas.read_json": lambda p: pd.read_json(p, lines=True, dtype=False),
             "pandas.read_parquet": pd.read_parquet,
             "pandas.read_excel": lambda p: pd.read_excel(p, engine="openpyxl")}[kind](path)
    rows, extra = len(frame), ""
elif kind == "pandas.read_csv":
    import pandas as pd
    start = time.perf_counter()
    frame = pd.read_csv(path, dtype=str, keep_default_na=False)
    rows, extra = len(frame), ""
else:
    import pyarrow as pa, pyarrow.csv as pacsv
    start = time.perf_counter()
    names = open(path, encoding="utf-8").readline().strip().split(",")
    table = pacsv.read_csv(path, convert_options=pacsv.ConvertOptions(column_types={n: pa.string() for n in names}))
    rows, extra = table.num_rows, ""
seconds = time.perf_counter() - start
peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024
print(json.dumps({"seconds": seconds, "rows": rows, "peak": peak, "extra": extra}))
"""

READERS = ["termloom ingest", "pandas.read_csv", "pyarrow.csv.read_csv"]


def write_survey(path: Path, n: int, ragged: bool, seed: int = 20240601) -> None:
    rng = np.random.default_rng(seed)

    def sentences() -> list[str]:
        lengths = rng.integers(0, 14, n)
        words = WORDS[rng.integers(0, len(WORDS), int(lengths.sum()))]
        bounds = np.concatenate([[0], np.cumsum(lengths)])
        return [" ".join(words[a:b]) for a, b in zip(bounds[:-1], bounds[1:])]

    frame = pd.DataFrame({
        "id": np.arange(1, n + 1),
        "q1": sentences(),
        "q2": sentences(),
        "country": rng.choice(["DE", "FR", "IT", "ES", "PL"], n),
        "wave": rng.choice(["w1", "w2"], n),
        "weight": np.round(rng.uniform(0.5, 1.5, n), 3),
        "lang": rng.choice(["de", "fr", "it", "es", "pl"], n),
    })
    frame.to_csv(path, index=False)
    if ragged:
        lines = path.read_text(encoding="utf-8").splitlines()
        lines[n // 10] += ",spilled"
        path.write_text("\n".join(lines) + "\n", encoding="utf-8")


def measure(kind: str, path: Path) -> dict:
    out = subprocess.run([sys.executable, "-c", CHILD, kind, str(path)], capture_output=True, text=True, check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def write_formats(csv_path: Path, n: int) -> dict[str, Path]:
    from openpyxl import Workbook

    frame = pd.read_csv(csv_path, dtype=str, keep_default_na=False, nrows=n)
    paths = {fmt: csv_path.with_name(f"survey_{n}.{fmt}") for fmt in ("jsonl", "parquet", "xlsx")}
    frame.to_json(paths["jsonl"], orient="records", lines=True, force_ascii=False)
    frame.to_parquet(paths["parquet"])
    book = Workbook(write_only=True)
    sheet = book.create_sheet("answers")
    sheet.append(list(frame.columns))
    for row in frame.itertuples(index=False):
        sheet.append(list(row))
    book.save(paths["xlsx"])
    return paths


def report_formats(csv_path: Path, n: int, repeats: int) -> None:
    pairs = {"jsonl": "pandas.read_json", "parquet": "pandas.read_parquet", "xlsx": "pandas.read_excel"}
    print(f"\n{n:,} rows in other formats")
    print(f"{'reader':26} {'median s':>9} {'rows/s':>11} {'peak MB':>8} {'ratio':>6}")
    for fmt, path in write_formats(csv_path, n).items():
        ours = [measure("termloom ingest", path) for _ in range(repeats)]
        theirs = [measure(pairs[fmt], path) for _ in range(repeats)]
        base = statistics.median(r["seconds"] for r in theirs)
        for kind, runs in ((f"termloom ingest ({fmt})", ours), (pairs[fmt], theirs)):
            seconds = statistics.median(r["seconds"] for r in runs)
            peak = max(r["peak"] for r in runs) / 1e6
            print(f"{kind:26} {seconds:9.2f} {runs[0]['rows'] / seconds:11,.0f} {peak:8.0f} {seconds / base:6.2f}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", default="100000,1000000")
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--ragged", action="store_true")
    parser.add_argument("--formats", type=int, default=0, help="rows for the JSON Lines / Parquet / XLSX comparison")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as folder:
        for n in [int(s) for s in args.sizes.split(",")]:
            path = Path(folder) / f"survey_{n}.csv"
            write_survey(path, n, args.ragged)
            runs: dict[str, list[dict]] = {kind: [] for kind in READERS}
            for _ in range(args.repeats):
                for kind in READERS:
                    runs[kind].append(measure(kind, path))
            base = statistics.median(r["seconds"] for r in runs["pandas.read_csv"])
            print(f"\n{n:,} rows, {path.stat().st_size / 1e6:.0f} MB{' (one ragged record)' if args.ragged else ''}")
            print(f"{'reader':26} {'median s':>9} {'rows/s':>11} {'peak MB':>8} {'ratio':>6}  notes")
            for kind in READERS:
                seconds = statistics.median(r["seconds"] for r in runs[kind])
                peak = max(r["peak"] for r in runs[kind]) / 1e6
                rows = runs[kind][0]["rows"]
                print(f"{kind:26} {seconds:9.2f} {rows / seconds:11,.0f} {peak:8.0f} {seconds / base:6.2f}  {runs[kind][0]['extra']}")
        if args.formats:
            report_formats(path, args.formats, args.repeats)


if __name__ == "__main__":
    main()
