"""End-to-end benchmark: termloom against the by-hand baseline and the bare TF-IDF floor, side by side.

Run on demand (not part of the test suite)::

    python tests/bench/bench_pipeline.py [--sizes 10000,100000] [--data DIR] [--baseline-sample 20000]
                                         [--markdown results.md]

For each size, synthetic answers are generated once (``generate.py``, seeded,
cached in ``--data``) and three programs run, one after another, each in its
own child process:

1. **termloom** — ``termloom run bench.study.toml --out ...``: every stage with
   default settings, every export format.
2. **baseline** — what an analyst writes by hand today: pandas ``read_csv``;
   ``langdetect.detect`` per answer (seeded); per detected survey language a
   spaCy blank pipeline with the lookup lemmatiser (``spacy.blank`` +
   ``add_pipe("lemmatizer", config={"mode": "lookup"})`` + ``initialize()``)
   through ``nlp.pipe``, keeping alphabetic non-stop-word lemmas;
   scikit-learn ``TfidfVectorizer(min_df=2)`` per language; pandas CSV export
   of the lemmatised answers and each language's top 30 terms. Above
   ``--baseline-sample`` answers it runs on the first that many answers and the
   per-answer phases are **extrapolated** linearly to the full size (reading the
   file and building the pipelines are measured in full); the table says so.
3. **floor** — pandas ``read_csv`` and a bare ``TfidfVectorizer().fit_transform``
   on the raw texts: no language, no lemmas, no export.

Reported per program: wall time, CPU time (user + system of the child, from
``os.wait4``), answers per second, peak resident set size (``ru_maxrss`` of
the child). Ratios termloom ÷ baseline and termloom ÷ floor are given for
wall and CPU time: on a shared machine the wall clock stretches with other
load, CPU time much less. Language accuracy of termloom and the baseline is
measured against the generator's true languages on the same answers.
termloom's per-stage wall times come from its ``manifest.json``.

Also measured once: ``termloom --help`` (median of 7 starts), the first
screen of ``termloom open`` on the demo study, the lemma-table cache (build
and open time per language, against spaCy's own lookup-table initialisation)
and the progress reports of every stage (updates and the longest silence,
in-process on the smallest size).
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import statistics
import subprocess
import sys
import tempfile
import time
from datetime import date
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parents[1]
sys.path.insert(0, str(HERE))

import generate  # noqa: E402  (the generator beside this file)

LANGUAGES = ["en", "de", "fr", "es", "it", "pl", "nl", "pt", "sv"]
TEXT_COLUMNS = ["q_liked", "q_improve"]


# --------------------------------------------------------------------------- child processes


def child_env() -> dict[str, str]:
    """The environment of every child: as a user's, so compiled bytecode is cached and reused."""
    env = dict(os.environ)
    env.pop("PYTHONDONTWRITEBYTECODE", None)
    return env


def run_child(command: list[str]) -> dict:
    """Run ``command``; wall seconds, CPU seconds and peak RSS (MB) of that child alone."""
    with tempfile.TemporaryFile() as out, tempfile.TemporaryFile() as err:
        began = time.perf_counter()
        process = subprocess.Popen(command, stdout=out, stderr=err, env=child_env())
        _pid, status, usage = os.wait4(process.pid, 0)
        wall = time.perf_counter() - began
        process.returncode = os.waitstatus_to_exitcode(status)
        out.seek(0)
        err.seek(0)
        stdout, stderr = out.read().decode("utf-8", "replace"), err.read().decode("utf-8", "replace")
    if process.returncode != 0:
        raise RuntimeError(f"{' '.join(command)} exited with {process.returncode}:\n{stderr[-3000:]}")
    # ru_maxrss is in KiB on Linux, bytes on macOS.
    rss = usage.ru_maxrss / (2**20 if sys.platform == "darwin" else 2**10)
    return {"wall": wall, "cpu": usage.ru_utime + usage.ru_stime, "rss": rss, "stdout": stdout, "stderr": stderr}


def termloom_command() -> list[str]:
    script = Path(sys.executable).with_name("termloom")
    return [str(script)] if script.is_file() else [sys.executable, "-m", "workbench"]


