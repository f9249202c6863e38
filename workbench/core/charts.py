"""Charts for the output folder: top keywords as horizontal bars, concepts across languages.

matplotlib is used through its object API (``Figure`` plus the Agg canvas)
and ``pyplot`` is never imported: pyplot keeps global figure state, picks a
display backend and is not safe to call from the terminal UI's worker
threads. Nothing here opens a window or needs a display.

Labels: answers come in Latin, Greek and Cyrillic scripts (and others a user
may add). The font list prefers DejaVu Sans, which covers all three, and lets
matplotlib fall back glyph by glyph to any other installed family on the list.
Characters no installed font can draw are reported as notes for the manifest
instead of warnings.

Files are reproducible: SVG ids come from a fixed hash salt, the SVG date and
the PNG "Software" tag are left out, so the same data gives the same bytes on
the same library versions.
"""

from __future__ import annotations

import functools
import textwrap
import unicodedata
import warnings
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import matplotlib
import numpy as np
import pandas as pd
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib import font_manager

from workbench.core.atomic import atomic_path

#: Families tried in order; matplotlib falls back per glyph along the list.
PREFERRED_FONTS: tuple[str, ...] = (
    "DejaVu Sans",
    "Noto Sans",
    "Liberation Sans",
    "Arial",
    "Noto Sans CJK JP",
    "Noto Sans Arabic",
    "Noto Sans Hebrew",
    "Noto Sans Devanagari",
)

_RC = {
    "svg.hashsalt": "termloom",
    # Glyphs as paths: the SVG looks the same on machines without the font.
    "svg.fonttype": "path",
    "axes.spines.top": False,
    "axes.spines.right": False,
}
_BAR = "#3b6ea8"
_PALETTE = ("#3b6ea8", "#d08c2f", "#5a9e6f", "#b5525c", "#7d6bb0", "#8c8c8c", "#2f9fa6", "#c27ba0")


@functools.lru_cache(maxsize=1)
def chart_fonts() -> tuple[tuple[str, ...], tuple[str, ...]]:
    """The installed families from :data:`PREFERRED_FONTS` and their font files.

    When none is installed, matplotlib's own default family is used (it ships
    DejaVu Sans, so this only happens in stripped-down installations).
    """
    families, files = [], []
    for family in PREFERRED_FONTS:
        try:
            path = font_manager.findfont(font_manager.FontProperties(family=family), fallback_to_default=False)
        except ValueError:
            continue
        families.append(family)
        files.append(path)
    if not families:
        default = matplotlib.rcParams["font.sans-serif"][0]
        families.append(default)
        files.append(font_manager.findfont(font_manager.FontProperties(family=default)))
    return tuple(families), tuple(files)


@functools.lru_cache(maxsize=8)
def _charmap(path: str) -> frozenset[int]:
    from matplotlib.ft2font import FT2Font

    return frozenset(FT2Font(path).get_charmap())


def missing_glyphs(labels: Sequence[str]) -> list[str]:
    """Characters in ``labels`` that none of the chart fonts can draw (sorted, unique)."""
    _families, files = chart_fonts()
    covered = set().union(*(_charmap(f) for f in files))
    missing = {ch for label in labels for ch in str(label) if not ch.isspace() and ord(ch) not in covered}
    return sorted(missing)


def _label(text: str, width: int = 38) -> str:
    text = " ".join(str(text).split())
    return text if len(text) <= width else text[: width - 1] + "…"


def _text_width(text: str) -> float:
    """Width of ``text`` in ems, roughly: East Asian wide characters one em, others 0.56 (DejaVu Sans' mean)."""
    return sum(1.0 if unicodedata.east_asian_width(ch) in "WF" else 0.56 for ch in text)


def _new_figure(labels: Sequence[str], rows: float, legend: bool = False) -> tuple[Figure, Any]:
    """A figure sized for ``rows`` bars whose margins fit ``labels``, with one axes.

    Margins are computed from the label lengths instead of by matplotlib's
    layout engines, which measure every text on every save and made the
    export's charts its slowest part.
    """
    size = matplotlib.rcParams["font.size"]  # points
    left = 0.35 + max((_text_width(t) for t in labels), default=1.0) * size / 72.0
    right = 1.1 if legend else 0.3
    width = max(7.5, left + right + 4.5)
    height = max(2.2, 0.95 + 0.28 * max(rows, 1.0))
    figure = Figure(figsize=(width, height), dpi=100)
    FigureCanvasAgg(figure)
    figure.subplots_adjust(left=left / width, right=1 - right / width, bottom=0.6 / height, top=1 - 0.38 / height)
    return figure, figure.add_subplot()


