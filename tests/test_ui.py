"""The terminal UI driven through Textual's Pilot, and snapshots of every view.

The study is a small invented survey (about 100 answers in English, German
and French from two invented countries) written to ``tmp_path`` so the tests
are fast and never touch the repository. Workers are awaited with
``TermloomApp.wait_until_idle`` (no sleeps). What the UI shows is checked
against the core's own results for the same study and decisions (the UI must
not compute anything itself).
"""

from __future__ import annotations

import csv
import shutil
import tomllib
from pathlib import Path

import pytest
from textual import events

from workbench.core.decisions import DecisionStore
from workbench.ui.app import TermloomApp
from workbench.ui.screens.choice_screen import ChoiceScreen
from workbench.ui.screens.help_screen import HelpScreen
from workbench.ui.widgets.frame_grid import FrameGrid
from workbench.ui.widgets.keywords_view import KeywordsView
from workbench.ui.widgets.kwic_panel import KwicPanel

# Pilot tests are coroutines; anyio's pytest plugin runs them on asyncio.
pytestmark = pytest.mark.anyio

#: Answers are two clauses joined, so every answer is different (no duplicate flags).
CLAUSES = {
    "en": (
        [
            "basically the delivery was fast",
            "the staff were friendly",
            "basically cheap tickets",
            "the price of the monthly pass is too high",
            "the card took three weeks basically",
            "a clean station",
            "the app is slow",
            "basically good value for the price",
        ],
        ["the trains are clean", "the price keeps rising", "the app keeps crashing", "basically fine", "support never answers"],
    ),
    "de": (
        [
            "die Lieferung war schnell",
            "das Personal war freundlich",
            "günstige Tickets",
            "der Preis für die Monatskarte ist zu hoch",
            "die Karte kam erst nach drei Wochen",
            "ein sauberer Bahnhof",
        ],
        ["die Züge sind sauber", "der Preis steigt ständig", "die App stürzt ständig ab", "niemand antwortet"],
    ),
    "fr": (
        [
            "la livraison était rapide",
            "le personnel était aimable",
            "des billets bon marché",
            "le prix de l'abonnement mensuel est trop élevé",
        ],
        ["les trains sont propres", "le prix augmente sans cesse", "l'application plante sans cesse"],
    ),
}
JOIN = {"en": "and", "de": "und", "fr": "et"}
#: Answers a detector gets wrong or cannot tell: short, junk, or not in the language the hint says.
TRICKY = ["ok", "Super!", "n/a", "asdfghjkl", "Prix trop élevé"]

STUDY = """\
# invented survey for the UI tests — this comment must survive role edits
[study]
name = "ui-test"

[[sources]]
path = "answers.csv"

[columns]
id = "rid"
text = ["comment"]
groups = ["country"]
language_hint = "lang"

[languages]
expected = ["en", "de", "fr"]

[weigh]
min_df = 2

[compare]
min_freq = 2
min_group_size = 5
bootstrap = 10
"""


