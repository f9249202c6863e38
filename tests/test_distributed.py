"""The Dask engine gives the in-process engine's results, survives a dying worker, and fails in one line.

Reference: the in-process engine (``pipeline.run_study`` / ``run_to_folder``)
on the same study — the issue's contract is identical matrices and keyword
tables (same terms, same order, values to 1e-12), the same answers table and
the same ledger. Inputs: a survey built here from chatterbot-corpus
utterances (outside open data, installed with the ``test`` extra) in four
languages, and the demo study in ``demo_texts/``. Clusters are
``distributed.LocalCluster`` objects with two single-threaded worker
processes on 127.0.0.1.
"""

from __future__ import annotations

import csv
import functools
import importlib.resources
import os
import random
import subprocess
import sys
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest
import scipy.sparse as sp

distributed = pytest.importorskip("distributed")
dask = pytest.importorskip("dask")

from workbench.core import distributed as engine  # noqa: E402
from workbench.core.decisions import DecisionStore  # noqa: E402
from workbench.core.errors import EngineError, SettingsError  # noqa: E402
from workbench.core.pipeline import STAGES, RunOutputs, run_study  # noqa: E402
from workbench.core.progress import Reporter  # noqa: E402
from workbench.core.settings import load_study  # noqa: E402

DEMO = Path(__file__).resolve().parents[1] / "demo_texts" / "demo.study.toml"
LANGUAGES = {"english": "en", "german": "de", "french": "fr", "spanish": "es"}


# --------------------------------------------------------------------------- the study


def _utterances(folder: str) -> list[str]:
    import yaml

    root = Path(str(importlib.resources.files("chatterbot_corpus") / "data" / folder))
    seen: set[str] = set()
    for path in sorted(root.glob("*.yml")):
        for conversation in (yaml.safe_load(path.read_text(encoding="utf-8")) or {}).get("conversations") or []:
            for line in conversation or []:
                if isinstance(line, str) and line.strip():
                    seen.add(" ".join(line.split()))
    return sorted(seen)


STUDY = """
[study]
name = "engines agree"

[[sources]]
path = "survey.csv"

[columns]
id = "rid"
text = ["q1", "q2"]
groups = ["country", "wave"]
weight = "weight"
language_hint = "lang"

[languages]
expected = ["en", "de", "fr", "es"]

[clean]
near_duplicate_min_chars = 30

[weigh]
min_df = 1

[compare]
min_group_size = 10
min_freq = 2
bootstrap = 20
kwic_terms = ["good"]

[export]
formats = ["csv", "json", "parquet", "mtx", "npz"]

[engine]
workers = 2
partition_rows = 100
"""


@pytest.fixture(scope="module")
def survey(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """About 330 answers of 180 respondents, with the mess the stages handle, and decisions.

    Utterances from chatterbot-corpus (en, de, fr, es); answers join one or
    two of one language. Added: e-mail addresses at example.org (RFC 2606),
    non-answers, a keyboard mash, copies of long answers by other
    respondents, a respondent repeating themselves, a repeated and a blank
    id, wrong and blank hints; decisions of every kind in the decision store.
    """
    pytest.importorskip("chatterbot_corpus")
    folder = tmp_path_factory.mktemp("engines")
    rng = random.Random(20240601)
    pools = {code: _utterances(name) for name, code in LANGUAGES.items()}
    rows = []
    for number in range(1, 181):
        code = rng.choice(list(pools))
        q1 = " ".join(rng.sample(pools[code], rng.choice((1, 2, 2))))
        q2 = rng.choice(pools[code]) if rng.random() < 0.85 else ""
        hint = code if rng.random() < 0.9 else rng.choice(["", "xx", "de"])
        rows.append([f"r{number}", rng.choice(["A", "B", "C"]), rng.choice(["w1", "w2"]), hint,
                     f"{rng.uniform(0.5, 2.0):.3f}", q1, q2])
    for number in range(5):
        rows[number * 7][5] += f" Write to me at person{number}@example.org please."
    for number, junk in enumerate(["n/a", "-", "asdfghjkl", "???", "nothing"]):
        rows[100 + number][6] = junk
    long_ones = [r for r in rows if len(r[5]) > 60][:6]
    for number, source in enumerate(long_ones):
        rows[120 + number][5] = source[5]
    for number in range(3):
        rows[140 + number][6] = rows[140 + number][5]
    rows[150][0] = rows[10][0]
    rows[151][0] = ""
    with (folder / "survey.csv").open("w", encoding="utf-8", newline="") as handle:
        writer = csv.writer(handle)
        writer.writerow(["rid", "country", "wave", "lang", "weight", "q1", "q2"])
        writer.writerows(rows)
    (folder / "engines.study.toml").write_text(STUDY, encoding="utf-8")
    with DecisionStore(folder / "engines.decisions.sqlite") as store:
        store.record("language", "r3|q1", "de")
        store.record("non_answer", "r5|q1", "1")
        store.record("non_answer", "r102|q2", "0")
        store.record("exclude", "r8|q2", "1")
        store.record("stop_add", "good", language="en")
        store.record("stop_remove", "nicht", language="de")
        store.record("lemma", "bonjour", "salut", language="fr")
    return folder / "engines.study.toml"


@pytest.fixture(scope="module")
def local_run(survey: Path) -> RunOutputs:
    return run_study(load_study(survey))


@pytest.fixture(scope="module")
def cluster() -> Any:
    """Two worker processes on loopback; a worker that dies is retried once, the second death fails the task."""
    import logging

    with dask.config.set({"distributed.scheduler.allowed-failures": 1}):
        started = distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                                           dashboard_address="127.0.0.1:0", silence_logs=logging.ERROR)
    yield started
    started.close()


