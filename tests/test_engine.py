"""The sampling engine end to end: counts, resume, stopping rules, store safety, export, circuits.

What is checked, and why it must hold:

* Counts are decided in batch order from batches whose seeds depend only on
  the sweep seed, the point and the batch, so they cannot depend on the
  number of workers, on completion order, or on how often a run was
  interrupted and resumed.
* A rerun of a finished sweep finds every batch it needs in the store and
  samples nothing.
* The stopping rule stops each point at the first batch after which it
  holds; a point that never meets ``failure_target`` takes exactly
  ``shot_budget`` shots.
* A file at ``DIR/results.sqlite`` that codebench did not write is refused
  with exit status 2 and is not modified.

Sources: the 95% score interval for a binomial rate (JASA 22, 209 (1927));
the per-round conversion eps = (1 - (1 - 2 P)^(1/r)) / 2 (Nature 614, 676
(2023)), used as common practice. Detector counts of a Z-basis memory
experiment over r rounds: each Z-type check gives a detector in the first
round, every check gives one in each later round (comparison with the
previous round), and each Z-type check gives one from the final data-qubit
readout. Repetition code: d - 1 Z-type checks, so (d - 1)(r + 1); rotated
surface code: (d^2 - 1)/2 checks of each type, so (d^2 - 1) r.
"""

from __future__ import annotations

import io
import json
import math
import os
import random
import signal
import sqlite3
import subprocess
import sys
import time
from contextlib import closing
from pathlib import Path
from typing import Any

import pandas as pd
import pytest
import stim

from codebench.api import load_results, run_sweep
from codebench.engine.local import InProcessExecutor, LocalExecutor
from codebench.errors import CodebenchError
from codebench.records import FIRST_BATCH, Point, batch_sizes

CLI = [sys.executable, "-m", "codebench"]
Z95 = 1.959963984540054

# A small grid: some points stop on failures, some on the shot budget.
GRID_TOML = """\
name = "grid"
seed = 11

[stopping]
failure_target = 80
shot_budget = 20000

[[study]]
label = "rep"
code = "repetition"
distances = [3, 5]
rounds = "d"
noise = "circuit_depolarizing"
p = [0.01, 0.03]
decoders = ["mwpm"]

[[study]]
label = "surface"
code = "rotated_surface"
distances = [3, 5]
rounds = "d"
noise = "circuit_depolarizing"
p = [0.003, 0.01]
decoders = ["mwpm"]
"""
GRID_TARGET = 80
GRID_BUDGET = 20000

# A sweep that runs for about a second of sampling on two workers, in
# batches of 1024 shots (batch_bytes holds 1024 shots of its 120 detectors,
# 15 bytes each), so a signal sent after a few committed batches always lands
# mid-sweep.
LONG_TOML = """\
name = "long"
seed = 5

[stopping]
failure_target = 3000
shot_budget = 1000000

[engine]
batch_bytes = 15360

[[study]]
code = "rotated_surface"
distances = [5]
rounds = 5
noise = "circuit_depolarizing"
p = [0.002, 0.006]
decoders = ["mwpm"]
"""


# ---------------------------------------------------------------------------
# helpers


def write(path: Path, text: str) -> Path:
    path.write_text(text)
    return path


def sweep_text(name: str, stopping: dict[str, Any], studies: list[dict[str, Any]], seed: int = 3,
               engine: dict[str, Any] | None = None) -> str:
    """A sweep file from plain values (numbers and lists of numbers or strings)."""

    def value(v: Any) -> str:
        if isinstance(v, str):
            return f'"{v}"'
        if isinstance(v, list):
            return "[" + ", ".join(value(x) for x in v) + "]"
        return repr(v)

    lines = [f'name = "{name}"', f"seed = {seed}", "", "[stopping]"]
    lines += [f"{k} = {value(v)}" for k, v in stopping.items()]
    if engine:
        lines += ["", "[engine]"] + [f"{k} = {value(v)}" for k, v in engine.items()]
    for study in studies:
        lines += ["", "[[study]]"] + [f"{k} = {value(v)}" for k, v in study.items()]
    return "\n".join(lines) + "\n"


def cli(*args: object, timeout: float = 180) -> subprocess.CompletedProcess[str]:
    return subprocess.run([*CLI, *map(str, args)], capture_output=True, text=True, timeout=timeout)


