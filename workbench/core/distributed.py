"""The Dask engine: the same study and the same outputs, with the per-text work on a Dask cluster.

``termloom run STUDY --engine dask [--scheduler ADDRESS]`` (or ``[engine]
kind = "dask"`` in the study) runs :func:`run_to_folder_dask`. Without a
scheduler address it starts a ``distributed.LocalCluster`` on this machine
(one single-threaded worker process per core, or ``engine.workers``; bound
to 127.0.0.1, no dashboard) and closes it when the stages are done; with an
address it connects to that scheduler and leaves the cluster running.

What runs where
---------------
The stages are the in-process engine's own functions (``pipeline.run_study``);
only their per-text work runs on the workers, through :class:`DaskMapper`
(see ``mapping.py``):

========  ==========================================  ======================================
stage     on the workers, per partition               in the driver, once over all answers
========  ==========================================  ======================================
ingest    —                                           ``read_corpus`` (every source, the ledger)
clean     normalise, mask, classify each distinct      exact and near duplicates, flags,
          raw text (``clean.clean_texts``)             decisions, ledger events
identify  detection text, language and mixed-          hints, fallbacks, decisions, ledger
          language check of each distinct cleaned
          text (``identify.identify_texts``)
terms     tokens, lemmas, stop words, n-grams of       vocabularies (tf, df), ``no_terms``
          each distinct (language, text)               events, override counts
          (``terms.term_texts``)
weigh     —                                            counting, filters, weighting, keywords
compare   —                                            keyness, groups, stability, KWIC
export    —                                            every file, atomically, manifest last
========  ==========================================  ======================================

Partitions are slices of the *distinct* items of a stage (texts repeat a
lot in surveys), at most ``engine.partition_rows`` items each and at least
four per worker when there are enough items; results come back aligned with
the items, so nothing depends on partition order or on which worker ran
what. Each worker builds a stage's kit — spaCy tokenizers, lemma tables,
detectors — once per process (``mapping.kit_for``), not per partition, and
its termers cache every distinct token they meet.

Identical results
-----------------
Because both engines run the same work functions on the same distinct items
and the same reduce code, the answers table, ledger, vocabularies, matrices
and keyword tables are identical (same terms, same order, same values; the
tests compare them to 1e-12). The work functions are pure per item: no
result depends on which other items share a partition (py3langid scores each
text's row of the batch on its own; spaCy's rule-based tokenizer and the
lookup lemmatiser work per token). No hashing trick is used: term names
survive. A trained spaCy pipeline (``terms.pipelines``) is the one component
whose output could in principle depend on batching; the lookup tables do not.

Ingest runs in the driver
-------------------------
The ledger's account of every input record comes from one sequential pass
per source: the encoding is sniffed on the whole file, multi-line quoted
cells and ragged records are resolved in file order, and a repeated
respondent id keeps the first record's id across all sources. Reading by
partitions (``dask.dataframe.read_csv`` with a block size) would split
quoted records at block edges and see ids out of order, so the rows, ids
and ledger could differ from ``read_corpus``. Correctness first: ingest is
``read_corpus`` in the driver, which reads a million answers in a few
seconds (``tests/bench/bench_ingest.py``).

Failures
--------
A worker that dies mid-run (killed, out of memory) loses its running
partition; the scheduler gives the partition to another worker, up to
``distributed.scheduler.allowed-failures`` times (Dask's default, 3).
Beyond that, or when no scheduler answers at the address, the run stops
with a one-line :class:`~workbench.core.errors.EngineError` (exit code 6).
Errors in the study or the data (``SettingsError``, ``InputError``) raised
on a worker reach the caller unchanged. Export runs in the driver after
the cluster is closed, and is atomic, so a failed run leaves no partial
output folder.

Scale-out (on paper)
--------------------
What the driver holds and reduces grows with the answers, not with the
workers. At 50M answers (an assumed 60 % distinct texts, ~8 terms per answer
after stop words, 9 languages):

* the answers table with raw and clean text, ~120 bytes of text each:
  ~12 GB of strings, plus term lists (~8 short strings per answer: another
  ~25 GB as Python lists); the ledger, ~3 events per answer (~150M tuples,
  ~25 GB). This — Python objects per answer in one process — is the limit
  of this design, well before the matrices;
* distinct texts shipped to the workers and back: 30M per stage, in
  partitions of 50,000 (600 tasks per stage; the scheduler handles that
  easily);
* vocabularies: survey answers reuse a small vocabulary; per language a
  few hundred thousand distinct terms at most (Heaps' law with a
  ~100-thousand-term vocabulary at 1M answers and exponent ~0.5 gives
  ~700k at 50M, most of them seen once and removed by ``weigh.min_df``);
  the df and tf vectors are a few MB;
* count matrices: 50M × 8 = 400M non-zeros, CSR with int32 counts and
  indices: 400M × (4 + 4) bytes + 50M × 8 bytes of row pointers ≈ 3.6 GB;
  the weighted float64 copy ≈ 5.2 GB; per language and pooled, so ~18 GB
  for counts and weights of both. Keyness and stability reduce these to
  group × term sums (a few MB).

So the driver needs a large-memory machine (~100 GB at 50M answers) while
the workers need only ~1 GB each (a kit and one partition). The next steps
beyond that are known: keep raw/clean text and term lists in Arrow columns
instead of Python objects, and count each partition's term lists into a CSR
block on the worker against the reduced vocabulary (two passes: vocabulary
first, then counts), so only the matrices come back to the driver.
"""