# --------------------------------------------------------------------------- comparing runs


def _frames_equal(left: pd.DataFrame, right: pd.DataFrame, what: str) -> None:
    # List cells (flags, masks, terms) compare as tuples.
    def plain(frame: pd.DataFrame) -> pd.DataFrame:
        return frame.apply(lambda col: col.map(lambda v: tuple(v) if isinstance(v, list | np.ndarray) else v)
                           if col.dtype == object else col)

    pd.testing.assert_frame_equal(plain(left), plain(right), check_exact=False, rtol=0, atol=1e-12, obj=what)


def _matrices_equal(left: sp.csr_matrix, right: sp.csr_matrix, what: str) -> None:
    assert left.shape == right.shape, what
    assert np.array_equal(left.indptr, right.indptr) and np.array_equal(left.indices, right.indices), what
    assert np.allclose(left.data, right.data, rtol=0, atol=1e-12), what


def assert_same_run(local: RunOutputs, other: RunOutputs) -> None:
    """Answers table, ledger, vocabularies, matrices, keyword and compare tables all equal,
    up to the last stage ``other`` ran (``local`` may have run further)."""
    last = [stage for stage in STAGES if stage in other.snapshots][-1]
    _frames_equal(local.snapshots[last], other.snapshots[last], f"answers after {last}")
    later = STAGES[STAGES.index(last) + 1] if last != STAGES[-1] else None
    ledger = local.ledger.truncated(local.ledger_marks[later]) if later in local.ledger_marks else local.ledger
    _frames_equal(ledger.frame(), other.ledger.frame(), "ledger")
    if other.terms is not None:
        assert local.terms.vocabularies.keys() == other.terms.vocabularies.keys()
        for lang, frame in local.terms.vocabularies.items():
            _frames_equal(frame, other.terms.vocabularies[lang], f"vocabulary {lang}")
            _frames_equal(local.terms.stop_hits[lang], other.terms.stop_hits[lang], f"stop hits {lang}")
        assert local.terms.overrides_applied == other.terms.overrides_applied
        assert local.terms.stop_words == other.terms.stop_words
        assert local.terms.backends == other.terms.backends
        assert local.terms.notes == other.terms.notes
    if other.weighed is not None:
        a, b = local.weighed, other.weighed
        assert a.counts.keys() == b.counts.keys()
        for lang in a.counts:
            assert list(a.counts[lang].terms) == list(b.counts[lang].terms), lang
            assert list(a.counts[lang].row_ids) == list(b.counts[lang].row_ids), lang
            _matrices_equal(a.counts[lang].matrix, b.counts[lang].matrix, f"counts {lang}")
            _matrices_equal(a.weighted[lang], b.weighted[lang], f"weights {lang}")
        assert list(a.pooled.terms) == list(b.pooled.terms)
        _matrices_equal(a.pooled_weighted, b.pooled_weighted, "pooled weights")
        assert a.keywords.keys() == b.keywords.keys()
        for name, frame in a.keywords.items():
            _frames_equal(frame, b.keywords[name], f"keywords {name}")
    if other.compared is not None:
        assert local.compared.tables.keys() == other.compared.tables.keys()
        for name, frame in local.compared.tables.items():
            _frames_equal(frame, other.compared.tables[name], f"compare table {name}")


# --------------------------------------------------------------------------- pure parts