def _me(*args: str) -> list[str]:
    return [sys.executable, str(Path(__file__).resolve()), *args]


# --------------------------------------------------------------------------- the three programs


def read_answers(survey: Path, limit: int | None = None):  # type: ignore[no-untyped-def]
    """The survey's non-empty answers in file order (respondent, then question), as termloom orders them."""
    import numpy as np
    import pandas as pd

    frame = pd.read_csv(survey, dtype=str, keep_default_na=False)
    ids = frame["respondent_id"].to_numpy()
    parts = []
    for number, column in enumerate(TEXT_COLUMNS):
        texts = frame[column].to_numpy()
        parts.append(pd.DataFrame({"answer_id": ids + f"|{column}", "text": texts,
                                   "order": np.arange(len(frame)) * len(TEXT_COLUMNS) + number}))
    answers = pd.concat(parts, ignore_index=True).sort_values("order", kind="stable")
    answers = answers[answers["text"].str.strip().str.len() > 0].drop(columns="order").reset_index(drop=True)
    return answers if limit is None else answers.head(limit)


def child_baseline(data: Path, out: Path, limit: int | None) -> None:
    """The by-hand baseline (see the module docstring); prints its phase timings as JSON."""
    phases: dict[str, float] = {}
    clock = time.perf_counter()

    def lap(name: str) -> None:
        nonlocal clock
        now = time.perf_counter()
        phases[name] = phases.get(name, 0.0) + now - clock
        clock = now

    import pandas as pd
    import spacy
    from langdetect import DetectorFactory, LangDetectException, detect
    from sklearn.feature_extraction.text import TfidfVectorizer

    DetectorFactory.seed = 0
    lap("import")
    answers = read_answers(data / generate.SURVEY)
    total = len(answers)
    if limit is not None:
        answers = answers.head(limit).copy()
    lap("read")

    def language(text: str) -> str:
        try:
            return detect(text)
        except LangDetectException:
            return "und"

    answers["language"] = [language(t) for t in answers["text"]]
    lap("langdetect")
    answers["lemmas"] = ""
    tops = []
    for code in LANGUAGES:
        texts = answers.loc[answers["language"] == code, "text"]
        if texts.empty:
            continue
        nlp = spacy.blank(code)
        try:
            nlp.add_pipe("lemmatizer", config={"mode": "lookup"})
            nlp.initialize()
        except (ValueError, KeyError, OSError):
            # No plain lookup table for this language (Polish): lower-cased forms instead.
            nlp = spacy.blank(code)
        lap("spacy setup")
        lemmas = [" ".join(t.lemma_.lower() or t.lower_ for t in doc if t.is_alpha and not t.is_stop)
                  for doc in nlp.pipe(texts.tolist(), batch_size=1000)]
        answers.loc[texts.index, "lemmas"] = lemmas
        lap("spacy pipe")
        try:
            vectorizer = TfidfVectorizer(min_df=2)
            matrix = vectorizer.fit_transform(lemmas)
        except ValueError:  # too few answers for min_df
            lap("tfidf")
            continue
        mean = matrix.mean(axis=0).A1
        terms = vectorizer.get_feature_names_out()
        best = mean.argsort()[::-1][:30]
        tops.append(pd.DataFrame({"language": code, "term": terms[best], "mean_tfidf": mean[best]}))
        lap("tfidf")
    out.mkdir(parents=True, exist_ok=True)
    answers.to_csv(out / "answers.csv", index=False)
    if tops:
        pd.concat(tops).to_csv(out / "top_terms.csv", index=False)
    lap("export")
    print(json.dumps({"phases": phases, "answers": len(answers), "total": total}))


def child_floor(data: Path) -> None:
    """The floor: read the survey and fit a bare TfidfVectorizer on the raw texts."""
    began = time.perf_counter()
    from sklearn.feature_extraction.text import TfidfVectorizer

    answers = read_answers(data / generate.SURVEY)
    matrix = TfidfVectorizer().fit_transform(answers["text"].tolist())
    print(json.dumps({"answers": len(answers), "shape": list(matrix.shape), "seconds": time.perf_counter() - began}))


