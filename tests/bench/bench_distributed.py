"""Benchmark: the Dask engine with two worker processes against the in-process engine.

Run on demand (not part of the test suite)::

    python tests/bench/bench_distributed.py [--answers 1000000] [--workers 2] [--folder DIR] [--skip-local]

Data: ``tests/bench/generate.py`` (seeded; the demo survey's phrase banks at
scale, nine languages, non-answers, copies, typos, personal data; about half
the answers distinct). The study is the generator's, every setting
termloom's default, except export formats: Parquet, Matrix Market and npz
— what a run of a million answers would be exported as (a corpus CSV or a
spreadsheet of a million rows costs the same in both engines, since export
runs in the driver, and would hide the stages' difference; ``--formats``
changes it).

Reported, side by side in one run (each engine in a fresh child process, so
neither warms the other's caches; both read the same lemma-table cache):

* wall time of ``run_to_folder`` (in-process) and ``run_to_folder_dask`` (a
  fresh LocalCluster of ``--workers`` single-threaded processes, start-up
  included), per stage and in total, and their ratio (target: Dask ≥ 1.6×
  faster on a 2-core machine);
* CPU seconds of the driver process, and of the whole process tree;
* peak resident memory of the driver (``ru_maxrss``) and of each worker
  process (psutil, sampled every 0.2 s from a thread in the driver);
* whether both output folders hold identical matrices and keyword tables
  (terms, order, values to 1e-12).
"""

from __future__ import annotations

import os

os.environ.setdefault("OMP_NUM_THREADS", "1")
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import argparse
import importlib.util
import json
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent


def generator():  # noqa: ANN201 - a module loaded from a path
    spec = importlib.util.spec_from_file_location("termloom_bench_generate", HERE / "generate.py")
    module = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = module
    spec.loader.exec_module(module)
    return module


CHILD = r"""
import json, resource, sys, threading, time
from pathlib import Path
import pandas as pd

def main():
    engine, study_path, out_dir, formats, workers = sys.argv[1:6]
    from workbench.core.settings import load_study
    study = load_study(study_path, [f"engine.kind={engine}", f"engine.workers={workers}", f"export.formats={formats}"])
    peaks = {}
    stop = threading.Event()

    def sample():
        import psutil
        me = psutil.Process()
        while not stop.is_set():
            for child in me.children(recursive=True):
                try:
                    if "spawn_main" in " ".join(child.cmdline()):
                        peaks[child.pid] = max(peaks.get(child.pid, 0), child.memory_info().rss)
                except psutil.Error:
                    continue
            stop.wait(0.2)

    watcher = threading.Thread(target=sample, daemon=True)
    watcher.start()
    # The driver's CPU seconds per stage: process time at each change of stage in the progress reports.
    cpu = {}
    current = ["start", time.process_time()]

    def progress(stage, done, total, message):
        if stage != current[0]:
            now = time.process_time()
            cpu[current[0]] = cpu.get(current[0], 0.0) + now - current[1]
            current[:] = [stage, now]

    from workbench.core.progress import Reporter
    reporter = Reporter(callback=progress)
    begin = time.perf_counter()
    if engine == "dask":
        from workbench.core.distributed import run_to_folder_dask
        outputs, written = run_to_folder_dask(study, Path(out_dir), reporter)
    else:
        from workbench.core.pipeline import run_to_folder
        outputs, written = run_to_folder(study, Path(out_dir), reporter)
    seconds = time.perf_counter() - begin
    progress("end", 0, 0, "")
    stop.set()
    tables = pd.concat({name: frame for name, frame in outputs.weighed.keywords.items()}, names=["table", "rank"])
    tables.to_parquet(Path(out_dir).with_suffix(".keywords.parquet"))
    me = resource.getrusage(resource.RUSAGE_SELF)
    children = resource.getrusage(resource.RUSAGE_CHILDREN)
    print(json.dumps({
        "seconds": seconds,
        "timings": outputs.timings,
        "stage_cpu": cpu,
        "engine": outputs.engine,
        "answers": int(len(outputs.corpus.answers)),
        "distinct": int(outputs.corpus.answers["raw_text"].nunique()),
        "vocabulary": {lang: int(len(v)) for lang, v in outputs.terms.vocabularies.items()},
        "matrices": {lang: [int(c.matrix.shape[1]), int(c.matrix.nnz)] for lang, c in outputs.weighed.counts.items()},
        "driver_peak": me.ru_maxrss * 1024,
        "driver_cpu": me.ru_utime + me.ru_stime,
        "children_cpu": children.ru_utime + children.ru_stime,
        "worker_peaks": sorted(peaks.values(), reverse=True),
    }))

if __name__ == "__main__":
    main()
"""


