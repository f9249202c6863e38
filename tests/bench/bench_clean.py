"""Benchmark: the clean stage's speed and the keyboard-mash heuristic on real vocabulary.

Inputs are outside data (chatterbot-corpus utterances; spacy-lookups-data word
lists) or mechanical worst cases; nothing is invented. Reports, side by side:

* clean only, answers/s, 100,000 short answers drawn with repeats and all
  distinct (two utterances joined), against the 10,000/s target for
  clean + identify (bench_identify.py measures the two together);
* the same with every fifth answer carrying an e-mail, a phone number, an
  IBAN or a card number (the published examples of tests/test_pii.py);
* duplicate search over 100,000 distinct long answers (MinHash blocking);
* one answer of 100,000 characters of each pathological shape;
* with ``--vocab``: the share of real words flagged as keyboard mash, for
  every language table in spacy-lookups-data.

Run:  python tests/bench/bench_clean.py [--vocab]
"""

from __future__ import annotations

import os

os.environ.setdefault("OMP_NUM_THREADS", "1")
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import argparse
import gzip
import importlib.util
import json
import random
import time
from pathlib import Path

TARGET = 10_000
PII = [
    "write to jo.roe@example.org",
    "call +44 20 7946 0958",
    "iban GB82 WEST 1234 5698 7654 32",
    "card 4111 1111 1111 1111",
    "see https://example.org/page",
]


def _bench_identify():
    path = Path(__file__).parent / "bench_identify.py"
    spec = importlib.util.spec_from_file_location("bench_identify", path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def _clean(texts: list[str], study, respondents: list[str] | None = None) -> float:
    """CPU seconds of one clean_answers call (the one-core figure even on a shared machine)."""
    from workbench.core.clean import clean_answers
    from workbench.core.decisions import Decisions
    from workbench.core.ledger import Ledger
    from workbench.core.profiles import load_profiles
    from workbench.core.progress import Reporter

    frame = _bench_identify().answers_frame(texts)
    if respondents is not None:
        frame["respondent_id"] = respondents
    begin = time.process_time()
    clean_answers(frame, study, load_profiles(list(study.languages.expected)), Decisions(), Ledger(), Reporter())
    return time.process_time() - begin


def _line(label: str, n: int, seconds: float, target: float | None = TARGET) -> None:
    rate = n / seconds
    ratio = f"{rate / target:5.2f}x target" if target else ""
    print(f"  {label:<44} {n:>8,}  {seconds:7.2f} s  {rate:>10,.0f}/s  {ratio}")


def speed() -> None:
    bi = _bench_identify()
    pairs = bi.load_corpus()
    if not pairs:
        raise SystemExit("chatterbot-corpus is not installed: pip install chatterbot-corpus")
    rng = random.Random(7)
    study = bi.make_study()
    short = [t for t, _ in pairs if bi.bucket(t) in ("1-3", "4-8")]
    long = [t for t, _ in pairs if len(t) >= 30]
    n = 100_000
    repeated = [rng.choice(short) for _ in range(n)]
    distinct = list(dict.fromkeys(f"{rng.choice(short)} {rng.choice(short)}" for _ in range(int(n * 1.2))))[:n]
    with_pii = [f"{t} {PII[i % len(PII)]}" if i % 5 == 0 else t for i, t in enumerate(distinct)]
    long_distinct = list(dict.fromkeys(f"{rng.choice(long)} {rng.choice(long)}" for _ in range(int(n * 1.2))))[:n]
    _clean(short[:100], study)  # warm caches outside the timing
    print("clean stage, CPU time of one process (target for clean + identify: 10,000 answers/s):")
    _line("short answers, drawn with repeats", n, _clean(repeated, study))
    _line("short answers, all distinct", n, _clean(distinct, study))
    _line("short answers, distinct, 1 in 5 with personal data", n, _clean(with_pii, study))
    _line("long answers (>= 30 chars), all distinct", n, _clean(long_distinct, study))

    from workbench.core.duplicates import duplicate_key, find_near_duplicates

    keys = list(dict.fromkeys(duplicate_key(t) for t in long_distinct))
    begin = time.process_time()
    links = find_near_duplicates(keys, [["q"]] * len(keys), study.clean.near_duplicate)
    _line(f"near-duplicate search alone ({len(links)} links)", len(keys), time.process_time() - begin, None)

    print("one pathological answer of ~100,000 characters (whole clean stage):")
    shapes = {
        "letters then @": "a" * 100_000 + "@",
        "dotted labels": "a." * 50_000,
        "digits": "1" * 100_000,
        "digit pairs": "12 " * 33_333,
        "number groups": "1234 5678 x " * 8_333,
        "emoji": "😀" * 100_000,
        "right-to-left": "שלום עולם " * 10_000,
        "lone surrogates": "\ud800a" * 50_000,
        "prose": (pairs[0][0] + " ") * (100_000 // (len(pairs[0][0]) + 1)),
    }
    for label, text in shapes.items():
        seconds = _clean([text], study)
        print(f"  {label:<44} {len(text):>8,} chars  {seconds:7.3f} s cpu")


def vocabulary() -> None:
    import spacy_lookups_data

    from workbench.core.nonanswer import is_keyboard_mash

    folder = Path(spacy_lookups_data.__file__).parent / "data"
    codes = sorted({p.name.split("_", 1)[0] for p in folder.glob("*_lemma_lookup*.json.gz")})
    print("keyboard mash on real words (spacy-lookups-data lemma lookup tables):")
    for code in codes:
        words: set[str] = set()
        for path in sorted(folder.glob(f"{code}_lemma_lookup*.json.gz")):
            with gzip.open(path, "rt", encoding="utf-8") as handle:
                words.update(w.lower() for w in json.load(handle) if isinstance(w, str) and w.isalpha())
        hits = sorted(w for w in words if is_keyboard_mash(w))
        share = len(hits) / max(len(words), 1)
        print(f"  {code:<4} {len(words):>9,} words  {len(hits):>5} flagged  {share:7.3%}  e.g. {', '.join(hits[:6])}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--vocab", action="store_true", help="also check every spacy-lookups-data word list")
    args = parser.parse_args()
    speed()
    if args.vocab:
        vocabulary()


if __name__ == "__main__":
    main()