from __future__ import annotations

import logging
import math
import os
import time
import uuid
from collections.abc import Callable, Iterator, Sequence
from contextlib import contextmanager
from pathlib import Path
from typing import Any, TypeVar

from workbench.core.decisions import Decisions
from workbench.core.errors import EngineError, SettingsError, TermloomError
from workbench.core.mapping import Recipe, Work, call_with_kit, run_work
from workbench.core.pipeline import RunOutputs, run_study
from workbench.core.progress import Reporter
from workbench.core.settings import Engine, Study

R = TypeVar("R")

#: Fewest items worth a partition of their own (below this, scheduling costs more than it saves).
MIN_PARTITION = 1000
#: Partitions per worker to aim for, so a slow partition does not leave the other workers idle.
PARTITIONS_PER_WORKER = 4
#: Seconds to wait for the first worker of an external scheduler.
WORKER_WAIT = 60
#: How long to keep trying to reach an external scheduler.
CONNECT_TIMEOUT = "20s"
_INSTALL = 'engine.kind = "dask" needs Dask; install it with: pip install "termloom[dask]"'


def _require_dask() -> tuple[Any, Any]:
    try:
        import dask
        import distributed
    except ImportError:
        raise SettingsError(_INSTALL) from None
    return dask, distributed


def partition_bounds(n_items: int, partition_rows: int, workers: int) -> list[tuple[int, int]]:
    """Contiguous ``(start, stop)`` slices covering ``n_items``.

    At most ``partition_rows`` items each; at least ``PARTITIONS_PER_WORKER``
    per worker when every partition still gets ``MIN_PARTITION`` items.
    """
    if n_items <= 0:
        return []
    parts = max(math.ceil(n_items / partition_rows), min(PARTITIONS_PER_WORKER * max(workers, 1),
                                                         math.ceil(n_items / MIN_PARTITION)))
    size = math.ceil(n_items / parts)
    return [(start, min(start + size, n_items)) for start in range(0, n_items, size)]


class DaskMapper:
    """Runs the stages' work functions on a Dask cluster, partition by partition.

    Parameters
    ----------
    client
        A connected ``distributed.Client``.
    partition_rows
        Most items per partition (``engine.partition_rows``).
    """

    name = "dask"

    def __init__(self, client: Any, partition_rows: int) -> None:
        self.client = client
        self.partition_rows = partition_rows
        self.run_id = uuid.uuid4().hex[:12]
        #: Per stage: partitions and items mapped (for the manifest).
        self.partitions: dict[str, int] = {}
        self.items: dict[str, int] = {}

    def workers(self) -> int:
        return max(len(self.client.scheduler_info().get("workers", {})), 1)

    def map(self, work: Work, items: Sequence[Any], recipe: Recipe, *, stage: str, what: str,
            reporter: Reporter) -> list[Any]:
        dask, distributed = _require_dask()
        items = list(items)
        bounds = partition_bounds(len(items), self.partition_rows, self.workers())
        self.partitions[stage] = self.partitions.get(stage, 0) + len(bounds)
        self.items[stage] = self.items.get(stage, 0) + len(items)
        if not bounds:
            return []
        # Each partition travels inside its own task, so a task whose worker
        # died can be run again elsewhere (scattered data would die with it).
        with dask.config.set({"distributed.admin.large-graph-warning-threshold": "4GB"}):
            futures = [
                self.client.submit(run_work, work, items[start:stop], recipe, pure=False,
                                   key=f"termloom-{stage}-{self.run_id}-{number}")
                for number, (start, stop) in enumerate(bounds)
            ]
        del items
        index = {future.key: number for number, future in enumerate(futures)}
        results: list[list[Any] | None] = [None] * len(futures)
        done = 0
        total = bounds[-1][1]
        try:
            for future in distributed.as_completed(futures, loop=self.client.loop):
                number = index[future.key]
                results[number] = self._result(future, stage, number)
                futures[number] = None  # type: ignore[call-overload] # release the worker's copy
                start, stop = bounds[number]
                done += stop - start
                reporter.update(stage, done, total, f"{what} ({len(bounds)} partitions on {self.workers()} workers)")
        except BaseException:
            self.client.cancel([f for f in futures if f is not None])
            raise
        out: list[Any] = []
        for part in results:
            out.extend(part or ())
        return out

    def call(self, func: Callable[[Any], R], recipe: Recipe) -> R:
        future = self.client.submit(call_with_kit, func, recipe, pure=False,
                                    key=f"termloom-{func.__name__}-{self.run_id}-{uuid.uuid4().hex[:6]}")
        return self._result(future, func.__name__, 0)

    def _result(self, future: Any, stage: str, number: int) -> Any:
        _dask, distributed = _require_dask()
        try:
            return future.result()
        except TermloomError:
            raise
        except distributed.client.FutureCancelledError as exc:
            raise EngineError(f"the Dask cluster dropped partition {number} of {stage} ({exc}); "
                              "check the scheduler's log and run again") from None
        except (distributed.KilledWorker, OSError) as exc:
            raise EngineError(
                f"Dask workers kept dying while running partition {number} of {stage} ({type(exc).__name__}: {exc}); "
                "give the workers more memory or lower engine.partition_rows, then run again"
            ) from None


