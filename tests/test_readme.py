"""The README documents every study-file key and the quick start it promises."""

from __future__ import annotations

import re
from pathlib import Path

from pydantic import BaseModel

from workbench.core.settings import Study

README = (Path(__file__).resolve().parents[1] / "README.md").read_text(encoding="utf-8")


def _keys(model: type[BaseModel], prefix: str = "") -> list[str]:
    keys = []
    for name, field in model.model_fields.items():
        if field.exclude:
            continue
        annotation = field.annotation
        inner = getattr(annotation, "__args__", ()) or ()
        nested = next((t for t in (annotation, *inner) if isinstance(t, type) and issubclass(t, BaseModel)), None)
        if nested is not None:
            keys.extend(_keys(nested, f"{name}."))
        else:
            keys.append(f"{prefix}{name}")
    return keys


def test_every_study_key_is_in_the_readme_reference() -> None:
    missing = [key for key in _keys(Study) if key not in README]
    assert not missing, f"add these study keys to the README's study file table: {missing}"


def test_quick_start_has_exactly_two_commands() -> None:
    section = README.split("## Quick start", 1)[1].split("\n## ", 1)[0]
    blocks = re.findall(r"```sh\n(.*?)```", section, flags=re.S)
    commands = [line for block in blocks for line in block.splitlines() if line.strip()]
    assert len(commands) == 2, commands
    assert "termloom run demo_texts/demo.study.toml" in commands[0]
    assert "pytest" in commands[1]