def run_child(engine: str, study_path: Path, out_dir: Path, formats: str, workers: int) -> dict:
    done = subprocess.run([sys.executable, "-c", CHILD, engine, str(study_path), str(out_dir), formats, str(workers)],
                          capture_output=True, text=True)
    if done.returncode != 0:
        raise SystemExit(f"{engine} run failed:\n{done.stderr[-4000:]}")
    return json.loads(done.stdout.strip().splitlines()[-1])


def compare_outputs(a: Path, b: Path) -> str:
    """Whether both runs wrote the same matrices (terms, rows, values to 1e-12) and keyword tables."""
    import numpy as np
    import pandas as pd
    import scipy.sparse as sp

    worst = 0.0
    for path in sorted((a / "matrices").glob("*.npz")):
        left, right = sp.load_npz(path).tocsr(), sp.load_npz(b / "matrices" / path.name).tocsr()
        if left.shape != right.shape or not np.array_equal(left.indices, right.indices):
            return f"DIFFERENT: {path.name}"
        if left.nnz:
            worst = max(worst, float(np.abs(left.data - right.data).max()))
    for path in sorted((a / "matrices").glob("*.txt")):
        if path.read_bytes() != (b / "matrices" / path.name).read_bytes():
            return f"DIFFERENT: {path.name}"
    left = pd.read_parquet(a.with_suffix(".keywords.parquet"))
    right = pd.read_parquet(b.with_suffix(".keywords.parquet"))
    try:
        pd.testing.assert_frame_equal(left, right, check_exact=False, rtol=0, atol=1e-12)
    except AssertionError as exc:
        return f"DIFFERENT keyword tables: {str(exc)[:200]}"
    if worst > 1e-12:
        return f"DIFFERENT: weights differ by {worst:.1e}"
    return f"identical (matrices, term lists, row ids, {len(left):,} keyword rows; max abs difference {worst:.1e})"


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--answers", type=int, default=1_000_000)
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument("--folder", type=Path, default=None, help="keep the data and outputs here (reused)")
    parser.add_argument("--formats", default='["parquet","mtx","npz"]', help="export.formats as TOML")
    parser.add_argument("--skip-local", action="store_true", help="run the Dask engine only")
    args = parser.parse_args()
    folder = args.folder or Path(tempfile.mkdtemp(prefix="termloom-bench-dask-"))
    begin = time.perf_counter()
    info = generator().ensure(args.answers, folder)
    print(f"data: {info['answers']:,} answers of {info['respondents']:,} respondents ({time.perf_counter() - begin:.0f} s)")
    study = folder / "bench.study.toml"

    results = {}
    for engine in (["dask"] if args.skip_local else ["local", "dask"]):
        results[engine] = run_child(engine, study, folder / f"out-{engine}", args.formats, args.workers)
        print(f"{engine}: {results[engine]['seconds']:.1f} s")

    mb = 1 / 2**20
    dask_run = results["dask"]
    print(f"\n{dask_run['answers']:,} answers ({dask_run['distinct']:,} distinct raw texts), "
          f"{args.workers} Dask workers, {os.cpu_count()} cores, load average {os.getloadavg()[0]:.1f}")
    print(f"{'':<16}" + "".join(f"{e:>12}" for e in results))
    for stage in dask_run["timings"]:
        print(f"{stage + ' s':<16}" + "".join(f"{r['timings'].get(stage, float('nan')):>12.1f}" for r in results.values()))
    print(f"{'total s':<16}" + "".join(f"{r['seconds']:>12.1f}" for r in results.values()))
    for stage in dask_run["timings"]:
        print(f"{stage + ' cpu s':<16}" + "".join(f"{r['stage_cpu'].get(stage, float('nan')):>12.1f}"
                                                 for r in results.values()))
    print(f"{'driver cpu s':<16}" + "".join(f"{r['driver_cpu']:>12.0f}" for r in results.values()))
    print(f"{'children cpu s':<16}" + "".join(f"{r['children_cpu']:>12.0f}" for r in results.values()))
    print(f"{'driver peak MB':<16}" + "".join(f"{r['driver_peak'] * mb:>12.0f}" for r in results.values()))
    print("worker peak MB: " + ", ".join(f"{p * mb:.0f}" for p in dask_run["worker_peaks"]))
    print("partitions: " + json.dumps(dask_run["engine"]["partitions"]) + "; distinct items: "
          + json.dumps(dask_run["engine"]["distinct_items"]) + f"; cluster start {dask_run['engine']['cluster_seconds']} s")
    print("vocabulary per language: " + json.dumps(dask_run["vocabulary"]))
    print("count matrices [terms, nonzeros]: " + json.dumps(dask_run["matrices"]))
    if "local" in results:
        ratio = results["local"]["seconds"] / dask_run["seconds"]
        print(f"speed-up (local / dask wall time): {ratio:.2f}x  (target >= 1.6x)")
        print("outputs: " + compare_outputs(folder / "out-local", folder / "out-dask"))


if __name__ == "__main__":
    main()