def write_study(folder: Path) -> Path:
    """About 100 different answers in three languages from two countries, plus a few tricky ones."""
    rows = []
    number = 0
    for lang, (first, second) in CLAUSES.items():
        for a in first:
            for b in second:
                number += 1
                country = "Norland" if number % 2 else "Sudmark"
                rows.append([f"r{number:03d}", country, lang, f"{a} {JOIN[lang]} {b}"])
    for text in TRICKY:
        number += 1
        rows.append([f"r{number:03d}", "Norland", "en", text])
    with (folder / "answers.csv").open("w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(["rid", "country", "lang", "comment"])
        writer.writerows(rows)
    path = folder / "ui-test.study.toml"
    path.write_text(STUDY, encoding="utf-8")
    return path


@pytest.fixture(scope="module")
def study_template(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return write_study(tmp_path_factory.mktemp("ui-study"))


@pytest.fixture
def study(study_template: Path, tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Path:
    """A fresh copy per test, so decision stores never leak between tests.

    The test runs inside ``tmp_path``: the default export folder is relative to
    the current folder, as for ``termloom run``.
    """
    for name in ("answers.csv", study_template.name):
        shutil.copy(study_template.parent / name, tmp_path / name)
    monkeypatch.chdir(tmp_path)
    return tmp_path / study_template.name


async def _open(app: TermloomApp, pilot) -> None:  # type: ignore[no-untyped-def]
    await app.wait_until_idle()
    await pilot.pause()


def _grid(app: TermloomApp, grid_id: str) -> FrameGrid:
    return app.workbench.query_one(f"#{grid_id}", FrameGrid)


def _shown(grid: FrameGrid, column: str) -> list[str]:
    positions = grid._positions  # noqa: SLF001 - the rows on screen, in order
    return [str(v) for v in grid.frame[column].to_numpy()[positions]]


async def _choose(pilot, value: str) -> None:  # type: ignore[no-untyped-def]
    screen = pilot.app.screen
    assert isinstance(screen, ChoiceScreen)
    values = [v for v, _ in screen.choices]
    screen.query_one("#choices").highlighted = values.index(value)
    await pilot.press("enter")


# ---------------------------------------------------------------------------- answers


async def test_open_study_shows_every_answer(study: Path) -> None:
    app = TermloomApp(study, debounce=0)
    async with app.run_test(size=(120, 40)) as pilot:
        await _open(app, pilot)
        outputs = app.session.outputs
        assert outputs is not None and outputs.compared is not None
        grid = _grid(app, "answers-grid")
        assert grid.row_count == len(outputs.answers) == 8 * 5 + 6 * 4 + 4 * 3 + len(TRICKY)
        assert app.focused is grid


async def test_override_language_is_stored_and_recomputed(study: Path) -> None:
    """l on an answer stores a language decision at once; identify then labels it 'decision'."""
    app = TermloomApp(study, debounce=0)
    async with app.run_test(size=(120, 40)) as pilot:
        await _open(app, pilot)
        await pilot.press("2")
        grid = _grid(app, "answers-grid")
        target = grid.frame.loc[grid.frame["raw_text"] == "Prix trop élevé", "answer_id"].iloc[0]
        assert grid.move_to_key(target)
        await pilot.press("l")
        await _choose(pilot, "fr")
        # Stored before any recomputation finished.
        with DecisionStore(study.with_name("ui-test.decisions.sqlite")) as store:
            assert store.active().language == {target: "fr"}
        await app.wait_until_idle()
        answers = app.session.outputs.answers.set_index("answer_id")
        assert answers.loc[target, "language"] == "fr"
        assert answers.loc[target, "language_source"] == "decision"
        assert grid.current_key() == target


async def test_suspect_filter_and_search(study: Path) -> None:
    """m shows answers whose language looks wrong, least sure first; / narrows by text."""
    app = TermloomApp(study, debounce=0)
    async with app.run_test(size=(120, 40)) as pilot:
        await _open(app, pilot)
        grid = _grid(app, "answers-grid")
        total = grid.row_count
        await pilot.press("m")
        suspects = grid.row_count
        assert 0 < suspects < total
        confidences = [float(c) for c in grid.frame["confidence"].to_numpy()[grid._positions]]  # noqa: SLF001
        assert confidences == sorted(confidences)
        await pilot.press("m", "slash", *"preis")
        shown = _shown(grid, "raw_text")
        assert shown and all("preis" in text.lower() for text in shown)
        assert len(shown) == sum("preis" in text.lower() for text in grid.frame["raw_text"])
        await pilot.press("escape", "c")
        assert grid.row_count == total


async def test_non_answer_and_exclude_toggle(study: Path) -> None:
    app = TermloomApp(study, debounce=0)
    async with app.run_test(size=(120, 40)) as pilot:
        await _open(app, pilot)
        grid = _grid(app, "answers-grid")
        first = grid.current_key()
        await pilot.press("x")
        await app.wait_until_idle()
        answers = app.session.outputs.answers.set_index("answer_id")
        assert not answers.loc[first, "enters_weighting"]
        await pilot.press("n")
        await app.wait_until_idle()
        answers = app.session.outputs.answers.set_index("answer_id")
        assert "non_answer" in list(answers.loc[first, "flags"])
        await pilot.press("ctrl+z", "ctrl+z")
        await app.wait_until_idle()
        answers = app.session.outputs.answers.set_index("answer_id")
        assert answers.loc[first, "enters_weighting"]
        assert "non_answer" not in list(answers.loc[first, "flags"])


async def test_keys_typed_in_a_burst_land_where_meant(study: Path) -> None:
    """Keys read faster than handled (a paste, a busy moment) keep their order and target.

    The keys are queued all at once, before any is handled: switching view,
    then ``/`` and a word, then leaving the box and pressing a table key.
    """
    app = TermloomApp(study, debounce=0)
    async with app.run_test(size=(120, 40)) as pilot:
        await _open(app, pilot)

        def burst(*keys: tuple[str, str | None]) -> None:
            for key, character in keys:
                app.post_message(events.Key(key, character))

        burst(("3", "3"), ("slash", "/"), ("s", "s"), ("t", "t"), ("a", "a"), ("enter", "\r"), ("right_square_bracket", "]"))
        for _ in range(5):  # each key hops through a few message queues
            await pilot.pause()
        assert app.workbench.query_one("#terms-search").value == "sta"
        assert app.focused is _grid(app, "terms-grid")
        assert app.workbench.view("terms").language == "en"
        burst(("2", "2"), ("slash", "/"), ("p", "p"), ("r", "r"), ("i", "i"), ("escape", None), ("m", "m"))
        for _ in range(5):  # each key hops through a few message queues
            await pilot.pause()
        answers = app.workbench.view("answers")
        assert answers.query_state.text == "pri"
        assert answers.query_state.flag == "suspect language"
        assert app.focused is _grid(app, "answers-grid")


async def test_full_text_opens_and_closes(study: Path) -> None:
    app = TermloomApp(study, debounce=0)
    async with app.run_test(size=(120, 40)) as pilot:
        await _open(app, pilot)
        await pilot.press("enter")
        assert type(app.screen).__name__ == "AnswerScreen"
        await pilot.press("escape")
        assert type(app.screen).__name__ == "WorkbenchScreen"


# ---------------------------------------------------------------------------- terms and keywords


def _keywords_en(app: TermloomApp) -> list[str]:
    weighed = app.session.outputs.weighed
    table = weighed.keywords["en"]
    return table.loc[table["ranking"] == "mean_weight", "term"].astype(str).tolist()


async def test_stop_word_changes_keywords_and_undo_restores(study: Path) -> None:
    """s in the Terms view drops 'basically' from the English keywords; ^z brings it back."""
    app = TermloomApp(study, debounce=0)
    async with app.run_test(size=(120, 40)) as pilot:
        await _open(app, pilot)
        await pilot.press("4", "right_square_bracket")  # de -> en
        kw = _grid(app, "kw-grid")
        assert app.workbench.view("keywords").scope == "unit:en"
        assert "basically" in _shown(kw, "term")
        await pilot.press("3")
        terms = _grid(app, "terms-grid")
        assert app.workbench.view("terms").language == "de"
        await pilot.press("right_square_bracket")  # de -> en
        assert terms.move_to_key("basically")
        await pilot.press("s")
        await app.wait_until_idle()
        assert "basically" not in _keywords_en(app)
        assert "basically" in set(app.session.outputs.terms.stop_words["en"])
        await pilot.press("4")
        assert "basically" not in _shown(kw, "term")
        await pilot.press("ctrl+z")
        await app.wait_until_idle()
        assert "basically" in _keywords_en(app)
        assert "basically" in _shown(kw, "term")
        await pilot.press("ctrl+y")
        await app.wait_until_idle()
        assert "basically" not in _keywords_en(app)


async def test_merge_terms_records_a_lemma_decision(study: Path) -> None:
    app = TermloomApp(study, debounce=0)
    async with app.run_test(size=(120, 40)) as pilot:
        await _open(app, pilot)
        await pilot.press("3", "right_square_bracket")
        terms = _grid(app, "terms-grid")
        assert terms.move_to_key("cheap")
        await pilot.press("space")
        assert terms.move_to_key("price")
        await pilot.press("M")
        await app.wait_until_idle()
        assert app.session.active().lemma == {"en": {"cheap": "price"}}
        vocabulary = app.session.outputs.terms.vocabularies["en"]
        assert "cheap" not in set(vocabulary["term"])


async def test_compare_two_countries_and_kwic(study: Path) -> None:
    app = TermloomApp(study, debounce=0)
    async with app.run_test(size=(120, 40)) as pilot:
        await _open(app, pilot)
        await pilot.press("4", "c")
        kw = _grid(app, "kw-grid")
        assert {"g2", "log_ratio", "p_adj"} <= set(kw.frame.columns)
        # Group B from the list: Sudmark by name rather than "the rest".
        await pilot.press("b")
        await _choose(pilot, "Sudmark")
        view = app.workbench.query_one(KeywordsView)
        while ("country", "Sudmark") not in view.pair_tables:
            await pilot.pause(0.05)
        await app.workers.wait_for_complete()
        await pilot.pause()
        assert view.group_a == "Norland" and view.group_b == "Sudmark"
        kw.focus()
        assert kw.row_count
        term = str(kw.current_row()["term"])
        await pilot.press("k")
        panel = app.workbench.query_one("#kw-kwic", KwicPanel)
        assert panel.has_class("-shown")
        await app.workers.wait_for_complete()
        await pilot.pause()
        assert panel.label is not None and panel.label.endswith("in Norland and Sudmark")
        assert panel.lines is not None and len(panel.lines), f"no KWIC lines for {term!r}"


# ---------------------------------------------------------------------------- sources and export


async def test_sources_roles_are_written_to_the_study(study: Path) -> None:
    app = TermloomApp(study, debounce=0)
    async with app.run_test(size=(120, 40)) as pilot:
        await _open(app, pilot)
        await pilot.press("1")
        await app.workers.wait_for_complete()
        await pilot.pause()
        roles = _grid(app, "roles-grid")
        assert roles.move_to_key("country")
        await pilot.press("g")  # country is no longer a group
        await pilot.press("ctrl+s")
        await app.wait_until_idle()
    text = study.read_text(encoding="utf-8")
    assert "this comment must survive role edits" in text
    data = tomllib.loads(text)
    assert "groups" not in data["columns"]
    assert data["compare"] == {"min_freq": 2, "min_group_size": 5, "bootstrap": 10}


async def test_export_writes_the_run(study: Path, tmp_path: Path) -> None:
    app = TermloomApp(study, debounce=0)
    out = tmp_path / "out"
    async with app.run_test(size=(120, 40)) as pilot:
        await _open(app, pilot)
        await pilot.press("5")
        folder = app.workbench.query_one("#export-folder")
        folder.value = str(out)
        await pilot.press("w")
        await app.wait_until_idle()
        files = _grid(app, "export-files")
        written = app.workbench.view("export").written
        assert written and all(path.exists() for path in written)
        assert files.row_count == len(written)
        assert (out / "manifest.json").exists()


# ---------------------------------------------------------------------------- keys, help, errors


async def test_help_lists_every_view_key(study: Path) -> None:
    app = TermloomApp(study, debounce=0)
    async with app.run_test(size=(80, 24)) as pilot:
        await _open(app, pilot)
        await pilot.press("question_mark")
        assert isinstance(app.screen, HelpScreen)
        scopes = {action.scope for action in app.screen.actions}
        assert {"Everywhere", "Sources", "Answers", "Terms", "Keywords", "Export"} <= scopes
        await pilot.press("escape")
        assert not isinstance(app.screen, HelpScreen)


async def test_palette_runs_a_view_action(study: Path) -> None:
    app = TermloomApp(study, debounce=0)
    async with app.run_test(size=(120, 40)) as pilot:
        await _open(app, pilot)
        await pilot.press("ctrl+p")
        await pilot.press(*"Keywords: Compare two groups")
        await pilot.pause()
        await pilot.press("enter")
        await app.wait_until_idle()
        await pilot.pause()
        assert app.workbench.query_one("#views").active == "tab-keywords"
        assert app.workbench.view("keywords").mode == "two groups"


async def test_missing_source_is_a_notification_not_a_traceback(tmp_path: Path) -> None:
    path = tmp_path / "broken.study.toml"
    path.write_text('[[sources]]\npath = "nowhere.csv"\n[columns]\ntext = ["q"]\n', encoding="utf-8")
    app = TermloomApp(path, debounce=0)
    async with app.run_test(size=(120, 40)) as pilot:
        await _open(app, pilot)
        messages = [n.message for n in app._notifications]  # noqa: SLF001
        assert any("nowhere.csv" in message for message in messages)
        assert app.session is not None and app.session.outputs is None


# ---------------------------------------------------------------------------- snapshots


def _snap(study: Path, keys: list[str]):  # type: ignore[no-untyped-def]
    async def run_before(pilot) -> None:  # type: ignore[no-untyped-def]
        await pilot.app.wait_until_idle()
        await pilot.pause()
        for key in keys:
            await pilot.press(key)
        await pilot.app.workers.wait_for_complete()
        await pilot.pause()
        pilot.app.clear_notifications()
        await pilot.pause()

    return run_before


@pytest.mark.parametrize(
    "view,keys",
    [
        ("sources", ["1"]),
        ("answers", ["2"]),
        ("terms", ["3"]),
        ("keywords", ["4"]),
        ("export", ["5"]),
        ("decisions", ["2", "d"]),
        ("help", ["question_mark"]),
    ],
)
def test_snapshot_views(snap_compare, study: Path, view: str, keys: list[str]) -> None:  # type: ignore[no-untyped-def]
    assert snap_compare(TermloomApp(study, debounce=0), terminal_size=(120, 40), run_before=_snap(study, keys))


def test_snapshot_main_view_small_terminal(snap_compare, study: Path) -> None:  # type: ignore[no-untyped-def]
    assert snap_compare(TermloomApp(study, debounce=0), terminal_size=(80, 24), run_before=_snap(study, ["2"]))