def _finish_axes(axes: Any, positions: np.ndarray, labels: list[str], title: str, xlabel: str) -> None:
    """Labels top-down, axis title, chart title and a light vertical grid behind the bars."""
    axes.set_yticks(positions, labels)
    axes.invert_yaxis()
    axes.set_xlabel(xlabel)
    # The y axis has no title: fixing its (empty) label's place spares another measurement of the tick labels.
    axes.yaxis.set_label_coords(0.0, 0.5)
    # A fixed title height (where matplotlib's automatic placement puts it: nothing is drawn above
    # the axes) spares a measurement of every tick label at each save.
    axes.set_title(textwrap.shorten(title, 90), loc="left", fontsize=11, y=1.0)
    axes.grid(axis="x", alpha=0.3)
    axes.set_axisbelow(True)


def keyword_chart(terms: Sequence[str], values: Sequence[float], title: str, xlabel: str) -> Figure:
    """Horizontal bars of ``values`` per term, largest at the top.

    Terms are drawn in the order given, first at the top (pass them sorted).
    """
    if len(terms) != len(values):
        raise ValueError(f"{len(terms)} terms but {len(values)} values")
    labels = [_label(t) for t in terms]
    with matplotlib.rc_context({**_RC, "font.family": list(chart_fonts()[0])}):
        figure, axes = _new_figure(labels, len(terms))
        positions = np.arange(len(terms))
        axes.barh(positions, np.asarray(values, dtype=float), color=_BAR, height=0.7)
        _finish_axes(axes, positions, labels, title, xlabel)
        if not len(terms):
            axes.text(0.5, 0.5, "no terms", ha="center", va="center", transform=axes.transAxes)
    return figure


def concept_chart(table: pd.DataFrame, title: str, xlabel: str) -> Figure:
    """Grouped horizontal bars: one group per concept (rows), one bar per language (columns).

    ``table`` is indexed by concept with one numeric column per language;
    missing values are drawn as 0.
    """
    data = table.astype(float).fillna(0.0)
    concepts = [str(c) for c in data.index]
    languages = [str(c) for c in data.columns]
    n_lang = max(len(languages), 1)
    labels = [_label(c) for c in concepts]
    with matplotlib.rc_context({**_RC, "font.family": list(chart_fonts()[0])}):
        figure, axes = _new_figure(labels, 0.8 * n_lang * max(len(concepts), 1), legend=True)
        height = 0.8 / n_lang
        base = np.arange(len(concepts), dtype=float)
        for number, language in enumerate(languages):
            axes.barh(
                base + number * height - 0.4 + height / 2,
                data[language].to_numpy(),
                height=height,
                label=language,
                color=_PALETTE[number % len(_PALETTE)],
            )
        _finish_axes(axes, base, labels, title, xlabel)
        if languages:
            axes.legend(title="language", loc="upper left", bbox_to_anchor=(1.01, 1.0), fontsize=8, title_fontsize=8, frameon=False)
    return figure


def save_figure(figure: Figure, path: Path) -> tuple[Path, list[str]]:
    """Save ``figure`` as PNG or SVG (by suffix) atomically and reproducibly; returns notes.

    matplotlib's missing-glyph warnings become notes naming the characters.
    """
    kind = path.suffix.lower().lstrip(".")
    if kind not in ("png", "svg"):
        raise ValueError(f"charts are saved as .png or .svg, not {path.suffix!r}")
    metadata = {"Date": None} if kind == "svg" else {"Software": None}
    # zlib level 1: a third less time than the default 6 for a PNG ~8 % larger.
    extra = {"pil_kwargs": {"compress_level": 1}} if kind == "png" else {}
    families = list(chart_fonts()[0])
    notes: list[str] = []
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        with matplotlib.rc_context({**_RC, "font.family": families}), atomic_path(path) as tmp:
            figure.savefig(str(tmp), format=kind, dpi=150, metadata=metadata, **extra)
    glyph_warnings = sorted({str(w.message) for w in caught if "missing from" in str(w.message)})
    if glyph_warnings:
        notes.append(f"chart {path.name}: some characters have no glyph in the installed fonts ({glyph_warnings[0]})")
    for w in caught:
        if "missing from" not in str(w.message):
            warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    return path, notes


