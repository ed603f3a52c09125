"""The Python API: the same verbs as the command line."""

from __future__ import annotations

import contextlib
import json
import platform
import sys
from importlib import metadata
from pathlib import Path
from typing import Any, Callable, Mapping

import pandas as pd

from codebench.build import point_label, size_estimate
from codebench.codes import get_code_family
from codebench.config import Sweep, load_sweep, parse_sweep
from codebench.decoders.plugins import is_spec
from codebench.engine.cluster import require_packages, scheduler_address
from codebench.engine.executors import Executor, make_executor
from codebench.engine.local import leave_if_a_worker_imports_main
from codebench.engine.progress import Progress
from codebench.engine.runner import RunPlan, StopSignals, describe, execute
from codebench.errors import CodebenchError, ConfigError, StoreError, not_allowed
from codebench.records import ClusterSpec, Point
from codebench.results.export import results_frame, write_csv
from codebench.results.lock import RunLock
from codebench.results.store import Store, StoredPoint

STORE_NAME = "results.sqlite"
CSV_NAME = "results.csv"


def as_sweep(config: str | Path | Mapping[str, Any] | Sweep) -> Sweep:
    """Accept a sweep-file path, a parsed mapping or a :class:`Sweep`."""
    if isinstance(config, Sweep):
        return config
    if isinstance(config, (str, Path)):
        return load_sweep(config)
    if isinstance(config, Mapping):
        return parse_sweep(dict(config))
    raise TypeError(f"config must be a path, a mapping or a Sweep; got {type(config).__name__}")


def versions() -> dict[str, str]:
    """Versions of codebench and the libraries that decide the numbers."""
    out = {"python": platform.python_version(), "machine": platform.platform()}
    for package in ("codebench", "stim", "pymatching", "ldpc", "numpy"):
        try:
            out[package] = metadata.version(package)
        except metadata.PackageNotFoundError:
            out[package] = "unknown"
    return out


def run_sweep(
    config: str | Path | Mapping[str, Any] | Sweep,
    out: str | Path | None = None,
    workers: int | None = None,
    executor: Executor | None = None,
    progress: bool = True,
    scheduler: str | None = None,
    stop_when: Callable[[], bool] | None = None,
) -> pd.DataFrame:
    """Run (or resume) a sweep and return its results table.

    Parameters
    ----------
    config : path, mapping or Sweep
        The sweep file, its parsed content, or a loaded :class:`Sweep`.
    out : path, optional
        Output folder (default ``results/<name>``); holds ``results.sqlite``
        and ``results.csv``. A rerun on the same folder resumes.
    workers : int, optional
        Local worker processes (default: all cores). Given explicitly, it
        runs locally even when the sweep has a ``[cluster]`` section.
    executor : Executor, optional
        Where batches run (for example an in-process executor in tests);
        overrides ``workers``, ``scheduler`` and ``[cluster]``. It stays
        open: whoever created it closes it.
    progress : bool
        Show the progress line on standard error.
    scheduler : str, optional
        Address of a running Dask scheduler (``tcp://host:8786``); overrides
        the sweep's ``[cluster]`` section. The counts are those of a local run.
    stop_when : callable, optional
        Asked between rounds of results; once it returns true the run ends
        early (the stored batches stay; a rerun resumes).

    Examples
    --------
    >>> import tempfile
    >>> cfg = {"name": "doc", "seed": 7, "stopping": {"shot_budget": 2000},
    ...        "study": [{"code": "repetition", "distances": [3], "rounds": 1,
    ...                   "noise": "code_capacity", "p": [0.1], "decoders": ["mwpm"]}]}
    >>> frame = run_sweep(cfg, out=tempfile.mkdtemp(), workers=1, progress=False)
    >>> int(frame.loc[0, "shots"])
    2000
    """
    leave_if_a_worker_imports_main()
    with StopSignals():
        sweep = as_sweep(config)
        return _run(sweep, out, executor, progress, _cluster_choice(sweep, workers, scheduler), stop_when)


def _cluster_choice(sweep: Sweep, workers: int | None, scheduler: str | None) -> tuple[int | None, ClusterSpec | None]:
    """Local workers or a Dask cluster: the explicit argument wins over the sweep's ``[cluster]``."""
    if scheduler is not None:
        if workers is not None:
            raise ConfigError(not_allowed("--workers", workers, "absent when --scheduler is given (the cluster's "
                                          "workers run the batches)"))
        return None, ClusterSpec(scheduler=scheduler_address(scheduler, "--scheduler"))
    if workers is not None:
        return workers, None
    return None, sweep.cluster


