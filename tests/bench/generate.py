"""Seeded generator of realistic synthetic survey answers for the end-to-end benchmark.

The answers are composed from the demo survey's phrase banks
(``demo_texts/phrase_bank.py``) with the demo generator's own machinery
(``demo_texts/make_demo.py``: respondents' countries, questionnaire languages,
answers written in another language, topics, length classes, non-answers,
typos, emoji, mixed languages, personal data, case and white-space slips) —
imported, not copied. What this file adds is scale:

* respondents are drawn in batches and written as they are made, so 1M
  answers never sit in memory as Python objects;
* countries keep the demo's proportions (DE 17 %, FR 15 %, PL 11 % ...), so
  the nine languages are mixed as in the demo;
* the demo's guarantee that long answers never repeat is switched off
  (it is a property of a 1,500-person demo, not of a survey of millions);
* pasted copies are planted at scale: 1.5 % of content answers repeat a recent
  answer of another respondent in the same questionnaire language, and 0.3 %
  of respondents paste their first answer into the second question;
* one more typo pass on 6 % of content answers gives the vocabulary the long
  tail of one-off spellings real open answers have.

Shares per question (from the demo generator; common practice for online
surveys, not measured on a real one): empty cell 5 % / 7 %, a non-answer
phrase ("nothing", "nada") 4 % / 7 %, punctuation, keyboard mash or emoji only
2.5 %. The share of distinct cleaned answers this produces is printed by
:func:`describe` (about half at 100k answers: short answers repeat, as in real
surveys).

Writes into a folder:

``survey.csv``          one row per respondent, the demo's columns (UTF-8, ``,``)
``bench.study.toml``    a study naming the columns and the nine languages;
                        every other setting is termloom's default
``truth.csv``           one row per non-empty answer: ``answer_id``
                        (``<respondent_id>|<question>``, as termloom builds it),
                        ``language`` (the language it is written in; ``und`` for
                        punctuation, mash and emoji-only answers), ``kind``
                        (``content``, ``non_answer``, ``junk``, ``copy``)
``generated.json``      the parameters and counts, so a folder is reused only
                        when it was made with the same ones

Usage::

    python tests/bench/generate.py 100000 OUT_DIR [--seed 20251104]
"""

from __future__ import annotations

import argparse
import csv
import importlib.util
import json
import math
import random
import sys
import time
from collections import deque
from pathlib import Path
from types import ModuleType

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "demo_texts"
SEED = 20251104
#: Bumped when the output for a given (answers, seed) changes.
GENERATOR_VERSION = 1
SURVEY = "survey.csv"
STUDY = "bench.study.toml"
TRUTH = "truth.csv"
INFO = "generated.json"

COPY_RATE = 0.015
SAME_RESPONDENT_RATE = 0.003
EXTRA_TYPO_RATE = 0.06
BATCH = 5000


def load_demo() -> ModuleType:
    """``demo_texts/make_demo.py`` as a module (it loads the phrase bank beside itself)."""
    spec = importlib.util.spec_from_file_location("termloom_bench_make_demo", DEMO / "make_demo.py")
    assert spec and spec.loader
    module = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = module  # dataclasses look their module up while the class is built
    spec.loader.exec_module(module)
    return module


def _draw(demo: ModuleType, rng: random.Random, first: int, count: int, factor: dict[str, float]) -> list:
    """``count`` respondents, countries in the demo's proportions (the demo's own draw, unshuffled)."""
    countries = [c for c, _n in demo.COUNTRIES]
    shares = [n for _c, n in demo.COUNTRIES]
    people = []
    for number in range(first, first + count):
        country = rng.choices(countries, weights=shares)[0]
        age = demo.pick(rng, demo.AGE_BANDS)
        wave = demo.WAVES[0] if rng.random() < 0.51 else demo.WAVES[1]
        lang = demo.pick(rng, demo.INTERVIEW_LANGS[country])
        raw = demo.AGE_WEIGHT[age] * factor[country] * math.exp(rng.gauss(0.0, 0.35))
        answer_lang = rng.choice(demo.OTHER_LANGUAGE[lang]) if rng.random() < demo.MISLANGUAGED_RATE else lang
        weight = round(min(3.0, max(0.3, raw)), 3)
        people.append(demo.Respondent(f"R{number:08d}", country, age, wave, lang, weight, answer_lang))
    return people


def _kind(truth: dict | None) -> str:
    if not truth:
        return "content"
    tags = truth["tags"]
    if "non_answer" in tags:
        return "non_answer"
    if "mash" in tags or "emoji_only" in tags:
        return "junk"
    return "content"


