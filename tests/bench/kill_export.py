"""Crash safety of the export: SIGKILL the headless run at random points while it writes, many times.

Run on demand (POSIX; not part of the test suite)::

    python tests/bench/kill_export.py [--trials 60] [--seed 7]

A small invented study (120 answers, English and German, one group column) is run twice to
completion: run A (``weigh.tf = "raw"``, every export format) and run B (``weigh.tf = "log"``,
no SVG charts, so B also deletes A's SVG files before writing its manifest). Each trial copies
A's folder, starts ``termloom run`` for B on the copy in a child process, waits until the export
stage reports, sleeps a random time up to 1.15 times the measured length of the export, and
kills the child with SIGKILL. ``tests/test_crash_safety.py`` runs three trials with fixed kill
points.

What "``termloom verify`` tells which" means, checked after every kill:

1. every file in the folder, except termloom's temporary files (``.termloom-tmp-*``), is
   byte-for-byte run A's version or run B's version of that file — no half-written file (the
   Stata file's time stamp, to the minute, is blanked before comparing: it is the one part of
   the outputs that depends on the clock);
2. if the manifest is B's, ``verify`` passes and every file it lists holds B's bytes: the
   folder is the complete new run;
3. if the manifest is A's, ``verify`` lists as *changed* exactly the files that now hold B's
   bytes where those differ from A's, and as *missing* exactly the A files B had already
   deleted; it passes iff there are none, which means the folder still is run A exactly;
4. temporary files show only as *extra*, never fail ``verify``, and the next run removes them.

The table printed at the end counts the outcomes; any violation is printed and makes the
exit status 1.
"""

from __future__ import annotations

import argparse
import hashlib
import json
import os
import random
import re
import shutil
import signal
import subprocess
import sys
import tempfile
import time
from collections import Counter
from dataclasses import dataclass, field
from pathlib import Path

TEMP_PREFIX = ".termloom-tmp-"  # workbench.core.atomic.TEMP_PREFIX, kept literal so this file imports nothing

#: The child: the real command line, plus one stdout line per export progress report.
DRIVER = r"""
import sys
from workbench import cli

real = cli._Printer.progress

def progress(self, stage, done, total, message):
    if stage == "export":
        print(f"EXPORT {done}/{total} {message}", flush=True)
    return real(self, stage, done, total, message)

cli._Printer.progress = progress
sys.exit(cli.main(sys.argv[1:]))
"""

EN = ("the train was late again", "friendly staff and a clean cabin", "the coffee was cold", "noisy night, no sleep",
      "great view from the window", "the bed was too short", "tickets are too expensive", "quiet and comfortable")
DE = ("der Zug war wieder zu spät", "freundliches Personal und saubere Kabine", "der Kaffee war kalt",
      "laute Nacht, kein Schlaf", "schöne Aussicht aus dem Fenster", "das Bett war zu kurz", "die Fahrkarten sind zu teuer")


#: Export formats of run A; run B drops the last one (so it deletes A's files of that format)
#: and weighs with tf = log (so it changes the weights files and every table built on them).
FORMATS = ["csv", "xlsx", "json", "mtx", "npz", "parquet", "dta", "png", "svg"]
LIGHT_FORMATS = ["csv", "mtx", "parquet", "xlsx", "json"]