def counts(frame: pd.DataFrame) -> list[tuple[Any, ...]]:
    """The per-point identity and counts of a results table, in row order."""
    return [
        (r.study, r.code, int(r.distance), int(r.rounds), r.basis, r.noise, float(r.p), r.decoder,
         int(r.shots), int(r.failures))
        for r in frame.itertuples(index=False)
    ]


def ro_connect(store: Path) -> sqlite3.Connection:
    return sqlite3.connect(f"file:{store}?mode=ro", uri=True, timeout=5)


def batch_rows(store: Path) -> list[tuple[str, int, int, int]]:
    """(key, batch_index, shots, failures) of every stored batch, sorted."""
    with closing(ro_connect(store)) as db:
        rows = db.execute("SELECT key, batch_index, shots, failures FROM batches").fetchall()
    return sorted((str(k), int(i), int(s), int(f)) for k, i, s, f in rows)


def row_count(store: Path) -> int:
    """Rows of the batches table, 0 while the file or table does not exist yet."""
    try:
        with closing(ro_connect(store)) as db:
            return int(db.execute("SELECT COUNT(*) FROM batches").fetchone()[0])
    except sqlite3.Error:
        return 0


def point_caps(store: Path) -> dict[str, int]:
    with closing(ro_connect(store)) as db:
        return {str(k): int(c) for k, c in db.execute("SELECT key, batch_cap FROM points")}


def wilson(k: int, n: int) -> tuple[float, float]:
    phat, z2 = k / n, Z95 * Z95
    centre = (phat + z2 / (2 * n)) / (1 + z2 / n)
    half = Z95 * math.sqrt(phat * (1 - phat) / n + z2 / (4 * n * n)) / (1 + z2 / n)
    return max(0.0, centre - half), min(1.0, centre + half)


def rule_holds(shots: int, failures: int, budget: int, target: int, precision: float | None = None) -> bool:
    if shots >= budget or failures >= target:
        return True
    if precision is not None and failures > 0:
        low, high = wilson(failures, shots)
        return (high - low) / 2 <= precision * failures / shots
    return False


def prefix_counts(rows: list[tuple[str, int, int, int]], key: str, sizes: list[int], budget: int, target: int,
                  precision: float | None = None) -> tuple[int, int, int]:
    """Shots, failures and batch count of the shortest batch prefix meeting the rule."""
    by_index = {i: f for k, i, s, f in rows if k == key and i < len(sizes) and s == sizes[i]}
    shots = failures = 0
    for index, size in enumerate(sizes):
        assert index in by_index, f"batch {index} of point {key} is missing from a finished store"
        shots, failures = shots + size, failures + by_index[index]
        if rule_holds(shots, failures, budget, target, precision):
            return shots, failures, index + 1
    raise AssertionError("the schedule ran out before the rule held")


def per_round(total: float, rounds: int) -> float:
    return (1 - (1 - 2 * total) ** (1 / rounds)) / 2