def child_open(study: Path) -> None:
    """Open the terminal UI on a study; print the seconds from process start until its first screen is up."""
    import asyncio

    import psutil

    from workbench.ui.app import TermloomApp

    started = psutil.Process().create_time()

    async def first_screen() -> float:
        app = TermloomApp(study)
        async with app.run_test(size=(120, 40)) as pilot:
            await pilot.pause()
            shown = time.time() - started
            app.exit()
        return shown

    print(json.dumps({"first_screen": asyncio.run(first_screen())}))


def child_lemmas(cache: Path) -> None:
    """Build every survey language's lemma table into an empty cache, then open it; spaCy's own init beside."""
    from workbench.core.lemmas import build_table, table_path
    from workbench.core.profiles import load_profile

    rows = []
    for code in LANGUAGES:
        profile = load_profile(code)
        if profile.lemmatizer != "spacy-lookup":
            rows.append({"language": code, "lemmatizer": profile.lemmatizer})
            continue
        tables = tuple(profile.lookup_tables)
        path = table_path(profile.spacy_code, tables, cache)
        began = time.perf_counter()
        entries = build_table(profile.spacy_code, tables, path)
        built = time.perf_counter() - began
        rows.append({"language": code, "lemmatizer": profile.lemmatizer, "entries": entries, "build": built,
                     "bytes": path.stat().st_size, "tables": list(tables)})
    print(json.dumps(rows))


def child_open_tables(cache: Path) -> None:
    """In a fresh process: open every cached table and look up 1,000 forms (the load time a run pays)."""
    from workbench.core.lemmas import open_table
    from workbench.core.profiles import load_profile

    rows = {}
    for code in LANGUAGES:
        profile = load_profile(code)
        if profile.lemmatizer != "spacy-lookup":
            continue
        began = time.perf_counter()
        table = open_table(profile.spacy_code, tuple(profile.lookup_tables), cache)
        opened = time.perf_counter() - began
        forms = [f"form{i}" for i in range(1000)]
        began = time.perf_counter()
        table.get_many(forms)
        rows[code] = {"open": opened, "lookup_1000": time.perf_counter() - began}
    print(json.dumps(rows))


def child_spacy_lookups() -> None:
    """spaCy's own lookup lemmatiser set-up per language (the cost the cache avoids)."""
    import spacy

    rows = {}
    for code in LANGUAGES:
        began = time.perf_counter()
        nlp = spacy.blank(code)
        blank = time.perf_counter() - began
        try:
            nlp.add_pipe("lemmatizer", config={"mode": "lookup"})
            nlp.initialize()
            init = time.perf_counter() - began - blank
        except (ValueError, KeyError, OSError):
            init = None
        rows[code] = {"blank": blank, "lookup_init": init}
    print(json.dumps(rows))


def child_progress(study: Path, out: Path) -> None:
    """Run in-process with a recording reporter: per stage, how many updates and the longest silence."""
    from workbench.core.pipeline import run_to_folder
    from workbench.core.progress import Reporter
    from workbench.core.settings import load_study

    seen: dict[str, list[float]] = {}
    order: list[str] = []

    def record(stage: str, done: int, total: int, message: str) -> None:
        if stage not in seen:
            order.append(stage)
        seen.setdefault(stage, []).append(time.perf_counter())

    run_to_folder(load_study(study), out, Reporter(callback=record))
    end = time.perf_counter()
    rows = []
    for number, stage in enumerate(order):
        stamps = seen[stage]
        stop = seen[order[number + 1]][0] if number + 1 < len(order) else end
        gaps = [b - a for a, b in zip([*stamps, stop][:-1], [*stamps, stop][1:], strict=True)]
        rows.append({"stage": stage, "updates": len(stamps), "longest_silence": max(gaps) if gaps else 0.0,
                     "seconds": stop - stamps[0]})
    print(json.dumps(rows))


# --------------------------------------------------------------------------- accuracy