def generate(n_answers: int, out_dir: Path, seed: int = SEED) -> dict:
    """Write the survey, study, truth and info files for about ``n_answers`` non-empty answers.

    Respondents are added until the non-empty answers reach ``n_answers``
    (the last respondent may add one more). Returns the info written to
    ``generated.json``.
    """
    demo = load_demo()
    bank = demo.load_bank()
    out_dir = Path(out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    rng = random.Random(seed)
    composer = demo.Composer(rng, bank)
    composer.UNIQUE_FROM = 10**9  # long answers may repeat at scale
    factor = {c: round(rng.uniform(0.75, 1.3), 3) for c, _n in demo.COUNTRIES}
    recent: dict[str, deque] = {}
    begin = time.perf_counter()
    made = respondents = 0
    kinds: dict[str, int] = {}
    languages: dict[str, int] = {}
    with open(out_dir / SURVEY, "w", encoding="utf-8", newline="") as survey, \
            open(out_dir / TRUTH, "w", encoding="utf-8", newline="") as truth_file:
        rows = csv.writer(survey, lineterminator="\n")
        truths = csv.writer(truth_file, lineterminator="\n")
        rows.writerow(demo.COLUMNS)
        truths.writerow(["answer_id", "language", "kind"])
        while made < n_answers:
            # About 1.8 non-empty answers per respondent: draw little more than needed.
            size = max(1, min(BATCH, math.ceil((n_answers - made) / 1.75)))
            people = _draw(demo, rng, respondents + 1, size, factor)
            demo.fill_answers(rng, people, composer)
            demo.surface_mess(rng, people, composer)
            for r in people:
                if made >= n_answers:
                    break
                respondents += 1
                for column in demo.QUESTIONS:
                    text = r.answers.get(column, "")
                    if not text:
                        continue
                    t = r.truth.get(column)
                    kind = _kind(t)
                    if kind == "content":
                        pool = recent.setdefault(r.interview_lang, deque(maxlen=2000))
                        roll = rng.random()
                        if column == "q_improve" and roll < SAME_RESPONDENT_RATE and r.answers.get("q_liked"):
                            text = r.answers["q_liked"]
                            t = r.truth.get("q_liked") or t
                            kind = "copy"
                        elif roll < COPY_RATE + SAME_RESPONDENT_RATE and pool:
                            text, t = pool[rng.randrange(len(pool))]
                            kind = "copy"
                        else:
                            if rng.random() < EXTRA_TYPO_RATE:
                                text = demo.add_typo(rng, text)
                            pool.append((text, t))
                        r.answers[column] = text
                    language = (t or {}).get("language", "und")
                    rows_id = f"{r.rid}|{column}"
                    truths.writerow([rows_id, language, kind])
                    kinds[kind] = kinds.get(kind, 0) + 1
                    languages[language] = languages.get(language, 0) + 1
                    made += 1
                rows.writerow([r.rid, r.country, r.age_band, r.wave, r.interview_lang, f"{r.weight:.3f}",
                               r.answers.get("q_liked", ""), r.answers.get("q_improve", "")])
    (out_dir / STUDY).write_text(study_text(n_answers, seed), encoding="utf-8")
    info = {
        "generator": GENERATOR_VERSION, "requested": n_answers, "seed": seed, "answers": made,
        "respondents": respondents, "kinds": kinds, "languages": dict(sorted(languages.items())),
        "seconds": round(time.perf_counter() - begin, 1),
    }
    (out_dir / INFO).write_text(json.dumps(info, indent=2) + "\n", encoding="utf-8")
    return info


def study_text(n_answers: int, seed: int) -> str:
    """The benchmark's study: the survey's columns and languages, every other setting termloom's default."""
    return f"""# Benchmark study written by tests/bench/generate.py ({n_answers:,} answers, seed {seed}).
# Only the data description is set; every stage runs with termloom's defaults.

[study]
name = "benchmark {n_answers}"

[[sources]]
path = "{SURVEY}"

[columns]
id = "respondent_id"
text = ["q_liked", "q_improve"]
groups = ["country", "age_band", "wave"]
weight = "design_weight"
language_hint = "interview_lang"

[languages]
expected = ["en", "de", "fr", "es", "it", "pl", "nl", "pt", "sv"]
"""


def ensure(n_answers: int, out_dir: Path, seed: int = SEED) -> dict:
    """Generate into ``out_dir`` unless it already holds the same (version, answers, seed)."""
    info_path = Path(out_dir) / INFO
    if info_path.is_file() and (Path(out_dir) / SURVEY).is_file():
        info = json.loads(info_path.read_text(encoding="utf-8"))
        if (info.get("generator"), info.get("requested"), info.get("seed")) == (GENERATOR_VERSION, n_answers, seed):
            return info
    return generate(n_answers, out_dir, seed)


def describe(out_dir: Path) -> str:
    """Counts and shares of a generated folder, one line each (reads the truth file and the survey)."""
    import pandas as pd

    truth = pd.read_csv(Path(out_dir) / TRUTH, dtype=str, keep_default_na=False)
    survey = pd.read_csv(Path(out_dir) / SURVEY, dtype=str, keep_default_na=False)
    texts = pd.concat([survey["q_liked"], survey["q_improve"]])
    texts = texts[texts.str.strip() != ""]
    words = texts.str.split().str.len()
    lines = [
        f"answers {len(truth):,} from {len(survey):,} respondents; distinct texts {texts.nunique() / len(texts):.1%}",
        "kinds: " + ", ".join(f"{k} {v / len(truth):.1%}" for k, v in truth["kind"].value_counts().items()),
        "languages: " + ", ".join(f"{k} {v / len(truth):.1%}" for k, v in truth["language"].value_counts().items()),
        f"words per answer: median {words.median():.0f}, mean {words.mean():.1f}, 90th percentile {words.quantile(0.9):.0f}",
    ]
    return "\n".join(lines)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n", 1)[0])
    parser.add_argument("answers", type=int, help="number of non-empty answers, e.g. 10000, 100000, 1000000")
    parser.add_argument("out", type=Path, help="folder to write into")
    parser.add_argument("--seed", type=int, default=SEED)
    args = parser.parse_args(argv)
    info = generate(args.answers, args.out, args.seed)
    print(f"wrote {info['answers']:,} answers of {info['respondents']:,} respondents to {args.out} in {info['seconds']} s")
    print(describe(args.out))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
