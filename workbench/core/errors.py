"""Typed errors a user can cause, each carrying the exit code the CLI maps it to.

Every message is one line that names what was wrong, where, and how to fix it.
"""

from __future__ import annotations

import difflib
from collections.abc import Iterable

EXIT_OK = 0
EXIT_INTERNAL = 1
EXIT_SETTINGS = 2
EXIT_INPUT = 3
EXIT_OUTPUT = 4
EXIT_ENGINE = 6
EXIT_CANCELLED = 130


class TermloomError(Exception):
    """Base of every error a user can cause; ``str(err)`` is the one-line message."""

    exit_code = EXIT_INTERNAL

    def __init__(self, message: str) -> None:
        super().__init__(" ".join(message.split()))


class SettingsError(TermloomError):
    """The study file, an override or a language profile is wrong."""

    exit_code = EXIT_SETTINGS


class InputError(TermloomError):
    """A data file (answers, glossary, dictionary) cannot be read as asked."""

    exit_code = EXIT_INPUT


class OutputError(TermloomError):
    """The output folder cannot be written."""

    exit_code = EXIT_OUTPUT


class EngineError(TermloomError):
    """The distributed engine failed: no scheduler at the address, or its workers kept dying."""

    exit_code = EXIT_ENGINE


class Cancelled(TermloomError):
    """The user cancelled a long-running stage."""

    exit_code = EXIT_CANCELLED


def did_you_mean(word: str, choices: Iterable[str]) -> str:
    """Return ``" (did you mean 'x'?)"`` for the closest choice, or ``""``."""
    close = difflib.get_close_matches(word, list(choices), n=1, cutoff=0.6)
    return f" (did you mean '{close[0]}'?)" if close else ""