def accuracy(truth_path: Path, predicted, ids=None) -> dict:  # type: ignore[no-untyped-def]
    """Share of answers labelled with their true language (``und`` counts as wrong), over answers with one.

    ``all``: every answer whose true language is a language; ``content``: of those,
    the real answers (not non-answer phrases such as "nada").
    """
    import pandas as pd

    truth = pd.read_csv(truth_path, dtype=str, keep_default_na=False)
    merged = truth.merge(predicted.rename(columns={"language": "predicted"}), on="answer_id", how="inner")
    if ids is not None:
        merged = merged[merged["answer_id"].isin(ids)]
    merged = merged[merged["language"] != "und"]
    content = merged[merged["kind"].isin(["content", "copy"])]
    return {
        "all": float((merged["language"] == merged["predicted"]).mean()),
        "content": float((content["language"] == content["predicted"]).mean()),
        "n": len(merged),
    }


# --------------------------------------------------------------------------- measuring one size


def measure_size(size: int, data_root: Path, sample: int, work: Path) -> dict:
    import pandas as pd

    data = data_root / f"answers-{size}"
    info = generate.ensure(size, data)
    study = data / generate.STUDY
    result: dict = {"size": size, "answers": info["answers"], "load_before": os.getloadavg()[0]}
    print(f"\n== {size:,} answers ({data})", flush=True)

    out = work / f"termloom-{size}"
    termloom = run_child([*termloom_command(), "run", str(study), "--out", str(out), "--quiet"])
    manifest = json.loads((out / "manifest.json").read_text(encoding="utf-8"))
    termloom["stages"] = manifest.get("timings", {})
    predicted = pd.read_parquet(out / "corpus" / "answers.parquet", columns=["answer_id", "language"])
    result["termloom"] = termloom
    print(f"termloom: wall {termloom['wall']:.1f} s, cpu {termloom['cpu']:.1f} s, peak {termloom['rss']:.0f} MB", flush=True)

    limit = sample if info["answers"] > sample else None
    base_out = work / f"baseline-{size}"
    baseline = run_child(_me("--child", "baseline", str(data), str(base_out), str(limit or 0)))
    report = json.loads(baseline["stdout"].strip().splitlines()[-1])
    baseline.update(report)
    done = report["answers"]
    if limit is not None:
        # Per-answer phases scale with the answers; reading and pipeline set-up are measured in full.
        scale = report["total"] / done
        fixed = sum(report["phases"].get(k, 0.0) for k in ("import", "read", "spacy setup"))
        variable = sum(v for k, v in report["phases"].items() if k not in ("import", "read", "spacy setup"))
        measured_wall = baseline["wall"]
        baseline["measured_wall"], baseline["measured_cpu"] = measured_wall, baseline["cpu"]
        overhead = max(0.0, measured_wall - fixed - variable)  # interpreter start and exit
        baseline["wall"] = overhead + fixed + variable * scale
        # CPU time scaled by the same share of per-answer work in the measured run.
        share = variable / measured_wall if measured_wall else 1.0
        baseline["cpu"] = baseline["measured_cpu"] * ((1 - share) + share * scale)
    baseline["extrapolated"] = limit is not None
    base_pred = pd.read_csv(base_out / "answers.csv", usecols=["answer_id", "language"], dtype=str, keep_default_na=False)
    sample_ids = set(base_pred["answer_id"])
    result["baseline"] = baseline
    truth = data / generate.TRUTH
    result["accuracy"] = {
        "termloom": accuracy(truth, predicted),
        "termloom_on_sample": accuracy(truth, predicted, sample_ids),
        "baseline": accuracy(truth, base_pred),
    }
    print(f"baseline: wall {baseline['wall']:.1f} s, cpu {baseline['cpu']:.1f} s"
          f"{' (extrapolated from %d answers)' % done if limit else ''}", flush=True)

    floor = run_child(_me("--child", "floor", str(data)))
    result["floor"] = floor
    print(f"floor: wall {floor['wall']:.1f} s, cpu {floor['cpu']:.1f} s, peak {floor['rss']:.0f} MB", flush=True)
    result["load_after"] = os.getloadavg()[0]
    return result


