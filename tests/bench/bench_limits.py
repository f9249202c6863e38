"""The sizes the README's "Limits" section states: a whole headless run on a large invented export.

Run on demand (not part of the test suite)::

    python tests/bench/bench_limits.py [--respondents 100000] [--questions 2] [--long-cell]

Writes a seeded CSV export (an id, a country, ``--questions`` open-ended columns of 0-25 words in
English or German, about one cell in ten empty) and a study, runs ``termloom run`` on it in a child
process, and prints the file size, records, answers, wall time per stage (from the manifest), the
child's peak resident memory and whether ``termloom verify`` passes. ``--long-cell`` adds one
answer of 3,000,000 characters (cut to 1,000,000 by ingest, with a ledger entry).
"""

from __future__ import annotations

import argparse
import json
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

WORDS = (
    "the train was late again but the staff were friendly and the cabin clean coffee cold bed short "
    "view quiet noisy ticket expensive cheap seat window breakfast dinner night sleep station platform "
    "der Zug war wieder spät aber das Personal freundlich und die Kabine sauber Kaffee kalt Bett kurz "
    "Aussicht ruhig laut Fahrkarte teuer billig Sitz Fenster Frühstück Abendessen Nacht Schlaf Bahnhof"
).split()


def write_export(path: Path, respondents: int, questions: int, long_cell: bool, seed: int = 3) -> int:
    """The CSV export; returns the number of non-empty answer cells."""
    rng = np.random.default_rng(seed)
    english, german = WORDS[: len(WORDS) // 2], WORDS[len(WORDS) // 2 :]
    answers = 0
    with path.open("w", encoding="utf-8", newline="") as handle:
        handle.write("rid,country," + ",".join(f"q{i + 1}" for i in range(questions)) + "\n")
        for number in range(1, respondents + 1):
            german_speaker = number % 3 == 0
            pool = german if german_speaker else english
            cells = []
            for _ in range(questions):
                length = 0 if rng.random() < 0.1 else int(rng.integers(1, 26))
                answers += length > 0
                cells.append(" ".join(pool[i] for i in rng.integers(0, len(pool), length)))
            if long_cell and number == 1:
                cells[0] = "word " * 600_000
            country = "DE" if german_speaker else ("UK", "IE", "US")[number % 3]
            handle.write(f"r{number},{country}," + ",".join(cells) + "\n")
    return answers


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--respondents", type=int, default=100_000)
    parser.add_argument("--questions", type=int, default=2)
    parser.add_argument("--long-cell", action="store_true")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory(prefix="termloom-limits-") as name:
        folder = Path(name)
        data = folder / "export.csv"
        answers = write_export(data, args.respondents, args.questions, args.long_cell)
        texts = ", ".join(f'"q{i + 1}"' for i in range(args.questions))
        study = folder / "limits.study.toml"
        study.write_text(
            f'[[sources]]\npath = "export.csv"\n[columns]\nid = "rid"\ntext = [{texts}]\ngroups = ["country"]\n'
            '[languages]\nexpected = ["en", "de"]\n[compare]\nbootstrap = 50\n',
            encoding="utf-8",
        )
        out = folder / "out"
        began = time.perf_counter()
        result = subprocess.run([sys.executable, "-m", "workbench", "-q", "run", str(study), "--out", str(out)],
                                capture_output=True, text=True)
        seconds = time.perf_counter() - began
        peak = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024  # KiB on Linux
        print(f"export: {data.stat().st_size / 1e6:.1f} MB, {args.respondents:,} records, {answers:,} non-empty answer cells")
        if result.returncode:
            print(f"run failed ({result.returncode}): {result.stderr.strip()}")
            return 1
        manifest = json.loads((out / "manifest.json").read_text(encoding="utf-8"))
        counts = manifest["ledger"]["counts"]
        print(f"run: {seconds:.0f} s wall, peak memory {peak:,.0f} MiB; ledger rows {counts['row']}, answers {counts['answer']}")
        print("stages: " + ", ".join(f"{k} {v:.1f} s" for k, v in manifest["timings"].items()))
        print(f"reasons: {manifest['ledger']['reasons']}")
        verify = subprocess.run([sys.executable, "-m", "workbench", "verify", str(out)], capture_output=True, text=True)
        print(f"verify: {(verify.stdout + verify.stderr).strip().splitlines()[-1]}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