def group_alive(pgid: int) -> bool:
    try:
        os.killpg(pgid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


def reap_group(pgid: int, grace: float) -> bool:
    """Wait up to ``grace`` s for the process group to empty; kill what is left. True if it emptied."""
    deadline = time.monotonic() + grace
    while group_alive(pgid) and time.monotonic() < deadline:
        time.sleep(0.05)
    if not group_alive(pgid):
        return True
    try:
        os.killpg(pgid, signal.SIGKILL)
    except ProcessLookupError:
        pass
    return False


# ---------------------------------------------------------------------------
# fixtures (module scope: each sweep runs once)


@pytest.fixture(scope="module")
def grid_file(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return write(tmp_path_factory.mktemp("grid") / "grid.toml", GRID_TOML)


@pytest.fixture(scope="module")
def grid_one(grid_file: Path, tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, pd.DataFrame]:
    out = tmp_path_factory.mktemp("grid_one")
    return out, run_sweep(grid_file, out=out, executor=InProcessExecutor(), progress=False)


@pytest.fixture(scope="module")
def grid_two(grid_file: Path, tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, pd.DataFrame]:
    out = tmp_path_factory.mktemp("grid_two")
    with LocalExecutor(2) as executor:
        return out, run_sweep(grid_file, out=out, executor=executor, progress=False)


@pytest.fixture(scope="module")
def grid_cli(grid_file: Path, tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The grid swept through the command line."""
    out = tmp_path_factory.mktemp("grid_cli") / "out"
    done = cli("sweep", grid_file, "--out", out, "--workers", "1", "--quiet")
    assert done.returncode == 0, done.stderr
    return out


@pytest.fixture(scope="module")
def long_file(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return write(tmp_path_factory.mktemp("long") / "long.toml", LONG_TOML)


@pytest.fixture(scope="module")
def long_reference(long_file: Path, tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, pd.DataFrame]:
    """An uninterrupted run of the long sweep (one worker, in process)."""
    out = tmp_path_factory.mktemp("long_reference")
    return out, run_sweep(long_file, out=out, workers=1, progress=False)


# ---------------------------------------------------------------------------
# worker count, reruns


def test_counts_do_not_depend_on_worker_count(grid_one: tuple[Path, pd.DataFrame],
                                              grid_two: tuple[Path, pd.DataFrame]) -> None:
    (dir_one, one), (dir_two, two) = grid_one, grid_two
    assert len(one) == 8
    assert counts(one) == counts(two)
    assert bool(one["complete"].all()) and bool(two["complete"].all())
    # The grid exercises both ways of stopping.
    assert (one["failures"] >= GRID_TARGET).any()
    assert (one["shots"] == GRID_BUDGET).any()
    # A batch stored by both runs (same point, index and size) has the same failures: seeds
    # do not depend on which worker ran it or when.
    rows_one = {(k, i, s): f for k, i, s, f in batch_rows(dir_one / "results.sqlite")}
    rows_two = {(k, i, s): f for k, i, s, f in batch_rows(dir_two / "results.sqlite")}
    common = rows_one.keys() & rows_two.keys()
    assert len(common) >= sum(one["batches"])
    assert all(rows_one[c] == rows_two[c] for c in common)


def test_rerun_of_finished_sweep_samples_nothing(grid_file: Path, tmp_path: Path) -> None:
    first = run_sweep(grid_file, out=tmp_path, workers=1, progress=False)
    store = tmp_path / "results.sqlite"
    rows = batch_rows(store)
    csv = (tmp_path / "results.csv").read_bytes()
    for workers in (1, 2):
        again = run_sweep(grid_file, out=tmp_path, workers=workers, progress=False)
        assert batch_rows(store) == rows
        pd.testing.assert_frame_equal(again, first)
        assert (tmp_path / "results.csv").read_bytes() == csv


# ---------------------------------------------------------------------------
# interrupted runs resume to the uninterrupted counts


def signal_mid_sweep(sweep_file: Path, out: Path, sig: int, whole_group: bool, timeout: float = 60,
                     rows: int = 20) -> tuple[int | str, str]:
    """Start ``codebench sweep`` on two workers, signal it once ``rows`` batches are stored.

    Returns the exit status (``"hang"`` if it did not exit within ``timeout`` s
    of the signal) and its standard error. The process runs in a session of its
    own; whatever is left of it afterwards is killed, and a failure is raised if
    worker processes outlive the coordinator by more than 10 s.
    """
    store = out / "results.sqlite"
    proc = subprocess.Popen(
        [*CLI, "sweep", str(sweep_file), "--out", str(out), "--workers", "2", "--quiet"],
        stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True, start_new_session=True,
    )
    status: int | str = "hang"
    err = ""
    try:
        deadline = time.monotonic() + 90
        while row_count(store) < rows:
            assert proc.poll() is None, "the sweep ended before it was signalled"
            assert time.monotonic() < deadline, "no batch rows appeared within 90 s"
            time.sleep(0.01)
        if whole_group:
            os.killpg(proc.pid, sig)
        else:
            os.kill(proc.pid, sig)
        try:
            _, err = proc.communicate(timeout=timeout)
            status = proc.returncode
        except subprocess.TimeoutExpired:
            pass
    finally:
        if proc.poll() is None:
            os.killpg(proc.pid, signal.SIGKILL)
            proc.communicate()
        emptied = reap_group(proc.pid, grace=10)
    assert emptied or status == "hang", "worker processes outlived the coordinator by more than 10 s"
    return status, err


@pytest.mark.parametrize(
    "how",
    [
        pytest.param(("SIGKILL", "group"), id="sigkill-process-group"),
        pytest.param(("SIGTERM", "coordinator"), id="sigterm"),
        pytest.param(("SIGINT", "group"), id="sigint-process-group"),  # what Ctrl-C in a terminal sends
    ],
)
def test_resume_after_signal_matches_uninterrupted_run(
    how: tuple[str, str], long_file: Path, long_reference: tuple[Path, pd.DataFrame], tmp_path: Path
) -> None:
    signame, target = how
    sig = getattr(signal, signame)
    out = tmp_path / "out"
    store = out / "results.sqlite"
    returncode, err = signal_mid_sweep(long_file, out, sig, target == "group")

    if sig == signal.SIGKILL:
        assert returncode == -signal.SIGKILL
    else:
        assert returncode == 130, err
        lines = err.strip().splitlines()
        assert len(lines) == 1 and "interrupted" in lines[0], err
        assert (out / "results.csv").exists()

    with closing(sqlite3.connect(store)) as db:
        assert db.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    partial = load_results(out)
    assert not bool(partial["complete"].all()), "the signal did not land mid-sweep"
    before = batch_rows(store)

    done = cli("sweep", long_file, "--out", out, "--workers", "2", "--quiet")
    assert done.returncode == 0, done.stderr
    ref_dir, reference = long_reference
    final = load_results(out)
    assert counts(final) == counts(reference)
    assert bool(final["complete"].all())
    after = batch_rows(store)
    assert set(before) <= set(after)  # nothing stored before the interrupt was lost or changed
    reference_rows = {(k, i, s): f for k, i, s, f in batch_rows(ref_dir / "results.sqlite")}
    assert all(reference_rows[(k, i, s)] == f for k, i, s, f in after if (k, i, s) in reference_rows)


@pytest.mark.slow
def test_ctrl_c_to_the_process_group_never_hangs(long_file: Path, tmp_path: Path) -> None:
    """Repeated Ctrl-C (SIGINT to coordinator and workers): always exit 130, promptly."""
    outcomes = [signal_mid_sweep(long_file, tmp_path / f"out{i}", signal.SIGINT, True, timeout=30, rows=5 + 7 * i)[0]
                for i in range(10)]
    assert outcomes == [130] * 10


# ---------------------------------------------------------------------------
# stopping rules


def test_failure_target_stops_at_first_batch_that_reaches_it(grid_one: tuple[Path, pd.DataFrame]) -> None:
    out, frame = grid_one
    store = out / "results.sqlite"
    rows, caps = batch_rows(store), point_caps(store)
    for r in frame.itertuples(index=False):
        assert r.failures >= GRID_TARGET or r.shots == GRID_BUDGET
        assert r.shots <= GRID_BUDGET
        sizes = batch_sizes(GRID_BUDGET, caps[r.point_id])
        assert prefix_counts(rows, r.point_id, sizes, GRID_BUDGET, GRID_TARGET) == (r.shots, r.failures, r.batches)


@pytest.mark.parametrize("budget", [5000, 12345])
def test_shot_budget_is_exact_when_failures_are_rare(budget: int, tmp_path: Path) -> None:
    text = sweep_text("budget", {"failure_target": 1_000_000, "shot_budget": budget}, [
        {"code": "repetition", "distances": [3], "rounds": 3, "noise": "circuit_depolarizing",
         "p": [0.001], "decoders": ["mwpm"]},
        {"code": "rotated_surface", "distances": [3], "rounds": 2, "noise": "si1000",
         "p": [0.001], "decoders": ["mwpm"]},
    ])
    frame = run_sweep(write(tmp_path / "s.toml", text), out=tmp_path / "out", workers=1, progress=False)
    assert list(frame["shots"]) == [budget, budget]
    assert (frame["failures"] < 1_000_000).all()
    rows = batch_rows(tmp_path / "out" / "results.sqlite")
    for key in frame["point_id"]:
        assert sum(s for k, _, s, _ in rows if k == key) == budget


def test_relative_precision_stops_when_interval_is_narrow_enough(tmp_path: Path) -> None:
    precision, budget, target = 0.2, 1_000_000, 1_000_000
    text = sweep_text(
        "precision",
        {"failure_target": target, "shot_budget": budget, "relative_precision": precision},
        [{"code": "repetition", "distances": [3], "rounds": 3, "noise": "circuit_depolarizing",
          "p": [0.01, 0.03], "decoders": ["mwpm"]}],
    )
    out = tmp_path / "out"
    frame = run_sweep(write(tmp_path / "s.toml", text), out=out, workers=1, progress=False)
    rows, caps = batch_rows(out / "results.sqlite"), point_caps(out / "results.sqlite")
    for r in frame.itertuples(index=False):
        assert r.shots < budget
        low, high = wilson(r.failures, r.shots)
        assert (high - low) / 2 <= precision * r.failures / r.shots
        # About (z / precision)^2 failures are needed; far fewer than the failure target.
        assert 0.5 * (Z95 / precision) ** 2 < r.failures < 4 * (Z95 / precision) ** 2
        sizes = batch_sizes(budget, caps[r.point_id])
        assert prefix_counts(rows, r.point_id, sizes, budget, target, precision) == (r.shots, r.failures, r.batches)


@pytest.mark.parametrize("cap", [1024, 4096, 100_000, 1 << 18])
@pytest.mark.parametrize("budget", [1, 1000, 1023, 1024, 1025, 5000, 20_000, 123_457, 1_000_000])
def test_batch_schedule_sums_to_the_budget(budget: int, cap: int) -> None:
    sizes = batch_sizes(budget, cap)
    assert sum(sizes) == budget
    assert all(isinstance(s, int) and 0 < s <= cap for s in sizes)
    assert sizes[0] == min(FIRST_BATCH, cap, budget)
    # Batches grow (at most doubling) until the cap; only the last one is cut short.
    for before, after in zip(sizes[:-2], sizes[1:-1]):
        assert before <= after <= 2 * before
        assert after > before or after == cap
    assert batch_sizes(budget, cap) == sizes  # a pure function
    # A larger budget keeps the schedule of a smaller one, except its cut-short last batch.
    assert batch_sizes(2 * budget, cap)[: len(sizes) - 1] == sizes[:-1]


def test_batch_schedule_documented_examples() -> None:
    assert batch_sizes(5000, 2048) == [1024, 2048, 1928]
    assert batch_sizes(40000, 1 << 20) == [1024, 2048, 4096, 8192, 10240, 12800, 1600]


def test_raising_the_budget_continues_from_stored_batches(tmp_path: Path) -> None:
    studies = [
        {"code": "repetition", "distances": [3], "rounds": 3, "noise": "circuit_depolarizing",
         "p": [0.002, 0.03], "decoders": ["mwpm"]},
        {"code": "rotated_surface", "distances": [3], "rounds": 3, "noise": "circuit_depolarizing",
         "p": [0.002], "decoders": ["mwpm"]},
    ]
    small, large = 6000, 40_000
    stopping = {"failure_target": 150}
    sweep_file = tmp_path / "s.toml"
    out = tmp_path / "out"
    store = out / "results.sqlite"

    write(sweep_file, sweep_text("grow", {**stopping, "shot_budget": small}, studies))
    first = run_sweep(sweep_file, out=out, workers=1, progress=False)
    rows_small = batch_rows(store)

    write(sweep_file, sweep_text("grow", {**stopping, "shot_budget": large}, studies))
    grown = run_sweep(sweep_file, out=out, workers=1, progress=False)
    rows_large = batch_rows(store)

    fresh = run_sweep(sweep_file, out=tmp_path / "fresh", workers=1, progress=False)
    assert counts(grown) == counts(fresh)
    assert (grown["shots"] >= first["shots"]).all()
    assert (grown["shots"] > first["shots"]).any()
    assert (grown["shots"] == large).any()
    assert set(rows_small) <= set(rows_large)
    # One worker runs exactly the counted batches; those already stored are not sampled again.
    caps = point_caps(store)
    stored = {(k, i, s) for k, i, s, _ in rows_small}
    expected_new = 0
    for r in grown.itertuples(index=False):
        sizes = batch_sizes(large, caps[r.point_id])[: r.batches]
        expected_new += sum((r.point_id, i, s) not in stored for i, s in enumerate(sizes))
    assert len(rows_large) - len(rows_small) == expected_new
    assert expected_new < sum(grown["batches"])  # some stored batches were reused


def test_changing_batch_bytes_then_rerunning_matches_a_fresh_run(tmp_path: Path) -> None:
    """The results table follows the batch schedule of the latest run, not the first one."""
    studies = [{"code": "repetition", "distances": [3], "rounds": 3, "noise": "circuit_depolarizing",
                "p": [0.01], "decoders": ["mwpm"]}]
    stopping = {"failure_target": 1_000_000, "shot_budget": 20_000}
    sweep_file = tmp_path / "s.toml"
    write(sweep_file, sweep_text("bytes", stopping, studies))
    run_sweep(sweep_file, out=tmp_path / "out", workers=1, progress=False)
    write(sweep_file, sweep_text("bytes", stopping, studies, engine={"batch_bytes": 1024}))
    rerun = run_sweep(sweep_file, out=tmp_path / "out", workers=1, progress=False)
    fresh = run_sweep(sweep_file, out=tmp_path / "fresh", workers=1, progress=False)
    assert counts(rerun) == counts(fresh)
    assert list(rerun["batches"]) == list(fresh["batches"])


# ---------------------------------------------------------------------------
# foreign store files


def _foreign_random(path: Path) -> None:
    path.write_bytes(random.Random(7).randbytes(5000))


def _foreign_sqlite(path: Path) -> None:
    with closing(sqlite3.connect(path)) as db:
        db.execute("CREATE TABLE notes (id INTEGER PRIMARY KEY, body TEXT)")
        db.executemany("INSERT INTO notes (body) VALUES (?)", [("first",), ("second",)])
        db.commit()


def _foreign_text(path: Path) -> None:
    path.write_text("shots,failures\n100,3\n")


@pytest.mark.parametrize("make", [_foreign_random, _foreign_sqlite, _foreign_text],
                         ids=["random-bytes", "other-sqlite", "text"])
def test_foreign_store_is_refused_and_left_untouched(make: Any, grid_file: Path, tmp_path: Path) -> None:
    out = tmp_path / "out"
    out.mkdir()
    target = out / "results.sqlite"
    make(target)
    content = target.read_bytes()
    listing = sorted(p.name for p in out.iterdir())

    done = cli("sweep", grid_file, "--out", out, "--workers", "1", "--quiet")
    assert done.returncode == 2
    lines = done.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("codebench: ") and "results.sqlite" in lines[0], done.stderr
    assert "Traceback" not in done.stderr
    assert target.read_bytes() == content
    assert sorted(p.name for p in out.iterdir()) == listing

    with pytest.raises(CodebenchError):
        run_sweep(grid_file, out=out, workers=1, progress=False)
    assert target.read_bytes() == content
    assert sorted(p.name for p in out.iterdir()) == listing


def test_batches_hold_at_most_batch_bytes_of_detection_events(tmp_path: Path) -> None:
    config = {"name": "bytes", "seed": 4, "stopping": {"shot_budget": 3000, "failure_target": 10**6},
              "engine": {"batch_bytes": 4096},
              "study": [{"code": "rotated_surface", "distances": [5], "rounds": 5, "noise": "si1000",
                         "p": [0.002], "decoders": ["mwpm"]}]}
    frame = run_sweep(config, out=tmp_path, workers=1, progress=False)
    per_shot = (int(frame.loc[0, "detectors"]) + 7) // 8  # bit-packed bytes of one shot's detection events
    rows = batch_rows(tmp_path / "results.sqlite")
    assert sum(shots for _, _, shots, _ in rows) == 3000
    assert max(shots for _, _, shots, _ in rows) == 4096 // per_shot  # the cap is reached, never passed


def test_empty_store_file_is_started_afresh(tmp_path: Path) -> None:
    # A run killed between creating the file and its first write leaves 0 bytes: nothing to lose.
    (tmp_path / "results.sqlite").touch()
    config = {"name": "empty", "seed": 2, "stopping": {"shot_budget": 3000},
              "study": [{"code": "repetition", "distances": [3], "rounds": 2, "noise": "code_capacity",
                         "p": [0.05], "decoders": ["mwpm"]}]}
    frame = run_sweep(config, out=tmp_path, workers=1, progress=False)
    assert int(frame["shots"].sum()) == 3000


THREADED_BATCHES = """
import json, sys, threading
from codebench.engine.worker import run_batch
from codebench.records import BatchTask, Point
point = Point(code="rotated_surface", distance=3, rounds=3, basis="Z", noise="si1000", p=0.002, decoder="mwpm")
tasks = [BatchTask(point.key(1), point.params(), i, 2048, 100 + i) for i in range(16)]
failures = {}
def work(part):
    for task in part:
        failures[task.batch_index] = run_batch(task).failures
threads = [threading.Thread(target=work, args=(tasks[k::4],)) for k in range(4)]
for t in threads: t.start()
for t in threads: t.join()
print(json.dumps([failures[i] for i in range(16)]))
"""


def test_batches_on_four_threads_of_a_fresh_process_finish_with_sequential_counts() -> None:
    # A Dask worker may run several batches at once on threads. The first concurrent
    # samples of a fresh process used to deadlock inside stim's lazy imports.
    for _ in range(3):
        done = subprocess.run([sys.executable, "-c", THREADED_BATCHES], capture_output=True, text=True, timeout=60)
        assert done.returncode == 0, done.stderr
        threaded = json.loads(done.stdout)
    from codebench.engine.worker import run_batch
    from codebench.records import BatchTask

    point = Point(code="rotated_surface", distance=3, rounds=3, basis="Z", noise="si1000", p=0.002, decoder="mwpm")
    sequential = [run_batch(BatchTask(point.key(1), point.params(), i, 2048, 100 + i)).failures for i in range(16)]
    assert threaded == sequential


def test_store_killed_before_its_first_checkpoint_is_still_ours(tmp_path: Path) -> None:
    # Only the write-ahead log holds the rows of a store whose writer was killed before
    # SQLite's first checkpoint; it must be recognised as a codebench store, not a foreign one.
    store = tmp_path / "results.sqlite"
    code = f"import os; from codebench.results.store import Store; Store({str(store)!r}); os._exit(0)"
    subprocess.run([sys.executable, "-c", code], check=True)
    assert (tmp_path / "results.sqlite-wal").exists()
    from codebench.results.store import Store

    Store(store).close()


# ---------------------------------------------------------------------------
# export and the results table


REQUIRED_COLUMNS = [
    "study", "code", "distance", "rounds", "basis", "noise", "p", "decoder", "shots", "failures",
    "seconds", "failure_rate", "failure_rate_low", "failure_rate_high", "per_round_rate",
    "per_round_low", "per_round_high", "qubits", "detectors",
]


def test_export_rewrites_the_csv_written_by_sweep(grid_cli: Path, tmp_path: Path) -> None:
    csv = grid_cli / "results.csv"
    written = csv.read_bytes()
    (grid_cli / "results.csv").unlink()
    done = cli("export", grid_cli)
    assert done.returncode == 0, done.stderr
    assert csv.read_bytes() == written
    other = tmp_path / "copy.csv"
    done = cli("export", grid_cli, "--csv", other)
    assert done.returncode == 0, done.stderr
    assert other.read_bytes() == written
    assert counts(pd.read_csv(io.BytesIO(written))) == counts(load_results(grid_cli))


def test_results_csv_columns_and_values(grid_cli: Path) -> None:
    frame = pd.read_csv(grid_cli / "results.csv", keep_default_na=False)
    assert set(REQUIRED_COLUMNS) <= set(frame.columns)
    assert list(frame.columns[: len(REQUIRED_COLUMNS)]) == REQUIRED_COLUMNS
    # Read without decoding anything: options as name=value text, the point's hash last, under our name.
    assert frame.columns[-1] == "point_id" and "key" not in frame.columns
    assert not any(str(v).startswith("{") for v in [*frame["noise_options"], *frame["decoder_options"]])
    assert set(frame["in_sweep_file"].astype(str)) == {"True"}
    assert len(frame) == 8
    for r in frame.itertuples(index=False):
        d, rounds = int(r.distance), int(r.rounds)
        if r.code == "repetition":
            assert r.qubits == 2 * d - 1
            assert r.detectors == (d - 1) * (rounds + 1)
        else:
            assert r.code == "rotated_surface"
            assert r.qubits == 2 * d * d - 1
            assert r.detectors == (d * d - 1) * rounds
        assert r.seconds > 0
        assert r.failure_rate == pytest.approx(r.failures / r.shots, rel=1e-9)
        assert r.failure_rate_low <= r.failure_rate <= r.failure_rate_high
        low, high = wilson(int(r.failures), int(r.shots))
        assert r.failure_rate_low == pytest.approx(low, rel=1e-8)
        assert r.failure_rate_high == pytest.approx(high, rel=1e-8)
        for total, eps in ((r.failure_rate, r.per_round_rate), (r.failure_rate_low, r.per_round_low),
                           (r.failure_rate_high, r.per_round_high)):
            assert eps == pytest.approx(per_round(total, rounds), rel=1e-7, abs=1e-15)
        assert r.per_round_low <= r.per_round_rate <= r.per_round_high
    qubits = {(r.code, int(r.distance)): int(r.qubits) for r in frame.itertuples(index=False)}
    assert qubits[("rotated_surface", 3)] == 17
    assert qubits[("repetition", 3)] == 5


# ---------------------------------------------------------------------------
# the circuit verb


def test_circuit_of_a_sweep_point_matches_the_csv(grid_file: Path, grid_cli: Path) -> None:
    frame = pd.read_csv(grid_cli / "results.csv")
    for index in (0, len(frame) - 1):
        done = cli("circuit", grid_file, "--point", index)
        assert done.returncode == 0, done.stderr
        circuit = stim.Circuit(done.stdout)
        assert circuit.num_detectors == frame.loc[index, "detectors"]
        assert circuit.num_qubits == frame.loc[index, "qubits"]
        assert circuit.num_observables == 1


def test_circuit_from_explicit_options() -> None:
    done = cli("circuit", "--code", "repetition", "--distance", 3, "--rounds", 2, "--noise", "si1000", "--p", 0.001)
    assert done.returncode == 0, done.stderr
    circuit = stim.Circuit(done.stdout)
    assert circuit.num_detectors == (3 - 1) * (2 + 1)
    assert circuit.num_qubits == 5
    assert circuit.num_observables == 1
    assert circuit.detector_error_model(decompose_errors=True).num_errors > 0  # the noise is there


def test_circuit_point_out_of_range(grid_file: Path) -> None:
    done = cli("circuit", grid_file, "--point", 99)
    assert done.returncode == 2
    assert done.stdout == ""
    lines = done.stderr.strip().splitlines()
    assert len(lines) == 1 and "--point" in lines[0] and "99" in lines[0], done.stderr


def test_points_a_changed_sweep_file_no_longer_lists_stay_reachable(tmp_path: Path,
                                                                    capsys: pytest.CaptureFixture[str]) -> None:
    """Edit a sweep and rerun it into the same folder: the dropped point stays in the store, the CSV and the
    analysis say so on standard error, and --all brings it back (under its own study label)."""
    from codebench.cli import main

    text = ('name = "edited"\nseed = 3\n[stopping]\nshot_budget = 2000\n[[study]]\ncode = "repetition"\n'
            'distances = [3, 5]\nrounds = "d"\nnoise = "si1000"\np = {P}\ndecoders = ["mwpm"]\n')
    sweep = tmp_path / "edited.toml"
    out = tmp_path / "out"
    sweep.write_text(text.replace("{P}", "[0.01, 0.02]"))
    assert main(["sweep", str(sweep), "--out", str(out), "--workers", "1", "--quiet"]) == 0
    sweep.write_text(text.replace("{P}", "[0.01]"))
    assert main(["sweep", str(sweep), "--out", str(out), "--workers", "1", "--quiet"]) == 0
    capsys.readouterr()
    assert len(pd.read_csv(out / "results.csv")) == 2
    assert main(["export", str(out), "--csv", str(tmp_path / "listed.csv")]) == 0
    assert "2 stored point(s) are not in the sweep file" in capsys.readouterr().err
    assert main(["export", str(out), "--csv", str(tmp_path / "all.csv"), "--all"]) == 0
    every = pd.read_csv(tmp_path / "all.csv")
    assert len(every) == 4 and sorted(every.loc[every["study"] == "(not in the sweep file)", "p"]) == [0.02, 0.02]
    # The CSV itself says which rows the current sweep file lists.
    assert sorted(every.loc[~every["in_sweep_file"], "p"]) == [0.02, 0.02] and every["in_sweep_file"].sum() == 2
    assert main(["analyze", str(out), "--bootstrap", "20"]) == 0
    assert "--all includes them" in capsys.readouterr().err


def test_options_in_the_results_table_read_as_name_value_text(tmp_path: Path) -> None:
    sweep = {"name": "opts", "seed": 2, "stopping": {"shot_budget": 1000},
             "study": [{"code": "rotated_surface", "distances": [3], "rounds": 1, "noise": "code_capacity",
                        "p": [0.05], "noise_options": {"data_errors": "depolarize"}, "decoders": ["bposd"],
                        "decoder_options": {"bposd": {"osd_order": 2}}}]}
    row = run_sweep(sweep, out=tmp_path, executor=InProcessExecutor(), progress=False).iloc[0]
    assert row["noise_options"] == "data_errors=depolarize"
    assert "osd_order=2" in row["decoder_options"].split("; ")