def measure_once(work: Path, smallest: Path) -> dict:
    once: dict = {}
    run_child([*termloom_command(), "--help"])  # bytecode written once, as after an install
    helps = [run_child([*termloom_command(), "--help"]) for _ in range(7)]
    bare = [run_child([sys.executable, "-c", "pass"])["wall"] for _ in range(5)]
    once["help"] = {"median": statistics.median(h["wall"] for h in helps), "min": min(h["wall"] for h in helps),
                    "cpu": statistics.median(h["cpu"] for h in helps), "python_start": statistics.median(bare)}
    print(f"termloom --help: median {once['help']['median']:.2f} s (python itself {once['help']['python_start']:.2f} s)", flush=True)

    demo = ROOT / "demo_texts" / "demo.study.toml"
    with tempfile.TemporaryDirectory() as name:
        # A copy of the demo, so its decision store is not touched.
        folder = Path(name)
        for path in (ROOT / "demo_texts").iterdir():
            if path.suffix in (".csv", ".toml"):
                (folder / path.name).write_bytes(path.read_bytes())
        child = run_child(_me("--child", "open", str(folder / demo.name)))
        shown = json.loads(child["stdout"].strip().splitlines()[-1])["first_screen"]
        once["open"] = {"wall": child["wall"], "first_screen": shown}

    with tempfile.TemporaryDirectory() as name:
        cache = Path(name)
        built = json.loads(run_child(_me("--child", "lemmas", str(cache)))["stdout"].strip().splitlines()[-1])
        opened = json.loads(run_child(_me("--child", "open-tables", str(cache)))["stdout"].strip().splitlines()[-1])
    spacy_init = json.loads(run_child(_me("--child", "spacy-lookups"))["stdout"].strip().splitlines()[-1])
    once["lemmas"] = {"built": built, "opened": opened, "spacy": spacy_init}

    progress = run_child(_me("--child", "progress", str(smallest), str(work / "progress-run")))
    once["progress"] = json.loads(progress["stdout"].strip().splitlines()[-1])
    return once


# --------------------------------------------------------------------------- report


def _s(seconds: float) -> str:
    return f"{seconds:,.1f} s" if seconds < 600 else f"{seconds / 60:,.1f} min"