def test_partitions_cover_every_item_once() -> None:
    """Contiguous slices, each at most partition_rows long, four per worker once there are enough items."""
    for n, rows, workers in [(0, 100, 2), (1, 100, 2), (999, 100, 2), (10_000, 50_000, 2), (123_457, 50_000, 3)]:
        bounds = engine.partition_bounds(n, rows, workers)
        covered = [i for start, stop in bounds for i in range(start, stop)]
        assert covered == list(range(n))
        assert all(stop - start <= rows for start, stop in bounds)
    assert len(engine.partition_bounds(10_000, 50_000, 2)) == 8
    assert len(engine.partition_bounds(1_500, 50_000, 2)) == 2


def test_core_imports_without_dask() -> None:
    """The core and the engine module import with dask hidden; asking for the engine names the install command."""
    code = (
        "import sys; sys.modules['dask'] = None; sys.modules['distributed'] = None\n"
        "import workbench.core.pipeline, workbench.core.distributed as d\n"
        "from workbench.core.settings import Engine\n"
        "try:\n    d.dask_mapper(Engine(kind='dask')).__enter__()\n"
        "except Exception as e:\n    print(type(e).__name__, e)\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout.strip()
    assert out == 'SettingsError engine.kind = "dask" needs Dask; install it with: pip install "termloom[dask]"'


def test_missing_dask_is_a_settings_error(monkeypatch: pytest.MonkeyPatch, survey: Path) -> None:
    monkeypatch.setitem(sys.modules, "distributed", None)
    with pytest.raises(SettingsError, match=r'pip install "termloom\[dask\]"'):
        engine.run_study_dask(load_study(survey, ["engine.kind=dask"]))


def test_no_scheduler_at_the_address_is_one_line(monkeypatch: pytest.MonkeyPatch, survey: Path) -> None:
    monkeypatch.setattr(engine, "CONNECT_TIMEOUT", "1s")
    study = load_study(survey, ["engine.kind=dask", 'engine.scheduler="127.0.0.1:9"'])
    with pytest.raises(EngineError) as caught:
        engine.run_study_dask(study)
    message = str(caught.value)
    assert message.startswith("no Dask scheduler answers at 127.0.0.1:9 (") and "dask scheduler" in message
    assert "\n" not in message and caught.value.exit_code == 6


# --------------------------------------------------------------------------- engines agree


@pytest.mark.slow
def test_own_local_cluster_gives_the_same_run_and_is_closed(survey: Path, local_run: RunOutputs) -> None:
    """No scheduler address: a LocalCluster of engine.workers processes is started, used and closed."""
    import psutil

    before = {p.pid for p in psutil.Process().children(recursive=True)}
    outputs = engine.run_study_dask(load_study(survey, ["engine.kind=dask"]), until="terms")
    assert_same_run(local_run, outputs)
    assert outputs.engine["kind"] == "dask" and outputs.engine["workers"] == 2 and outputs.engine["threads"] == 2
    assert outputs.engine["scheduler"].startswith("local cluster")
    # ~300 distinct texts in partitions of at most 100
    assert all(outputs.engine["partitions"][stage] >= 3 for stage in ("clean", "identify", "terms"))
    # Worker processes are spawned (multiprocessing's spawn_main); its resource tracker lives on by design.
    left = [" ".join(p.cmdline()) for p in psutil.Process().children(recursive=True)
            if p.pid not in before and p.is_running() and p.status() != psutil.STATUS_ZOMBIE]
    assert [c for c in left if "resource_tracker" not in c] == []


@pytest.mark.slow
def test_cli_on_a_scheduler_writes_the_same_folder(
    survey: Path, local_run: RunOutputs, cluster: Any, tmp_path: Path
) -> None:
    """``termloom run --engine dask --scheduler ADDRESS`` against a scheduler on loopback, and the default
    engine's run written by the same export: matrices, term lists, row ids, keyword and compare tables,
    ledger and corpus are the same."""
    from workbench.cli import main
    from workbench.core.export import write_run
    from workbench.core.manifest import read_manifest

    write_run(tmp_path / "local", local_run, Reporter())
    assert main(["--quiet", "run", str(survey), "--engine", "dask", "--scheduler", cluster.scheduler_address,
                 "--out", str(tmp_path / "dask")]) == 0
    local, dask_out = tmp_path / "local", tmp_path / "dask"
    for path in sorted((local / "matrices").glob("*.npz")):
        _matrices_equal(sp.load_npz(path).tocsr(), sp.load_npz(dask_out / "matrices" / path.name).tocsr(), path.name)
    texts = [p for folder in ("matrices", "keywords", "compare", "terms") for p in sorted((local / folder).glob("*"))
             if p.suffix in (".txt", ".csv", ".json", ".mtx")]
    assert len(texts) > 20
    for path in texts:
        assert path.read_bytes() == (dask_out / path.relative_to(local)).read_bytes(), path.name
    for name in ("ledger.parquet", "corpus/answers.parquet"):
        _frames_equal(pd.read_parquet(local / name), pd.read_parquet(dask_out / name), name)
    manifests = read_manifest(local), read_manifest(dask_out)
    assert manifests[0]["stages"] == manifests[1]["stages"] and manifests[0]["ledger"] == manifests[1]["ledger"]
    assert manifests[0]["engine"] == {"kind": "local"}
    described = manifests[1]["engine"]
    assert described["kind"] == "dask" and described["scheduler"] == cluster.scheduler_address
    assert described["workers"] == 2 and described["partition_rows"] == 100 and described["hashing"] is None


@pytest.mark.slow
def test_demo_study_agrees(cluster: Any) -> None:
    """The demo study (1,500 respondents, nine languages, glossary, weights) up to the weigh stage."""
    local = run_study(load_study(DEMO), until="weigh")
    study = load_study(DEMO, ["engine.kind=dask", f'engine.scheduler="{cluster.scheduler_address}"',
                              "engine.partition_rows=500"])
    assert_same_run(local, engine.run_study_dask(study, until="weigh"))


# --------------------------------------------------------------------------- a worker dies


def _dying(marker: str | None) -> Any:
    """A wrapper around a work function that kills its worker process (``os._exit``).

    With a marker file it kills only the first time any partition runs (the
    file says it happened); without one, every time. A local function, so the
    cluster sends it by value (cloudpickle): worker processes cannot import
    this test module.
    """

    def die(work: Any, items: list[Any], kit: Any) -> list[Any]:
        if marker is not None:
            try:
                fd = os.open(marker, os.O_CREAT | os.O_EXCL | os.O_WRONLY)
            except FileExistsError:
                return work(items, kit)
            os.close(fd)
        os._exit(1)

    return die


class _DyingMapper(engine.DaskMapper):
    """A DaskMapper whose partitions of one stage run through a wrapper made by :func:`_dying`."""

    def __init__(self, client: Any, wrap: Any, stage: str) -> None:
        super().__init__(client, partition_rows=100)
        self.wrap = wrap
        self.stage = stage

    def map(self, work: Any, items: Any, recipe: Any, **kwargs: Any) -> list[Any]:
        if kwargs["stage"] == self.stage:
            work = functools.partial(self.wrap, work)
        return super().map(work, items, recipe, **kwargs)


@pytest.fixture()
def client(cluster: Any) -> Any:
    with distributed.Client(cluster, set_as_default=False) as connected:
        yield connected


@pytest.mark.slow
def test_a_worker_killed_mid_run_is_replaced_and_the_run_is_unchanged(
    survey: Path, local_run: RunOutputs, client: Any, tmp_path: Path
) -> None:
    """The first terms partition kills its worker (os._exit): Dask runs it again on a live worker."""
    mapper = _DyingMapper(client, _dying(str(tmp_path / "died")), "terms")
    outputs = run_study(load_study(survey), mapper=mapper, until="terms")
    assert (tmp_path / "died").exists()
    assert_same_run(local_run, outputs)
    client.wait_for_workers(2, timeout=120)


@pytest.mark.slow
def test_workers_that_keep_dying_stop_the_run_in_one_line(survey: Path) -> None:
    """Beyond the scheduler's allowed failures the run stops with an EngineError (exit code 6).

    Its own one-worker cluster that allows no failure, so the first death is final."""
    import logging

    with dask.config.set({"distributed.scheduler.allowed-failures": 0}):
        doomed = distributed.LocalCluster(n_workers=1, threads_per_worker=1, processes=True, host="127.0.0.1",
                                          dashboard_address="127.0.0.1:0", silence_logs=logging.CRITICAL)
    try:
        with distributed.Client(doomed, set_as_default=False) as connected:
            with pytest.raises(EngineError) as caught:
                run_study(load_study(survey), mapper=_DyingMapper(connected, _dying(None), "clean"), until="clean")
    finally:
        doomed.close()
    message = str(caught.value)
    assert message.startswith("Dask workers kept dying while running partition ") and " of clean (KilledWorker" in message
    assert message.endswith("give the workers more memory or lower engine.partition_rows, then run again")
    assert "\n" not in message and caught.value.exit_code == 6