def _local_cluster(engine: Engine, distributed: Any) -> Any:
    workers = engine.workers or os.cpu_count() or 1
    return distributed.LocalCluster(
        n_workers=workers,
        threads_per_worker=1,
        processes=True,
        host="127.0.0.1",
        # The scheduler always serves HTTP (health, metrics); a free loopback port, never 8787 taken by another run.
        dashboard_address="127.0.0.1:0",
        silence_logs=logging.ERROR,
    )


@contextmanager
def dask_mapper(engine: Engine) -> Iterator[DaskMapper]:
    """A :class:`DaskMapper` on the cluster ``engine`` names; what it started is closed on exit.

    Raises
    ------
    SettingsError
        Dask is not installed.
    EngineError
        No scheduler answers at ``engine.scheduler``, or it has no workers.
    """
    dask, distributed = _require_dask()
    cluster = None
    client = None
    try:
        if engine.scheduler:
            address = engine.scheduler if "://" in engine.scheduler else f"tcp://{engine.scheduler}"
            try:
                client = distributed.Client(address, timeout=CONNECT_TIMEOUT, set_as_default=False)
            except (OSError, TimeoutError) as exc:
                raise EngineError(
                    f"no Dask scheduler answers at {engine.scheduler} ({exc}); start one with 'dask scheduler' "
                    "and workers with 'dask worker ADDRESS', or leave engine.scheduler empty for a local cluster"
                ) from None
            try:
                client.wait_for_workers(1, timeout=WORKER_WAIT)
            except TimeoutError:
                raise EngineError(
                    f"the Dask scheduler at {engine.scheduler} has no workers after {WORKER_WAIT} s; "
                    "start some with 'dask worker ADDRESS'"
                ) from None
        else:
            cluster = _local_cluster(engine, distributed)
            client = distributed.Client(cluster, set_as_default=False)
        yield DaskMapper(client, engine.partition_rows)
    finally:
        if client is not None:
            client.close()
        if cluster is not None:
            cluster.close()


def _describe(mapper: DaskMapper, engine: Engine, seconds: float) -> dict[str, Any]:
    dask, distributed = _require_dask()
    workers = mapper.client.scheduler_info().get("workers", {})
    return {
        "kind": "dask",
        "scheduler": engine.scheduler or "local cluster (started for this run)",
        "workers": len(workers),
        "threads": int(sum(w.get("nthreads", 0) for w in workers.values())),
        "worker_memory_limit": sorted({int(w.get("memory_limit") or 0) for w in workers.values()}),
        "partition_rows": engine.partition_rows,
        "partitions": dict(mapper.partitions),
        "distinct_items": dict(mapper.items),
        "on_workers": ["clean: per distinct raw text", "identify: per distinct clean text",
                       "terms: per distinct (language, text)"],
        "in_driver": ["ingest", "duplicates and every ledger event", "vocabularies", "weigh", "compare", "export"],
        "hashing": None,
        "cluster_seconds": round(seconds, 3),
        "dask": dask.__version__,
        "distributed": distributed.__version__,
    }


def run_study_dask(
    study: Study,
    reporter: Reporter | None = None,
    decisions: Decisions | None = None,
    until: str = "compare",
) -> RunOutputs:
    """:func:`~workbench.core.pipeline.run_study` with the per-text work on the study's Dask cluster.

    The result equals the in-process engine's; ``outputs.engine`` describes
    the cluster and the partitioning (written into the manifest).
    """
    reporter = reporter or Reporter()
    begin = time.perf_counter()
    with dask_mapper(study.engine) as mapper:
        started = time.perf_counter() - begin
        outputs = run_study(study, reporter, decisions, until, mapper=mapper)
        outputs.engine = _describe(mapper, study.engine, started)
    return outputs


def run_to_folder_dask(study: Study, out_dir: Path, reporter: Reporter | None = None) -> tuple[RunOutputs, list[Path]]:
    """Run every stage on the Dask engine and write the output folder (export in this process)."""
    from workbench.core.export import write_run

    reporter = reporter or Reporter()
    outputs = run_study_dask(study, reporter)
    begin = time.perf_counter()
    written = write_run(Path(out_dir), outputs, reporter)
    outputs.timings["export"] = time.perf_counter() - begin
    return outputs, written
