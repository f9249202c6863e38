"""Charts: no display needed, non-Latin labels drawable, reproducible SVG, sensible chart data."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import matplotlib.image
import numpy as np
import pandas as pd
import pytest

from workbench.core.charts import (
    chart_fonts,
    concept_chart,
    concept_matrix,
    keyword_chart,
    missing_glyphs,
    save_figure,
    top_terms,
)

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"  # PNG specification (W3C/ISO 15948), section 5.2


def test_greek_cyrillic_and_latin_labels_have_glyphs() -> None:
    """DejaVu Sans (shipped with matplotlib) covers Latin, Greek and Cyrillic; checked against the font's
    character map through matplotlib.ft2font."""
    labels = ["Straße", "ελληνικά", "καφές", "молоко", "çàéïõ", "łódź", "ğüşıö", "ñ"]
    assert missing_glyphs(labels) == []
    families, files = chart_fonts()
    assert families and len(families) == len(files)


def test_missing_glyphs_are_named() -> None:
    """A character outside every installed chart font is reported (U+10FFFD is a private-use code point
    that no font on the preferred list maps)."""
    assert missing_glyphs(["ok", "\U0010fffd"]) == ["\U0010fffd"]


def test_keyword_chart_png_is_a_readable_image(tmp_path: Path) -> None:
    """The PNG starts with the PNG signature and matplotlib.image.imread decodes it."""
    figure = keyword_chart(["καφές", "молоко", "price"], [0.9, 0.5, 0.25], "Top keywords — mixed", "mean weight")
    path, notes = save_figure(figure, tmp_path / "k.png")
    assert notes == []
    assert path.read_bytes()[:8] == PNG_SIGNATURE
    image = matplotlib.image.imread(path)
    assert image.ndim == 3 and image.shape[0] > 200 and image.shape[1] > 600
    # Not blank: the bars use the chart colour somewhere.
    assert (np.abs(image[..., :3] - np.array([0x3B, 0x6E, 0xA8]) / 255).sum(axis=2) < 0.05).any()


def test_svg_is_reproducible(tmp_path: Path) -> None:
    """matplotlib's svg.hashsalt and metadata Date=None (matplotlib docs, backend_svg) give identical bytes."""
    first = save_figure(keyword_chart(["a", "b"], [2.0, 1.0], "t", "x"), tmp_path / "a.svg")[0].read_bytes()
    second = save_figure(keyword_chart(["a", "b"], [2.0, 1.0], "t", "x"), tmp_path / "b.svg")[0].read_bytes()
    assert first == second
    assert b"<dc:date>" not in first
    png_a = save_figure(keyword_chart(["a"], [1.0], "t", "x"), tmp_path / "a.png")[0].read_bytes()
    png_b = save_figure(keyword_chart(["a"], [1.0], "t", "x"), tmp_path / "b.png")[0].read_bytes()
    assert png_a == png_b


def test_concept_chart_draws_one_bar_per_language_and_concept(tmp_path: Path) -> None:
    table = pd.DataFrame({"en": [0.3, 0.2], "de": [0.25, None], "ru": [0.1, 0.3]}, index=["price", "delivery"])
    figure = concept_chart(table, "Concepts across languages", "share of answers")
    axes = figure.axes[0]
    assert len(axes.patches) == 6
    assert [t.get_text() for t in axes.get_yticklabels()] == ["price", "delivery"]
    assert [t.get_text() for t in axes.get_legend().get_texts()] == ["en", "de", "ru"]
    path, _ = save_figure(figure, tmp_path / "c.svg")
    assert path.read_text(encoding="utf-8").startswith("<?xml")


def test_unknown_suffix_is_refused(tmp_path: Path) -> None:
    with pytest.raises(ValueError, match="png or .svg"):
        save_figure(keyword_chart(["a"], [1.0], "t", "x"), tmp_path / "k.pdf")


def test_top_terms_uses_the_first_ranking_of_a_long_keyword_table() -> None:
    """Keyword tables hold several rankings one after another (column 'ranking'); the chart takes the first."""
    table = pd.DataFrame(
        {
            "ranking": ["mean_weight"] * 3 + ["doc_share"] * 3,
            "rank": [1, 2, 3, 1, 2, 3],
            "term": ["b", "a", "c", "a", "c", "b"],
            "mean_weight": [0.5, 0.4, 0.1, 0.4, 0.1, 0.5],
            "doc_share": [0.2, 0.6, 0.3, 0.6, 0.3, 0.2],
        }
    )
    terms, values, column = top_terms(table, 2)
    assert (terms, values) == (["b", "a"], [0.5, 0.4])
    assert column.startswith("mean TF-IDF weight")
    group_table = table.rename(columns={"mean_weight": "score"}).assign(ranking=["c_tfidf"] * 3 + ["mean_tfidf"] * 3)
    terms, values, column = top_terms(group_table, 3)
    assert terms == ["b", "a", "c"] and column.startswith("class-based TF-IDF")


def test_concept_matrix_from_a_long_table() -> None:
    table = pd.DataFrame({"concept": ["price", "price", "staff"], "language": ["en", "de", "en"], "share": [0.3, 0.2, 0.1]})
    xlabel, wide = concept_matrix({"concepts": table})
    assert xlabel == "share of respondents mentioning"
    assert wide.loc["price", "de"] == 0.2 and np.isnan(wide.loc["staff", "de"])
    assert concept_matrix({"keyness": table}) is None


def test_charts_never_load_pyplot() -> None:
    """pyplot keeps global state and may pick a display backend; the export must work without it."""
    code = (
        "import sys, pathlib, tempfile\n"
        "from workbench.core.charts import keyword_chart, save_figure\n"
        "d = pathlib.Path(tempfile.mkdtemp())\n"
        "save_figure(keyword_chart(['a'], [1.0], 't', 'x'), d / 'a.png')\n"
        "print('matplotlib.pyplot' in sys.modules)\n"
    )
    env = {k: v for k, v in os.environ.items() if k not in ("DISPLAY", "WAYLAND_DISPLAY", "MPLBACKEND")}
    result = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120, env=env)
    assert result.returncode == 0, result.stderr
    assert result.stdout.strip() == "False"
