"""Horizontal bars drawn with block characters, eight steps per cell."""

from __future__ import annotations

import math

_EIGHTHS = " ▏▎▍▌▋▊▉"


def bar(value: float, maximum: float, width: int = 12) -> str:
    """A bar of ``width`` cells whose filled length is ``value / maximum`` of the width."""
    if not maximum or maximum <= 0 or value is None or not math.isfinite(value) or value <= 0:
        return " " * width
    eighths = int(round(min(1.0, value / maximum) * width * 8))
    full, rest = divmod(eighths, 8)
    text = "█" * full + (_EIGHTHS[rest] if rest else "")
    return text.ljust(width)