def save_figure_as(figure: Figure, paths: Sequence[Path]) -> list[str]:
    """Save one figure in several formats (PNG, SVG); returns the notes of all saves."""
    notes: list[str] = []
    for path in paths:
        notes.extend(save_figure(figure, path)[1])
    return notes


# --------------------------------------------------------------------------- choosing what to draw

#: Columns tried, in order, as the bar length of a keyword chart.
_SCORE_COLUMNS: tuple[str, ...] = (
    "score",
    "mean_weight",
    "mean_tfidf",
    "tfidf",
    "weight",
    "ctfidf",
    "c_tfidf",
    "share",
    "g2",
    "count",
    "frequency",
)
_TERM_COLUMNS: tuple[str, ...] = ("term", "lemma", "concept", "keyword")
#: Axis titles for the rankings the weigh and compare stages write.
AXIS_TITLES: dict[str, str] = {
    "mean_weight": "mean TF-IDF weight over the answers (respondent-weighted)",
    "doc_share": "share of answers containing the term",
    "c_tfidf": "class-based TF-IDF (the group's answers as one document)",
    "mean_tfidf": "mean TF-IDF weight over the group's answers",
}


def chart_columns(frame: pd.DataFrame) -> tuple[str, str] | None:
    """The label column and the value column of a keyword table, or ``None`` if it has neither."""
    label = next((c for c in _TERM_COLUMNS if c in frame.columns), None)
    value = next((c for c in _SCORE_COLUMNS if c in frame.columns), None)
    if value is None:
        value = next((c for c in frame.columns if pd.api.types.is_float_dtype(frame[c].dtype)), None)
    if label is None or value is None:
        return None
    return label, str(value)


def top_terms(frame: pd.DataFrame, k: int) -> tuple[list[str], list[float], str] | None:
    """The ``k`` highest-scoring labels of a keyword table, highest first, and an axis label.

    Long tables with a ``ranking`` column (one block of rows per ranking, the
    score in the column of the same name) chart their first ranking.
    """
    if "ranking" in frame.columns and len(frame):
        first = str(frame["ranking"].iloc[0])
        frame = frame[frame["ranking"].astype(str) == first]
        if first in frame.columns and "term" in frame.columns:
            columns: tuple[str, str] | None = ("term", first)
        else:
            columns = chart_columns(frame)
        axis = AXIS_TITLES.get(first, first)
    else:
        columns = chart_columns(frame)
        axis = AXIS_TITLES.get(columns[1], columns[1]) if columns else ""
    if columns is None:
        return None
    label, value = columns
    data = frame[[label, value]].dropna()
    data = data[np.isfinite(data[value].astype(float))]
    data = data.sort_values(value, ascending=False, kind="stable").head(k)
    return [str(t) for t in data[label]], [float(v) for v in data[value]], axis


def concept_matrix(tables: dict[str, pd.DataFrame]) -> tuple[str, pd.DataFrame] | None:
    """A concepts-by-languages table for :func:`concept_chart`: index concept, one column per language.

    Reads the first table whose name starts with ``concept`` and that has a
    ``concept`` column: wide ``share_<lang>`` columns (the compare stage's
    ``concepts_by_language``) or long ``language`` + ``share`` columns.
    Returns the axis label and the table, or ``None``.
    """
    for name, frame in tables.items():
        if not name.lower().startswith("concept") or "concept" not in frame.columns:
            continue
        shares = [c for c in frame.columns if str(c).startswith("share_")]
        if shares:
            wide = frame.set_index("concept")[shares].astype(float)
            wide.columns = [str(c).removeprefix("share_") for c in shares]
            return "share of respondents mentioning", wide
        if {"language", "share"}.issubset(frame.columns):
            wide = frame.pivot_table(index="concept", columns="language", values="share", aggfunc="sum", sort=False)
            return "share of respondents mentioning", wide
    return None
