"""Every key of the app in one list, read from the classes' ``BINDINGS``.

The help screen and the command palette both read this list, so a new
binding shows up in both without being written down twice.
"""

from __future__ import annotations

from dataclasses import dataclass

from textual.binding import Binding

_NAMES = {
    "question_mark": "?",
    "slash": "/",
    "space": "Space",
    "escape": "Esc",
    "enter": "Enter",
    "pageup": "PgUp",
    "pagedown": "PgDn",
    "equals_sign": "=",
    "exclamation_mark": "!",
    "left_square_bracket": "[",
    "right_square_bracket": "]",
    "delete": "Del",
    "backspace": "Backspace",
    "tab": "Tab",
}


def key_label(key: str) -> str:
    """``ctrl+z`` → ``^z``, ``question_mark`` → ``?``."""
    if key.startswith("ctrl+"):
        return "^" + _NAMES.get(key[5:], key[5:])
    if key.startswith("shift+"):
        return "Shift+" + _NAMES.get(key[6:], key[6:])
    return _NAMES.get(key, key)


@dataclass(frozen=True)
class KeyAction:
    """One key: where it works, what it does, and the action it runs."""

    scope: str
    key: str
    description: str
    action: str
    #: The view the action belongs to (the palette switches there first); ``None`` for app keys.
    view: str | None


def collect(scopes: list[tuple[str, str | None, type]]) -> list[KeyAction]:
    """Bindings of each ``(scope name, view id, class)``, in order, merged per action."""
    found: list[KeyAction] = []
    for scope, view, cls in scopes:
        merged: dict[str, tuple[list[str], str]] = {}
        for binding in Binding.make_bindings(getattr(cls, "BINDINGS", [])):
            if not binding.description:
                continue
            keys, _ = merged.setdefault(binding.action, ([], binding.tooltip or binding.description))
            keys.append(key_label(binding.key))
        for action, (keys, description) in merged.items():
            found.append(KeyAction(scope, " ".join(keys), description, action, view))
    return found
