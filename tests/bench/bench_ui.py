"""Benchmark: a 100,000-answer study in the terminal UI.

Run on demand (not part of the test suite)::

    python tests/bench/bench_ui.py [--answers 100000]

It writes an invented study to a temporary folder, then reports side by side:

* the headless pipeline (``run_study``) on that study, first (lemma tables
  loaded) and again (tables cached in the process) — the floor for opening it;
* opening the study in the app (the same process, so tables are warm): until
  the answers table shows rows (after identify), and until every stage ran;
* latency from a key press in the Answers view to the first redraw of the
  answers table (typing in the search box, the language filter, the suspect
  filter, paging, jumping to the end). Target: under 150 ms each.

Latency is taken from the moment the key is posted to the first call of the
table's ``render_line`` that draws the new rows, so it includes filtering the
pandas table and the compositor's frame, not only the handler.
"""

from __future__ import annotations

import argparse
import asyncio
import csv
import statistics
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

TARGET_MS = 150.0

WORDS = {
    "en": "price delivery service quality staff app website support refund waiting order parcel friendly slow fast cheap expensive helpful broken easy".split(),
    "de": "Preis Lieferung Service Qualität Personal Webseite Bestellung Paket freundlich langsam schnell billig teuer hilfreich kaputt einfach".split(),
    "fr": "prix livraison service qualité personnel site commande colis aimable lent rapide cher utile cassé facile attente".split(),
    "es": "precio entrega servicio calidad personal pedido paquete amable lento rápido barato caro útil roto fácil espera".split(),
}
FRAMES = {
    "en": "The {0} was {1} and the {2} is {3}",
    "de": "Die {0} war {1} und der {2} ist {3}",
    "fr": "Le {0} était {1} et la {2} est {3}",
    "es": "El {0} fue {1} y el {2} es {3}",
}


def write_study(folder: Path, answers: int, seed: int = 7) -> Path:
    """An invented survey: one answer per respondent, four languages, two countries."""
    rng = np.random.default_rng(seed)
    languages = list(WORDS)
    with (folder / "answers.csv").open("w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(["rid", "country", "lang", "comment"])
        for i in range(answers):
            lang = languages[i % len(languages)]
            words = rng.choice(WORDS[lang], 4)
            text = FRAMES[lang].format(*words)
            writer.writerow([f"r{i:06d}", "Norland" if i % 3 else "Sudmark", lang, text])
    study = folder / "bench.study.toml"
    study.write_text(
        '[study]\nname = "bench"\n\n[[sources]]\npath = "answers.csv"\n\n'
        '[columns]\nid = "rid"\ntext = ["comment"]\ngroups = ["country"]\nlanguage_hint = "lang"\n\n'
        '[languages]\nexpected = ["en", "de", "fr", "es"]\n\n[compare]\nbootstrap = 20\n',
        encoding="utf-8",
    )
    return study


async def measure_app(study: Path) -> dict[str, list[float]]:
    from workbench.ui.app import TermloomApp
    from workbench.ui.widgets.frame_grid import FrameGrid

    results: dict[str, list[float]] = {}
    app = TermloomApp(study, debounce=0)
    began = time.perf_counter()
    async with app.run_test(size=(120, 40)) as pilot:
        grid = app.workbench.query_one("#answers-grid", FrameGrid)
        while not grid.row_count:
            await pilot.pause()
        results["open: first answers on screen (s)"] = [time.perf_counter() - began]
        await app.wait_until_idle()
        await pilot.pause()
        results["open: every stage done (s)"] = [time.perf_counter() - began]
        drawn: list[float] = []
        original = grid.render_line

        def timed(y: int):  # type: ignore[no-untyped-def]
            drawn.append(time.perf_counter())
            return original(y)

        grid.render_line = timed  # type: ignore[method-assign]

        async def latency(label: str, *keys: str) -> None:
            for key in keys:
                drawn.clear()
                start = time.perf_counter()
                await pilot.press(key)
                while not drawn:
                    await pilot.pause()
                results.setdefault(label, []).append((drawn[0] - start) * 1000)

        await pilot.press("slash")
        await latency("type in search (ms/key)", *"delivery")
        await latency("delete search text (ms/key)", *(["backspace"] * 8))
        await pilot.press("escape")
        grid.focus()
        await latency("suspect filter on/off (ms)", "m", "m")
        await latency("page down (ms)", *(["pagedown"] * 5))
        await latency("jump to end / start (ms)", "end", "home")
        await latency("clear filters (ms)", "c")
    return results


def main(argv: list[str]) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--answers", type=int, default=100_000)
    args = parser.parse_args(argv)
    from workbench.core.pipeline import run_study
    from workbench.core.settings import load_study

    with tempfile.TemporaryDirectory() as name:
        folder = Path(name)
        study_path = write_study(folder, args.answers)
        began = time.perf_counter()
        run_study(load_study(study_path))
        cold = time.perf_counter() - began
        began = time.perf_counter()
        run_study(load_study(study_path))
        headless = time.perf_counter() - began
        results = asyncio.run(measure_app(study_path))
    print(f"{args.answers:,} answers")
    print(f"{'measure':<38} {'median':>9} {'max':>9} {'target':>9} {'ratio':>7}")
    print(f"{'headless run_study, first (s)':<38} {cold:>9.2f} {cold:>9.2f} {'':>9} {'':>7}")
    print(f"{'headless run_study, again (s)':<38} {headless:>9.2f} {headless:>9.2f} {'':>9} {'':>7}")
    for label, values in results.items():
        median, worst = statistics.median(values), max(values)
        if label.endswith("(s)"):
            ratio = median / headless if headless else float("nan")
            print(f"{label:<38} {median:>9.2f} {worst:>9.2f} {'headless':>9} {ratio:>6.2f}x")
        else:
            print(f"{label:<38} {median:>9.1f} {worst:>9.1f} {TARGET_MS:>9.0f} {worst / TARGET_MS:>6.2f}x")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