def _run(sweep: Sweep, out: str | Path | None, executor: Executor | None, progress: bool,
         where: tuple[int | None, ClusterSpec | None], stop_when: Callable[[], bool] | None) -> pd.DataFrame:
    folder = Path(out) if out is not None else sweep.output_dir_default
    # Everything that can fail on bad input happens before the folder is touched.
    members = []
    for point in sweep.points:
        if progress:
            _announce_if_large(point)
        members.append((describe(point, sweep.seed, sweep.batch_bytes), point.study))
    if folder.exists() and not folder.is_dir():
        raise ConfigError(not_allowed("--out", str(folder), "a folder (or a path that does not exist yet)"))
    store_path = folder / STORE_NAME
    if executor is None and where[1] is not None:
        require_packages(where[1])
    if store_path.exists():
        Store(store_path).close()  # refuses a foreign or damaged file before anything is created
    created = _missing_ancestors(folder)
    lock = RunLock(folder)  # one writer per folder; refused while another live run holds it
    lock.acquire()
    try:
        if executor is not None:  # the caller's: it stays open
            return _record(sweep, folder, members, executor, progress, stop_when)
        isolate = any(is_spec(point.decoder) for point in sweep.points)
        with make_executor(*where, isolate=isolate) as own:
            return _record(sweep, folder, members, own, progress, stop_when)
    finally:
        lock.release()
        if created and not store_path.exists():  # failed before any result (cluster unreachable...): leave no trace
            lock.path.unlink(missing_ok=True)
            with contextlib.suppress(OSError):
                for made in created:  # deepest first; stops at a folder something else was put into
                    made.rmdir()


def _missing_ancestors(folder: Path) -> list[Path]:
    """``folder`` and those of its parents that do not exist yet, deepest first (what a run creates)."""
    missing = []
    for candidate in [folder, *folder.parents]:
        if candidate.exists():
            break
        missing.append(candidate)
    return missing


#: Points with more detectors than this are announced before their circuit is built (it takes a while).
LARGE_POINT_DETECTORS = 100_000


def _announce_if_large(point: Point) -> None:
    qubits, detectors = size_estimate(get_code_family(point.code), point.distance, point.rounds, point.basis)
    if detectors > LARGE_POINT_DETECTORS:
        print(f"building {point_label(point)}: about {detectors:,} detectors on {qubits:,} qubits "
              f"(about {detectors / 1e6:.1f} GB while its model is analysed and compiled)", file=sys.stderr)


def _record(sweep: Sweep, folder: Path, members: list[tuple[StoredPoint, str]], run_executor: Executor,
            progress: bool, stop_when: Callable[[], bool] | None) -> pd.DataFrame:
    if progress and run_executor.summary():
        print(f"{sweep.name}: running on {run_executor.summary()}", file=sys.stderr)
    parallelism = max(1, run_executor.capacity // 2)
    with Store(folder / STORE_NAME) as store:
        meta = {"name": sweep.name, "seed": str(sweep.seed), "sweep_text": sweep.source_text,
                "sweep_source": sweep.source, "versions": json.dumps(versions())}
        store.begin_run(sweep.stopping, members, meta)
        reporter = Progress(sweep.name, sweep.stopping, parallelism) if progress else None
        try:
            execute(RunPlan(sweep.name, sweep.seed, sweep.stopping, members), store, run_executor, reporter,
                    stop_when)
        except BaseException:
            # The table of what is stored, if it can be written: the first error is the one to report
            # (with a full disk this write fails too, and leaves no stray file).
            with contextlib.suppress(CodebenchError):
                write_csv(results_frame(store), folder / CSV_NAME)
            raise
        frame = results_frame(store)
        write_csv(frame, folder / CSV_NAME)
    return frame


def load_results(folder: str | Path, interval: str = "wilson", unlisted: bool = False) -> pd.DataFrame:
    """The results table of a sweep folder, rebuilt from its store (95% intervals by ``interval``).

    ``unlisted``: also the stored points that the sweep file of the latest run no longer lists.
    """
    return results_and_unlisted(folder, interval, unlisted)[0]


def results_and_unlisted(folder: str | Path, interval: str = "wilson",
                         unlisted: bool = False) -> tuple[pd.DataFrame, int]:
    """:func:`load_results`, and how many stored points the latest run's sweep file no longer lists
    (one opening of the store for both)."""
    path = Path(folder) / STORE_NAME
    if not path.exists():
        raise StoreError(f"no results store at '{path}' (run `codebench sweep` first).")
    with Store(path, create=False) as store:
        return results_frame(store, interval, unlisted), len(store.unlisted())


def export_csv(folder: str | Path, csv_path: str | Path | None = None, interval: str = "wilson",
               unlisted: bool = False) -> Path:
    """Rewrite the results CSV of ``folder`` from its store."""
    return export_with_count(folder, csv_path, interval, unlisted)[0]


def export_with_count(folder: str | Path, csv_path: str | Path | None = None, interval: str = "wilson",
                      unlisted: bool = False) -> tuple[Path, int]:
    """:func:`export_csv`, and how many stored points the latest run's sweep file no longer lists."""
    frame, count = results_and_unlisted(folder, interval, unlisted)
    return write_csv(frame, Path(csv_path) if csv_path is not None else Path(folder) / CSV_NAME), count


__all__ = ["CodebenchError", "export_csv", "load_results", "run_sweep", "versions"]
