"""On-demand benchmark of the terms stage: `python tests/bench/bench_terms.py [--answers N] [--languages en,de]`.

Reports, side by side in one run:

* lemma-table build time (spacy-lookups-data -> SQLite, once per version) and open time;
  simplemma trie build and open time;
* spaCy's own route for comparison: ``spacy.blank`` + ``Lemmatizer(mode="lookup")`` +
  ``nlp.initialize()`` (its load time) and ``nlp.pipe`` throughput;
* terms-stage throughput (answers/s, wall and CPU) on short answers per language;
* lemma accuracy on tests/data/lemma_gold.tsv (Universal Dependencies gold lemmas);
* agreement of our lemmas with an independent lemmatiser on real text: the most frequent
  words of each language (wordfreq, frequency-weighted) and chatterbot-corpus sentences;
* overlap of our effective stop list with the stopwordsiso list (reported, not judged).

Never part of the test suite; no timing is asserted anywhere.
"""

from __future__ import annotations

import argparse
import os
import random
import sys
import tempfile
import time
from collections import defaultdict
from importlib import resources
from pathlib import Path

HERE = Path(__file__).resolve().parent
GOLD = HERE.parent / "data" / "lemma_gold.tsv"
CHATTERBOT = {"en": "english", "de": "german", "fr": "french", "es": "spanish", "it": "italian", "pt": "portuguese",
              "nl": "dutch", "ru": "russian", "sv": "swedish", "tr": "turkish"}  # fmt: skip


def chatterbot_sentences(lang: str) -> list[str]:
    import yaml

    if lang not in CHATTERBOT:
        return []
    folder = Path(str(resources.files("chatterbot_corpus") / "data" / CHATTERBOT[lang]))
    out: list[str] = []
    for path in sorted(folder.glob("*.yml")):
        data = yaml.safe_load(path.read_text(encoding="utf-8")) or {}
        for conversation in data.get("conversations", []) or []:
            out.extend(str(x) for x in conversation if x)
    return out


def wordfreq_words(lang: str, n: int) -> list[tuple[str, float]]:
    import wordfreq

    words = wordfreq.top_n_list(lang, n)
    if lang == "el":  # wordfreq case-folds Greek final sigma to σ
        words = [w[:-1] + "ς" if w.endswith("σ") else w for w in words]
    return [(w, wordfreq.word_frequency(w, lang)) for w in words if w.isalpha()]


def gold_rows() -> dict[str, list[tuple[str, str, str]]]:
    rows: dict[str, list[tuple[str, str, str]]] = defaultdict(list)
    for line in GOLD.read_text(encoding="utf-8").splitlines():
        if line and not line.startswith("#"):
            lang, form, lemma, upos, _source = line.split("\t")
            rows[lang].append((form, lemma, upos))
    return rows


def gold_match(predicted: str, gold: str, upos: str, lang: str) -> bool:
    from workbench.core.lemmas import lowercase

    p, g = lowercase(predicted, lang), lowercase(gold, lang)
    # UD_Turkish-IMST gives verb stems; dictionaries cite the -mak/-mek infinitive.
    return p == g or (lang == "tr" and upos == "VERB" and p in (g + "mak", g + "mek"))


