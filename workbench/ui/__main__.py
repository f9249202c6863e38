"""``python -m workbench.ui [STUDY or DATAFILE]`` — the same as ``termloom open``."""

from __future__ import annotations

import sys
from pathlib import Path

from workbench.core.errors import TermloomError
from workbench.ui import launch


def main(argv: list[str]) -> int:
    target = Path(argv[0]) if argv else None
    try:
        if target is None or target.name.endswith(".toml"):
            return launch(study_path=target, data_path=None)
        return launch(study_path=None, data_path=target)
    except TermloomError as exc:
        print(f"termloom: {exc}", file=sys.stderr)
        return exc.exit_code


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