def markdown(results: list[dict], once: dict) -> str:
    cpus = os.cpu_count()
    lines = [
        f"Measured {date.today().isoformat()} on {platform.machine()} Linux, {cpus} cores, Python "
        f"{platform.python_version()}; load average {results[0]['load_before']:.1f} at the start"
        + (" (a shared machine: wall times stretch with other load; CPU times much less)." if results[0]["load_before"] > (cpus or 1) else "."),
        "",
        "| answers | program | wall | CPU | answers/s (wall) | peak RSS | termloom ÷ it (wall / CPU) | language accuracy |",
        "|---:|---|---:|---:|---:|---:|---:|---:|",
    ]
    for r in results:
        t, b, f = r["termloom"], r["baseline"], r["floor"]
        acc = r["accuracy"]
        for name, m, ratio, acc_text in (
            ("termloom run", t, "", f"{acc['termloom']['all']:.1%}"),
            ("by-hand baseline" + (" (extrapolated)" if b["extrapolated"] else ""), b,
             f"{t['wall'] / b['wall']:.2f} / {t['cpu'] / b['cpu']:.2f}",
             f"{acc['baseline']['all']:.1%} (termloom {acc['termloom_on_sample']['all']:.1%} on the same answers)"),
            ("bare TfidfVectorizer", f, f"{t['wall'] / f['wall']:.1f} / {t['cpu'] / f['cpu']:.1f}", "—"),
        ):
            rss = f"{m['rss']:,.0f} MB" + (f" (on {b['answers']:,})" if m is b and b["extrapolated"] else "")
            lines.append(f"| {r['answers']:,} | {name} | {_s(m['wall'])} | {_s(m['cpu'])} | "
                         f"{r['answers'] / m['wall']:,.0f} | {rss} | {ratio} | {acc_text} |")
    lines += ["", "termloom stages (wall seconds from manifest.json):", "",
              "| answers | " + " | ".join(["ingest", "clean", "identify", "terms", "weigh", "compare", "export"]) + " |",
              "|---:|" + "---:|" * 7]
    for r in results:
        stages = r["termloom"]["stages"]
        lines.append(f"| {r['answers']:,} | " + " | ".join(f"{stages.get(s, 0):.1f}" for s in
                                                          ["ingest", "clean", "identify", "terms", "weigh", "compare", "export"]) + " |")
    h = once.get("help")
    if h:
        lines += ["", f"`termloom --help`: {h['median']:.2f} s median wall of 7 ({h['cpu']:.2f} s CPU; "
                      f"Python alone starts in {h['python_start']:.2f} s)."]
    o = once.get("open")
    if o:
        lines += [f"`termloom open` on the demo study: first screen {o['first_screen']:.2f} s after the process started."]
    lem = once.get("lemmas")
    if lem:
        built = [x for x in lem["built"] if "build" in x]
        opened = lem["opened"]
        spacy_init = lem["spacy"]
        init_total = sum(v["lookup_init"] or 0 for v in spacy_init.values())
        lines += [
            f"Lemma tables: built once per spacy-lookups-data version in {sum(x['build'] for x in built):.1f} s for "
            f"{len(built)} languages ({sum(x['entries'] for x in built):,} forms, {sum(x['bytes'] for x in built) / 2**20:.0f} MB); "
            f"opened in {sum(v['open'] for v in opened.values()) * 1000:.0f} ms in all; spaCy's own lookup "
            f"initialisation of the same languages takes {init_total:.1f} s per process.",
        ]
    prog = once.get("progress")
    if prog:
        lines += ["", "Progress reports (smallest size): " + ", ".join(
            f"{p['stage']} {p['updates']} updates, longest silence {p['longest_silence']:.1f} s" for p in prog) + "."]
    return "\n".join(lines)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n", 1)[0])
    parser.add_argument("--sizes", default="10000,100000", help="comma-separated answer counts (e.g. 10000,100000,1000000)")
    parser.add_argument("--data", type=Path, default=Path(tempfile.gettempdir()) / "termloom-bench",
                        help="where generated data is kept between runs")
    parser.add_argument("--baseline-sample", type=int, default=20_000,
                        help="above this many answers the baseline runs on a sample and is extrapolated")
    parser.add_argument("--markdown", type=Path, help="also write the results table to this file")
    parser.add_argument("--json", type=Path, help="also write every measurement as JSON")
    parser.add_argument("--skip-once", action="store_true", help="skip startup, UI, lemma-table and progress checks")
    parser.add_argument("--child", nargs="+", help=argparse.SUPPRESS)
    args = parser.parse_args(argv)

    if args.child:
        kind, *rest = args.child
        if kind == "baseline":
            child_baseline(Path(rest[0]), Path(rest[1]), int(rest[2]) or None)
        elif kind == "floor":
            child_floor(Path(rest[0]))
        elif kind == "open":
            child_open(Path(rest[0]))
        elif kind == "lemmas":
            child_lemmas(Path(rest[0]))
        elif kind == "open-tables":
            child_open_tables(Path(rest[0]))
        elif kind == "spacy-lookups":
            child_spacy_lookups()
        elif kind == "progress":
            child_progress(Path(rest[0]), Path(rest[1]))
        return 0

    sizes = [int(s.replace("_", "")) for s in args.sizes.split(",") if s.strip()]
    results = []
    with tempfile.TemporaryDirectory(prefix="termloom-bench-out-") as name:
        work = Path(name)
        for size in sizes:
            results.append(measure_size(size, args.data, args.baseline_sample, work))
        once = {} if args.skip_once else measure_once(work, args.data / f"answers-{min(sizes)}" / generate.STUDY)
    text = markdown(results, once)
    print("\n" + text)
    if args.markdown:
        args.markdown.write_text(text + "\n", encoding="utf-8")
    if args.json:
        for r in results:
            for key in ("termloom", "baseline", "floor"):
                r[key].pop("stdout", None)
                r[key].pop("stderr", None)
        args.json.write_text(json.dumps({"results": results, "once": once}, indent=2, default=str), encoding="utf-8")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