def make_study(folder: Path, *, light: bool = False) -> tuple[Path, list[str]]:
    """Invented answers in two languages with a country group; the study file (run A's settings)
    and the overrides that make run B. ``light``: 40 answers, no bootstrap, five formats (the test)."""
    rng = random.Random(11)
    lines = ["rid,country,comment"]
    for number in range(1, (41 if light else 121)):
        german = number % 3 == 0
        words = rng.sample(DE if german else EN, 2)
        lines.append(f"r{number},{'DE' if german else rng.choice(['UK', 'IE'])},\"{'; '.join(words)}\"")
    (folder / "answers.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    formats = LIGHT_FORMATS if light else FORMATS
    study = folder / "kill.study.toml"
    study.write_text(
        '[[sources]]\npath = "answers.csv"\n[columns]\nid = "rid"\ntext = ["comment"]\ngroups = ["country"]\n'
        '[languages]\nexpected = ["en", "de"]\n[weigh]\nmin_df = 1\n'
        f"[compare]\nbootstrap = {0 if light else 20}\nmin_group_size = 5\nmin_freq = 2\n"
        f"[export]\nformats = {json.dumps(formats)}\n",
        encoding="utf-8",
    )
    return study, ["weigh.tf=log", f"export.formats={json.dumps(formats[:-1])}"]


def command(study: Path, out: Path, settings: list[str]) -> list[str]:
    args = [sys.executable, "-c", DRIVER, "-q", "run", str(study), "--out", str(out)]
    for setting in settings:
        args += ["--set", setting]
    return args


#: Stata files carry the time they were written (dta format 118, <timestamp> in the header,
#: to the minute); it is blanked before comparing contents, so only the data must match.
_STATA_TIME = re.compile(rb"<timestamp>.{0,40}?</timestamp>", re.S)


def sha256(path: Path, *, blank_time: bool = False) -> str:
    data = path.read_bytes()
    if blank_time and path.suffix == ".dta":
        data = _STATA_TIME.sub(b"<timestamp></timestamp>", data, count=1)
    return hashlib.sha256(data).hexdigest()


def listing(out: Path, *, blank_time: bool = False) -> dict[str, str]:
    """Relative path -> SHA-256 of every file but the manifest and temporary files."""
    return {
        p.relative_to(out).as_posix(): sha256(p, blank_time=blank_time)
        for p in sorted(out.rglob("*"))
        if p.is_file() and p.name != "manifest.json" and not p.name.startswith(TEMP_PREFIX)
    }


@dataclass
class Reference:
    study: Path
    #: the --set overrides of run B
    b_settings: list[str]
    folder_a: Path
    files_a: dict[str, str]
    files_b: dict[str, str]
    #: the same with the Stata time stamp blanked
    contents_a: dict[str, str]
    contents_b: dict[str, str]
    #: seconds from the first export report to the end of run B (the longest of the calibration runs)
    export_seconds: float


def reference(work: Path, *, in_process: bool = False, light: bool = False) -> Reference:
    """Runs A and B to completion (B twice) and records every file's bytes.

    With ``in_process`` the runs call the command line's ``main`` here (fast when the caches are
    warm, as in the test suite) and the export is not timed.
    """
    study, b_settings = make_study(work, light=light)
    env = {**os.environ, "NO_COLOR": "1"}
    durations = [0.0]
    if in_process:
        from workbench.cli import main as cli_main

        for out, settings in ((work / "A", []), (work / "B0", b_settings), (work / "B1", b_settings)):
            assert cli_main(command(study, out, settings)[3:]) == 0
    else:
        subprocess.run(command(study, work / "A", []), check=True, capture_output=True, env=env)
        for attempt in range(2):
            out = work / f"B{attempt}"
            with subprocess.Popen(command(study, out, b_settings), stdout=subprocess.PIPE, text=True, env=env) as child:
                assert child.stdout is not None
                child.stdout.readline()
                began = time.perf_counter()
                child.stdout.read()
                assert child.wait() == 0
            durations.append(time.perf_counter() - began)
    files_a, files_b = listing(work / "A"), listing(work / "B0")
    contents_b = listing(work / "B0", blank_time=True)
    assert contents_b == listing(work / "B1", blank_time=True), "run B is not reproducible; the checks need it to be"
    assert set(files_a) - set(files_b), "run B should delete some of A's files"
    assert any(files_a[p] != files_b[p] for p in set(files_a) & set(files_b)), "run B should change some of A's files"
    return Reference(study, b_settings, work / "A", files_a, files_b, listing(work / "A", blank_time=True), contents_b,
                     max(durations))


@dataclass
class Outcome:
    kind: str  # "old, verify ok" | "old, verify failed" | "new, verify ok"
    changed: int = 0
    missing: int = 0
    temps: int = 0
    problems: list[str] = field(default_factory=list)


def judge(out: Path, ref: Reference) -> Outcome:
    """Check points 1-4 of the module docstring on a folder after a kill."""
    from workbench.core.manifest import verify_run

    problems = []
    found = listing(out)
    temps = [p for p in out.rglob(f"{TEMP_PREFIX}*") if p.is_file()]
    for path, digest in listing(out, blank_time=True).items():  # 1. old or new contents, nothing else
        if digest not in (ref.contents_a.get(path), ref.contents_b.get(path)):
            problems.append(f"{path}: neither run A's nor run B's contents")
    manifest = json.loads((out / "manifest.json").read_text(encoding="utf-8"))
    report = verify_run(out)
    if manifest["settings"]["weigh"]["tf"] == "log":  # 2. B's manifest: the complete new run
        kind = "new, verify ok"
        if not report.ok or listing(out, blank_time=True) != ref.contents_b:
            problems.append(f"B's manifest but the folder is not run B: {report.lines()[-1]}")
    else:  # 3. A's manifest: verify names exactly the files that are no longer A's
        changed = sorted(p for p, d in found.items() if p in ref.files_a and d != ref.files_a[p])
        missing = sorted(p for p in ref.files_a if p not in found)
        if sorted(report.changed) != changed or sorted(report.missing) != missing:
            problems.append(f"verify says changed {report.changed}, missing {report.missing}; expected {changed}, {missing}")
        if report.ok != (not changed and not missing):
            problems.append(f"verify ok = {report.ok} but {len(changed)} changed and {len(missing)} missing")
        kind = "old, verify ok" if report.ok else "old, verify failed"
    temp_names = {p.relative_to(out).as_posix() for p in temps}  # 4. temporary files are extras only
    if not temp_names <= set(report.extra):
        problems.append("temporary files not reported as extra")
    return Outcome(kind, len(report.changed), len(report.missing), len(temps), problems)


def trial(ref: Reference, out: Path, kill_after: int | str, delay: float) -> tuple[Outcome, int]:
    """Copy run A to ``out``, start run B there, SIGKILL it ``delay`` s after export report number
    ``kill_after`` (0 = the first) or the first report whose message starts with ``kill_after``;
    returns the outcome and the child's exit status."""
    if out.exists():
        shutil.rmtree(out)
    shutil.copytree(ref.folder_a, out)
    env = {**os.environ, "NO_COLOR": "1"}
    with subprocess.Popen(command(ref.study, out, ref.b_settings), stdout=subprocess.PIPE, stderr=subprocess.DEVNULL,
                          text=True, env=env) as child:
        assert child.stdout is not None
        seen = 0
        for line in child.stdout:
            if line.startswith("EXPORT"):
                message = line.split(" ", 2)[2]
                if seen == kill_after or (isinstance(kill_after, str) and message.startswith(kill_after)):
                    break
                seen += 1
        if delay:
            time.sleep(delay)
        try:
            os.kill(child.pid, signal.SIGKILL)
        except ProcessLookupError:
            pass
        status = child.wait()
    return judge(out, ref), status


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--trials", type=int, default=60)
    parser.add_argument("--seed", type=int, default=7)
    args = parser.parse_args()
    rng = random.Random(args.seed)
    with tempfile.TemporaryDirectory(prefix="termloom-kill-") as name:
        work = Path(name)
        began = time.perf_counter()
        ref = reference(work)
        print(f"reference runs: {len(ref.files_a)} files in A, {len(ref.files_b)} in B, "
              f"B's export takes {ref.export_seconds:.2f} s ({time.perf_counter() - began:.0f} s)")
        kinds: Counter[str] = Counter()
        killed = 0
        changed, temps = [], []
        failures = []
        for number in range(1, args.trials + 1):
            delay = rng.uniform(0, 1.15 * ref.export_seconds)
            outcome, status = trial(ref, work / "trial", 0, delay)
            killed += status == -signal.SIGKILL
            kinds[outcome.kind] += 1
            changed.append(outcome.changed + outcome.missing)
            temps.append(outcome.temps)
            line = (f"trial {number:3d}: kill {delay:5.2f} s into the export -> {outcome.kind:<19} "
                    f"changed {outcome.changed:2d} missing {outcome.missing:2d} temp files {outcome.temps}")
            print(line + ("  VIOLATION: " + "; ".join(outcome.problems) if outcome.problems else ""), flush=True)
            if outcome.problems:
                failures.append(number)
        # the next run over a killed folder completes and cleans up
        subprocess.run(command(ref.study, work / "trial", ref.b_settings), check=True, capture_output=True)
        from workbench.core.manifest import verify_run

        final = verify_run(work / "trial")
        leftover = list((work / "trial").rglob(f"{TEMP_PREFIX}*"))
    print()
    print(f"{args.trials} trials, {killed} killed by SIGKILL before finishing, {len(failures)} violations")
    for kind in ("old, verify ok", "old, verify failed", "new, verify ok"):
        print(f"  {kind:<19} {kinds[kind]:3d}")
    print(f"  files verify reported changed or missing per kill: max {max(changed)}, mean {sum(changed) / len(changed):.1f}")
    print(f"  temporary files left by a kill: {sum(1 for t in temps if t)} trials, max {max(temps)} (listed as extra)")
    print(f"  a normal run afterwards: verify {'OK' if final.ok else 'FAILED'}, {len(leftover)} temporary files left")
    return 1 if failures or not final.ok or leftover else 0


if __name__ == "__main__":
    sys.exit(main())
