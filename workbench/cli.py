"""The ``termloom`` command: parse arguments, call one core function, map errors to exit codes.

Exit codes (also in the README):
    0   success
    1   internal error (a bug: the message names a crash log to attach to a report)
    2   bad settings (study file, overrides, language profiles)
    3   bad input data (answer files, glossaries, dictionaries)
    4   the output folder cannot be written
    5   ``verify`` found files that differ from the manifest
    6   the Dask engine failed (no scheduler at the address, workers kept dying)
    130 cancelled (Ctrl-C)
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time
import traceback
from pathlib import Path
from typing import TextIO

from workbench import __version__
from workbench.core.errors import EXIT_CANCELLED, EXIT_INTERNAL, EXIT_OK, TermloomError

EXIT_VERIFY_FAILED = 5


class _Printer:
    """Writes progress to stderr: a redrawn line on a terminal, periodic lines otherwise."""

    def __init__(self, quiet: bool, stream: TextIO = sys.stderr) -> None:
        self.quiet = quiet
        self.stream = stream
        self.tty = stream.isatty()
        self.color = self.tty and "NO_COLOR" not in os.environ
        self._last_line = 0.0
        self._stage = ""
        self._stage_began = time.perf_counter()

    def say(self, text: str) -> None:
        if not self.quiet:
            self._clear()
            print(text, file=self.stream)

    def _clear(self) -> None:
        if self.tty:
            self.stream.write("\r\x1b[2K")

    def progress(self, stage: str, done: int, total: int, message: str) -> None:
        if self.quiet:
            return
        now = time.perf_counter()
        if stage != self._stage:
            self._stage, self._stage_began = stage, now
        if self.tty:
            if total:
                width = 24
                filled = int(width * min(done, total) / total)
                bar = "#" * filled + "-" * (width - filled)
                text = f"{stage:<9} [{bar}] {done:,}/{total:,} {message}"
            else:
                text = f"{stage:<9} {message}"
            self.stream.write("\r\x1b[2K" + text[:120])
            self.stream.flush()
        elif now - self._last_line >= 2.0 or (total and done >= total):
            share = f" {100 * done / total:.0f}%" if total else ""
            print(f"[{stage}]{share} {message}".rstrip(), file=self.stream)
            self._last_line = now

    def finish(self) -> None:
        if self.tty and not self.quiet:
            self._clear()
            self.stream.flush()


def _reporter(printer: _Printer):  # type: ignore[no-untyped-def]
    from workbench.core.progress import Reporter

    return Reporter(callback=printer.progress)


def _cmd_run(args: argparse.Namespace, printer: _Printer) -> int:
    from workbench.core.pipeline import run_to_folder
    from workbench.core.settings import load_study

    overrides = list(args.set or [])
    if args.engine:
        overrides.append(f"engine.kind={args.engine}")
    if args.scheduler:
        overrides.append(f'engine.scheduler="{args.scheduler}"')
    study = load_study(args.study, overrides)
    out_dir = Path(args.out) if args.out else Path.cwd() / "termloom-out" / _safe_stem(args.study)
    if study.engine.kind == "dask":
        from workbench.core.distributed import run_to_folder_dask

        outputs, written = run_to_folder_dask(study, out_dir, _reporter(printer))
    else:
        outputs, written = run_to_folder(study, out_dir, _reporter(printer))
    printer.finish()
    counts = outputs.ledger.counts()
    rows, answers = counts.get("row", {}), counts.get("answer", {})
    printer.say(
        f"read {sum(rows.values()):,} rows and {sum(answers.values()):,} answers "
        f"({answers.get('kept', 0):,} kept, {answers.get('flagged', 0):,} flagged, {answers.get('dropped', 0):,} dropped)"
    )
    if outputs.weighed is not None:
        langs = ", ".join(f"{lang} {c.matrix.shape[0]:,}x{c.matrix.shape[1]:,}" for lang, c in sorted(outputs.weighed.counts.items()))
        printer.say(f"matrices: {langs}")
    total = sum(outputs.timings.values())
    printer.say(f"wrote {len(written)} files in {total:.1f} s to {out_dir}")
    printer.say(f"start with {out_dir / 'manifest.json'} and the keywords/ folder")
    return EXIT_OK


def _safe_stem(path: str) -> str:
    name = Path(path).name
    for suffix in (".toml", ".study"):
        name = name.removesuffix(suffix)
    return "".join(ch if ch.isalnum() or ch in "-_." else "_" for ch in name).strip("._") or "study"


def _cmd_check(args: argparse.Namespace, printer: _Printer) -> int:
    from workbench.core.settings import check_study

    problems = check_study(args.study, list(args.set or []))
    if problems:
        for problem in problems:
            print(f"termloom: {problem}", file=sys.stderr)
        print(f"termloom: {len(problems)} problem(s) in {args.study}", file=sys.stderr)
        from workbench.core.errors import EXIT_SETTINGS

        return EXIT_SETTINGS
    printer.say(f"{args.study}: no problems found")
    return EXIT_OK


def _cmd_init(args: argparse.Namespace, printer: _Printer) -> int:
    from workbench.core.starter import write_starter_study

    out = Path(args.out) if args.out else None
    path, lines = write_starter_study(Path(args.data), out)
    for line in lines:
        printer.say(line)
    printer.say(f"wrote {path}; review it, then run: termloom run {path}")
    return EXIT_OK


def _cmd_open(args: argparse.Namespace, printer: _Printer) -> int:
    from workbench.ui import launch

    target = Path(args.target)
    if target.name.endswith(".toml"):
        return launch(study_path=target, data_path=None)
    return launch(study_path=None, data_path=target)


def _cmd_verify(args: argparse.Namespace, printer: _Printer) -> int:
    from workbench.core.manifest import verify_run

    report = verify_run(Path(args.outdir))
    for line in report.lines():
        printer.say(line)
    return EXIT_OK if report.ok else EXIT_VERIFY_FAILED


def _cmd_languages(args: argparse.Namespace, printer: _Printer) -> int:
    from workbench.core.profiles import available_languages, load_profile

    for code in available_languages():
        profile = load_profile(code)
        print(f"{code:<4} {profile.name:<20} lemmas: {profile.lemmatizer}")
    return EXIT_OK


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="termloom",
        description="Clean, sort by language, lemmatise, weigh and compare free-text survey answers.",
        epilog="Exit codes: 0 ok, 1 internal error, 2 bad settings, 3 bad input, 4 output not writable, "
        "5 verify failed, 130 cancelled. NO_COLOR is respected.",
    )
    parser.add_argument("--version", action="version", version=f"termloom {__version__}")
    parser.add_argument("-q", "--quiet", action="store_true", help="print only errors")
    # --quiet is accepted before or after the command name.
    common = argparse.ArgumentParser(add_help=False)
    common.add_argument("-q", "--quiet", action="store_true", default=argparse.SUPPRESS, help="print only errors")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")

    run = sub.add_parser("run", parents=[common], help="run a study headless and write its output folder")
    run.add_argument("study", help="the *.study.toml file")
    run.add_argument("--out", help="output folder (default: ./termloom-out/<study name>)")
    run.add_argument("--set", action="append", metavar="KEY=VALUE", help="override a setting, e.g. weigh.tf=log (repeatable)")
    run.add_argument("--engine", choices=["local", "dask"], help="where to run: in this process (default) or on Dask")
    run.add_argument("--scheduler", metavar="ADDRESS", help="Dask scheduler to connect to (default: start a local cluster)")
    run.set_defaults(handler=_cmd_run)

    check = sub.add_parser("check", parents=[common], help="report every problem in a study file at once")
    check.add_argument("study")
    check.add_argument("--set", action="append", metavar="KEY=VALUE", help="override a setting (repeatable)")
    check.set_defaults(handler=_cmd_check)

    init = sub.add_parser("init", parents=[common], help="write a starter study by inspecting a data file")
    init.add_argument("data", help="CSV, TSV, XLSX, JSON Lines, Parquet file or a folder of .txt files")
    init.add_argument("--out", help="study file to write (default: <data name>.study.toml beside the data)")
    init.set_defaults(handler=_cmd_init)

    open_ = sub.add_parser("open", parents=[common], help="open the terminal workbench on a study (or a data file, to start one)")
    open_.add_argument("target", help="a *.study.toml file or a data file")
    open_.set_defaults(handler=_cmd_open)

    verify = sub.add_parser("verify", parents=[common], help="recheck every file of an output folder against its manifest")
    verify.add_argument("outdir")
    verify.set_defaults(handler=_cmd_verify)

    languages = sub.add_parser("languages", parents=[common], help="list the languages termloom has profiles for")
    languages.set_defaults(handler=_cmd_languages)
    return parser


def _crash_log(exc: BaseException) -> str:
    fd, path = tempfile.mkstemp(prefix="termloom-crash-", suffix=".log")
    with os.fdopen(fd, "w", encoding="utf-8") as handle:
        handle.write(f"termloom {__version__}\n")
        handle.write("".join(traceback.format_exception(exc)))
    return path


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "handler", None):
        parser.print_help()
        return EXIT_OK
    printer = _Printer(quiet=args.quiet)
    try:
        return args.handler(args, printer)
    except TermloomError as exc:
        printer.finish()
        print(f"termloom: error: {exc}", file=sys.stderr)
        return exc.exit_code
    except KeyboardInterrupt:
        printer.finish()
        print("termloom: cancelled; outputs of earlier runs are untouched", file=sys.stderr)
        return EXIT_CANCELLED
    except Exception as exc:  # the one place a bug becomes a message instead of a traceback
        printer.finish()
        log = _crash_log(exc)
        print(
            f"termloom: internal error: {type(exc).__name__}: {exc}; this is a bug — "
            f"please report it with the log {log}",
            file=sys.stderr,
        )
        return EXIT_INTERNAL


if __name__ == "__main__":
    sys.exit(main())