def answers_for(lang: str, n: int, seed: int = 7) -> list[str]:
    """Short answers: real sentences (chatterbot) cut to 2-12 words, or Zipf-weighted word runs."""
    rng = random.Random(seed)
    sentences = chatterbot_sentences(lang)
    if len(sentences) >= 200:
        out = []
        for _ in range(n):
            words = rng.choice(sentences).split()
            out.append(" ".join(words[: rng.randint(2, 12)]))
        return out
    vocab = wordfreq_words(lang, 5000)
    words = [w for w, _ in vocab]
    weights = [f for _, f in vocab]
    return [" ".join(rng.choices(words, weights, k=rng.randint(2, 12))) for _ in range(n)]


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--answers", type=int, default=20000, help="short answers per language for the speed test")
    parser.add_argument("--languages", default="", help="comma-separated codes (default: every profile)")
    args = parser.parse_args()

    cache = Path(tempfile.mkdtemp(prefix="termloom-bench-"))
    os.environ["TERMLOOM_CACHE_DIR"] = str(cache)

    import pandas as pd
    import spacy
    import stopwordsiso

    from workbench.core import lemmas
    from workbench.core.decisions import Decisions
    from workbench.core.ledger import Ledger
    from workbench.core.lemmas import LookupLemmatiser, SimplemmaLemmatiser, lowercase, make_lemmatiser, open_table
    from workbench.core.profiles import available_languages, load_profile
    from workbench.core.progress import Reporter
    from workbench.core.settings import study_from_dict
    from workbench.core.terms import extract_terms, make_termer

    codes = [c for c in args.languages.split(",") if c] or available_languages()
    gold = gold_rows()
    print(f"cache folder {cache} (fresh); {args.answers:,} answers per language; spaCy {spacy.__version__}")
    print()
    header = (
        f"{'lang':4} {'backend':26} {'build s':>7} {'open s':>7} {'spacy-pipe load s':>17} "
        f"{'ours ans/s':>10} {'cpu ans/s':>9} {'warm cpu/s':>10} {'spacy-pipe ans/s':>16} {'gold acc':>8} {'n':>3} "
        f"{'agree wf':>8} {'agree cb':>8} {'vs':>9} {'stop∩iso':>8}"
    )
    print(header)
    print("-" * len(header))
    for code in codes:
        profile = load_profile(code)
        backend = profile.lemmatizer + ("+simplemma" if profile.lemma_fallback == "simplemma" else "")
        study = study_from_dict({"sources": [{"path": "x.csv"}], "languages": {"expected": [code]}})

        # 1. persistent forms: build (fresh cache) then open again
        build = open_s = 0.0
        if profile.lemmatizer == "spacy-lookup":
            lemmas._open_table.cache_clear()
            table = open_table(profile.spacy_code, profile.lookup_tables)
            build = table.build_seconds
            lemmas._open_table.cache_clear()
            begin = time.perf_counter()
            open_table(profile.spacy_code, profile.lookup_tables)
            open_s = time.perf_counter() - begin
        if profile.lemmatizer == "simplemma" or profile.lemma_fallback == "simplemma":
            begin = time.perf_counter()
            SimplemmaLemmatiser(code).lemmas(["test"])
            build += time.perf_counter() - begin
            lemmas._simplemma_lemmatizer.cache_clear()
            begin = time.perf_counter()
            SimplemmaLemmatiser(code).lemmas(["test"])
            open_s += time.perf_counter() - begin

        # 2. spaCy's own lookup lemmatiser pipe, for comparison (where it has a plain table)
        texts = answers_for(code, args.answers)
        pipe_load = pipe_speed = float("nan")
        if "lemma_lookup" in lemmas.available_tables(profile.spacy_code):
            try:
                begin = time.perf_counter()
                nlp = spacy.blank(profile.spacy_code)
                nlp.add_pipe("lemmatizer", config={"mode": "lookup"})
                nlp.initialize()
                pipe_load = time.perf_counter() - begin
                begin = time.perf_counter()
                for doc in nlp.pipe(texts, batch_size=1000):
                    [t.lemma_ for t in doc]
                pipe_speed = len(texts) / (time.perf_counter() - begin)
            except Exception as exc:  # noqa: BLE001 - a comparison column, not our code
                print(f"  ({code}: spaCy lookup pipe failed: {type(exc).__name__})")

        # 3. our terms stage on the same answers (first run: cold token caches)
        frame = pd.DataFrame(
            {
                "answer_id": [f"a{i}|q" for i in range(len(texts))],
                "clean_text": texts,
                "language": code,
                "enters_weighting": True,
                "source": "bench",
                "row": range(1, len(texts) + 1),
            }
        )
        extract_terms(frame.head(50), study, {code: profile}, Decisions(), Ledger(), Reporter())  # builds the pipeline
        wall, cpu = time.perf_counter(), time.process_time()
        extract_terms(frame, study, {code: profile}, Decisions(), Ledger(), Reporter())
        ours = len(texts) / (time.perf_counter() - wall)
        ours_cpu = len(texts) / max(time.process_time() - cpu, 1e-9)
        # warm: a second batch of new answers from the same source, token caches already filled
        frame["clean_text"] = answers_for(code, args.answers, seed=8)
        cpu = time.process_time()
        extract_terms(frame, study, {code: profile}, Decisions(), Ledger(), Reporter())
        warm_cpu = len(texts) / max(time.process_time() - cpu, 1e-9)

        # 4. gold accuracy of the lemmatiser (no overrides)
        lemmatiser = make_lemmatiser(profile)
        rows = gold.get(code, [])
        predicted = lemmatiser.lemmas([f for f, _, _ in rows])
        accuracy = sum(gold_match(p, g, u, code) for p, (_, g, u) in zip(predicted, rows, strict=True)) / max(len(rows), 1)

        # 5. agreement with an independent lemmatiser on real text
        if profile.lemmatizer == "simplemma":
            other_name = "spacy tab" if lemmas.available_tables(profile.spacy_code) else "-"
            if other_name == "-":
                other = None
            else:
                tables = ["lemma_lookup"] if "lemma_lookup" in lemmas.available_tables(profile.spacy_code) else lemmas.available_tables(profile.spacy_code)
                other = LookupLemmatiser(open_table(profile.spacy_code, tables))
        else:
            other_name, other = "simplemma", SimplemmaLemmatiser(code)
        agree_wf = agree_cb = float("nan")
        if other is not None:
            vocab = wordfreq_words(code, 5000)
            forms = [w for w, _ in vocab]
            ours_l, theirs = lemmatiser.lemmas(forms), other.lemmas(forms)
            total = sum(f for _, f in vocab)
            agree_wf = sum(f for (_, f), a, b in zip(vocab, ours_l, theirs, strict=True) if lowercase(a, code) == lowercase(b, code)) / total
            termer = make_termer(code, profile, study, Decisions())
            tokens = [t.text for s in chatterbot_sentences(code) for t in termer.tokenizer(s) if t.text.isalpha()]
            if tokens:
                a_l, b_l = lemmatiser.lemmas(tokens), other.lemmas(tokens)
                agree_cb = sum(lowercase(a, code) == lowercase(b, code) for a, b in zip(a_l, b_l, strict=True)) / len(tokens)

        # 6. stop-list overlap with stopwordsiso (share of our effective list found in theirs)
        stops = make_termer(code, profile, study, Decisions()).stop_terms
        iso = {lowercase(w, code) for w in stopwordsiso.stopwords(code)} if stopwordsiso.has_lang(code) else set()
        overlap = len(stops & iso) / len(stops) if stops and iso else float("nan")

        print(
            f"{code:4} {backend:26} {build:7.2f} {open_s:7.3f} {pipe_load:17.2f} {ours:10,.0f} {ours_cpu:9,.0f} {warm_cpu:10,.0f} "
            f"{pipe_speed:16,.0f} {accuracy:8.2f} {len(rows):3d} {agree_wf:8.3f} {agree_cb:8.3f} {other_name:>9} {overlap:8.2f}",
            flush=True,
        )
    print()
    print("build s / open s: lemma table (SQLite) and simplemma trie, first build into a fresh cache, then reopen.")
    print("spacy-pipe: spacy.blank + Lemmatizer(mode='lookup') + initialize, then nlp.pipe over the same answers.")
    print("ours ans/s: extract_terms on the same answers, wall clock; cpu ans/s: process CPU time (machine load removed);")
    print("            warm cpu/s: a second batch of new answers once the per-token caches hold the vocabulary.")
    print("agree wf: frequency-weighted share of the 5,000 most frequent words (wordfreq) where our lemma equals the")
    print("          other lemmatiser's ('vs'); agree cb: share of tokens of chatterbot-corpus sentences.")
    print("stop∩iso: share of our effective stop list also in stopwordsiso's list (reported, not judged).")
    return 0


if __name__ == "__main__":
    sys.exit(main())
