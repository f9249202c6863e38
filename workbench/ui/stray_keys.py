"""Keys that reach the app after the focus has moved go to the widget focused now.

Textual hands each key to the widget focused *when the key is read*, and the
app checks bindings when the key bubbles back up from it. When keys arrive
faster than they are handled (typing ``/delay`` quickly, a key held down, a
busy moment), ``/`` moves the focus to the search box while ``delay`` is
already on its way from the table, and the letters would run the table's
bindings instead of being typed. Tables mark the keys they pass up
(:func:`mark_origin`); the app hands a marked key whose table has lost the
focus to the focused widget instead (:func:`reroute_stray_key`).

Keys queued for a text box after Enter moved the focus away are typed into
the box: the box handles letters itself, before the app sees them.
"""

from __future__ import annotations

from textual import events
from textual.app import App
from textual.widget import Widget

_ORIGIN = "_termloom_origin"


def mark_origin(widget: Widget, event: events.Key) -> None:
    """Remember which widget a key was handed to, before it bubbles up."""
    setattr(event, _ORIGIN, widget)


def reroute_stray_key(app: App[object], event: events.Key) -> bool:
    """Hand ``event`` to the focused widget if its table lost the focus meanwhile; ``True`` if it did."""
    origin = getattr(event, _ORIGIN, None)
    if origin is None or not app.screen_stack:  # not from a table, or the app is closing
        return False
    target = app.focused
    if target is None or target is origin:
        return False
    event.stop()
    event.prevent_default()
    key = events.Key(event.key, event.character)
    # Forwarded, as the app does with keys it reads: a key that bubbles back to the
    # app unforwarded would be taken for a new key press.
    target._forward_event(key)  # noqa: SLF001 - the one way to hand a key to a widget as the app does
    return True
