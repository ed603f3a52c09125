"""Sweeps on a real Dask cluster: same counts, lost workers, signals, the run lock, damaged stores.

Every cluster here is a real ``dask.distributed.LocalCluster`` of 2 worker
processes (no mocks). What must hold, and why:

* A batch is a pure function of its task (seed from sweep seed, point and
  batch index), and stopping is decided in batch order, so the counts of a
  finished sweep are those of a local run, whichever worker ran a batch,
  whether a worker died under it, and however often the run was stopped.
* Only the coordinator writes the store; a second coordinator on the same
  folder is refused while the first is alive (kernel ``flock``, dropped at
  process exit, ``kill -9`` included).
* A damaged store file is refused with exit status 2 and never modified.

Sources: none beyond the engine's own contract (common practice for
reproducible Monte Carlo: one seeded stream per independent unit of work).
"""

from __future__ import annotations

import hashlib
import os
import signal
import sqlite3
import subprocess
import sys
import threading
import time
from contextlib import closing
from pathlib import Path
from typing import Any, Iterator

import dask
import pandas as pd
import plugin_decoder
import pytest
from distributed import Client, LocalCluster
from test_engine import CLI, batch_rows, cli, counts, reap_group, row_count, write

from codebench.api import load_results, run_sweep
from codebench.config import load_sweep
from codebench.engine.cluster import parse_cluster
from codebench.engine.dask_executor import (
    DaskExecutor,
    batch_system_cluster,
    start_dask_executor,
)
from codebench.engine.local import InProcessExecutor
from codebench.errors import CodebenchError, ConfigError
from codebench.records import ClusterSpec

# Two points stop on the failure target, two on the shot budget; the largest
# batches take a good fraction of a second, so a worker can be killed mid-batch.
CLUSTER_TOML = """\
name = "cluster"
seed = 21

[stopping]
failure_target = 400
shot_budget = 100000

[[study]]
code = "rotated_surface"
distances = [3, 5]
rounds = "d"
noise = "si1000"
p = [0.001, 0.006]
decoders = ["mwpm"]
"""


def sha256(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def wait_for_rows(store: Path, rows: int, proc: subprocess.Popen[str] | None = None, limit: float = 90) -> None:
    deadline = time.monotonic() + limit
    while row_count(store) < rows:
        assert proc is None or proc.poll() is None, "the sweep ended before it was interrupted"
        assert time.monotonic() < deadline, f"fewer than {rows} batch rows within {limit} s"
        time.sleep(0.02)


def start_sweep(sweep_file: Path, out: Path, *extra: str) -> subprocess.Popen[str]:
    """A ``codebench sweep`` coordinator in a session of its own (so its whole group can be reaped)."""
    return subprocess.Popen([*CLI, "sweep", str(sweep_file), "--out", str(out), "--quiet", *extra],
                            stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True, start_new_session=True)


def stop_group(proc: subprocess.Popen[str]) -> None:
    if proc.poll() is None:
        os.killpg(proc.pid, signal.SIGKILL)
    proc.communicate()
    reap_group(proc.pid, grace=10)


def executing(dask_worker: Any) -> int:
    """Batches the worker is running at this moment (run on the worker's event loop)."""
    return len(dask_worker.state.executing)


def kill_a_busy_worker(client: Client) -> int:
    """SIGKILL a worker process that is running a batch right now; returns its pid."""
    pids: dict[str, int] = client.run(os.getpid)
    deadline = time.monotonic() + 30
    while time.monotonic() < deadline:
        busy = [address for address, count in client.run(executing).items() if count and address in pids]
        if busy:
            os.kill(pids[busy[0]], signal.SIGKILL)
            return pids[busy[0]]
        time.sleep(0.01)
    raise AssertionError("no worker was busy within 30 s")


def run_killing_one_worker(sweep_file: Path, out: Path, client: Client) -> tuple[pd.DataFrame, int, DaskExecutor]:
    """Run the sweep on ``client``; once 3 batches are stored, kill a worker mid-batch."""
    executor = DaskExecutor(client)
    killed: list[int] = []

    def killer() -> None:
        wait_for_rows(out / "results.sqlite", 3)
        killed.append(kill_a_busy_worker(client))

    thread = threading.Thread(target=killer, daemon=True)
    thread.start()
    with executor:
        frame = run_sweep(sweep_file, out=out, executor=executor, progress=False)
    thread.join(timeout=60)
    assert killed, "the sweep finished before a worker could be killed"
    return frame, killed[0], executor


# ---------------------------------------------------------------------------
# fixtures


@pytest.fixture(scope="module")
def sweep_file(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return write(tmp_path_factory.mktemp("cluster") / "cluster.toml", CLUSTER_TOML)


@pytest.fixture(scope="module")
def reference(sweep_file: Path, tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, pd.DataFrame]:
    """The sweep run locally, in process: the counts every cluster run must give."""
    out = tmp_path_factory.mktemp("reference")
    return out, run_sweep(sweep_file, out=out, executor=InProcessExecutor(), progress=False)


@pytest.fixture(scope="module")
def cluster() -> Iterator[LocalCluster]:
    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=":0") as local:
        yield local


@pytest.fixture
def client(cluster: LocalCluster) -> Iterator[Client]:
    with Client(cluster) as connected:
        connected.wait_for_workers(2, timeout=60)
        yield connected


# ---------------------------------------------------------------------------
# counts


def test_dask_counts_equal_local_counts(sweep_file: Path, reference: tuple[Path, pd.DataFrame],
                                        cluster: LocalCluster, tmp_path: Path) -> None:
    ref_dir, ref = reference
    frame = run_sweep(sweep_file, out=tmp_path, scheduler=cluster.scheduler_address, progress=False)
    assert counts(frame) == counts(ref)
    assert bool(frame["complete"].all())
    assert (ref["failures"] >= 400).any() and (ref["shots"] == 100000).any()  # both stopping rules met
    # Every batch the two runs share has the same failures, whichever worker ran it.
    local_rows = {(k, i, s): f for k, i, s, f in batch_rows(ref_dir / "results.sqlite")}
    dask_rows = {(k, i, s): f for k, i, s, f in batch_rows(tmp_path / "results.sqlite")}
    shared = local_rows.keys() & dask_rows.keys()
    assert len(shared) >= int(ref["batches"].sum())
    assert all(local_rows[key] == dask_rows[key] for key in shared)


def test_threads_sharing_a_worker_give_the_same_counts(sweep_file: Path, reference: tuple[Path, pd.DataFrame],
                                                        tmp_path: Path) -> None:
    # Two batches of one point at once in one worker process: each thread has its own
    # compiled decoder (a decoder object is not shared between threads).
    with start_dask_executor(ClusterSpec(local_workers=1, threads_per_worker=2)) as executor:
        frame = run_sweep(sweep_file, out=tmp_path, executor=executor, progress=False)
    assert counts(frame) == counts(reference[1])


def test_worker_killed_mid_batch_changes_no_count(sweep_file: Path, reference: tuple[Path, pd.DataFrame],
                                                  client: Client, tmp_path: Path) -> None:
    frame, pid, _ = run_killing_one_worker(sweep_file, tmp_path, client)
    assert counts(frame) == counts(reference[1])
    assert bool(frame["complete"].all())
    client.wait_for_workers(2, timeout=60)  # the nanny restarted the killed worker
    assert pid not in client.run(os.getpid).values()


def test_batch_the_scheduler_gives_up_on_is_resubmitted(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    # With no failures allowed, the scheduler declares a batch lost (KilledWorker) as soon
    # as its worker dies under it; the executor must resubmit it itself. The worker kills
    # itself inside its first batch (plug-in ``DiesOnce``), so the batch is certainly
    # running when it dies, however busy the machine is.
    study_file = write(tmp_path / "dies.toml", CLUSTER_TOML.replace('"mwpm"', f'"{plugin_decoder.__name__}:DiesOnce"'))
    marker = tmp_path / "died"
    monkeypatch.setenv("CODEBENCH_TEST_DIE_MARKER", str(marker))
    with dask.config.set({"distributed.scheduler.allowed-failures": 0}):
        with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=":0") as local:
            with Client(local) as strict:
                strict.wait_for_workers(2, timeout=60)
                with DaskExecutor(strict) as executor:
                    frame = run_sweep(study_file, out=tmp_path / "dask", executor=executor, progress=False)
    assert marker.exists(), "no worker died"
    assert executor.resubmitted >= 1
    # The same sweep in process (the marker now exists: nothing dies) gives the same counts.
    local_frame = run_sweep(study_file, out=tmp_path / "local", executor=InProcessExecutor(), progress=False)
    assert counts(frame) == counts(local_frame)
    assert bool(frame["complete"].all())


# ---------------------------------------------------------------------------
# the coordinator: signals and the run lock


@pytest.mark.parametrize("to_group", [False, True], ids=["sigterm-to-coordinator", "sigint-to-process-group"])
def test_signal_on_coordinator_then_resume_gives_uninterrupted_counts(
    to_group: bool, sweep_file: Path, reference: tuple[Path, pd.DataFrame], tmp_path: Path
) -> None:
    # The coordinator starts (and must close) its own 2-worker Dask cluster. SIGINT to the
    # whole process group is what Ctrl-C in a terminal sends: Dask's worker processes get it too.
    own_cluster = write(tmp_path / "own.toml", CLUSTER_TOML + "\n[cluster]\nlocal_workers = 2\n")
    out = tmp_path / "out"
    proc = start_sweep(own_cluster, out)
    try:
        wait_for_rows(out / "results.sqlite", 4, proc)
        if to_group:
            os.killpg(proc.pid, signal.SIGINT)
        else:
            proc.send_signal(signal.SIGTERM)
        _, err = proc.communicate(timeout=60)
        emptied = reap_group(proc.pid, grace=10)  # True only if nothing had to be killed
    finally:
        stop_group(proc)
    assert proc.returncode == 130, err
    lines = err.strip().splitlines()
    assert len(lines) == 1 and "interrupted" in lines[0], err
    assert emptied, "Dask worker processes outlived the coordinator by more than 10 s"
    before = batch_rows(out / "results.sqlite")
    assert not bool(load_results(out)["complete"].all()), "SIGTERM did not land mid-sweep"

    done = cli("sweep", own_cluster, "--out", out, "--quiet")
    assert done.returncode == 0, done.stderr
    final = load_results(out)
    assert counts(final) == counts(reference[1])
    assert set(before) <= set(batch_rows(out / "results.sqlite"))


def test_second_coordinator_refused_while_first_lives_then_takes_over(
    sweep_file: Path, reference: tuple[Path, pd.DataFrame], cluster: LocalCluster, tmp_path: Path
) -> None:
    out = tmp_path / "out"
    store = out / "results.sqlite"
    # The first run would take minutes: it is surely alive when the second starts. The
    # takeover run is the usual sweep, whose batches are a prefix of the long one's.
    long_run = write(tmp_path / "long.toml", CLUSTER_TOML.replace("shot_budget = 100000", "shot_budget = 5000000")
                     .replace("failure_target = 400", "failure_target = 1000000"))
    first = start_sweep(long_run, out, "--scheduler", cluster.scheduler_address)
    try:
        wait_for_rows(store, 2, first)
        rows_before = batch_rows(store)
        second = cli("sweep", sweep_file, "--out", out, "--scheduler", cluster.scheduler_address, "--quiet")
        assert second.returncode == 2, second.stderr
        lines = second.stderr.strip().splitlines()
        assert len(lines) == 1 and "being written by another codebench run" in lines[0], second.stderr
        assert f"pid {first.pid}" in lines[0]
        assert first.poll() is None  # the refused run did not disturb the live one
        assert set(rows_before) <= set(batch_rows(store))
        os.kill(first.pid, signal.SIGKILL)
        first.wait(timeout=30)
    finally:
        stop_group(first)
    taken_over = cli("sweep", sweep_file, "--out", out, "--scheduler", cluster.scheduler_address, "--quiet")
    assert taken_over.returncode == 0, taken_over.stderr
    assert counts(load_results(out)) == counts(reference[1])


def test_lost_scheduler_stops_the_run_in_one_line_and_a_rerun_resumes(
    sweep_file: Path, reference: tuple[Path, pd.DataFrame], tmp_path: Path
) -> None:
    out = tmp_path / "out"
    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=":0") as doomed:
        proc = start_sweep(sweep_file, out, "--scheduler", doomed.scheduler_address)
        try:
            wait_for_rows(out / "results.sqlite", 3, proc)
            doomed.close()  # the scheduler and its workers go away mid-sweep
            _, err = proc.communicate(timeout=90)
        finally:
            stop_group(proc)
    assert proc.returncode == 1, err
    lines = err.strip().splitlines()
    assert len(lines) == 1 and "lost the connection to the Dask scheduler" in lines[0], err
    before = batch_rows(out / "results.sqlite")
    assert before
    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=":0") as again:
        done = cli("sweep", sweep_file, "--out", out, "--scheduler", again.scheduler_address, "--quiet")
    assert done.returncode == 0, done.stderr
    assert counts(load_results(out)) == counts(reference[1])
    assert set(before) <= set(batch_rows(out / "results.sqlite"))


# ---------------------------------------------------------------------------
# damaged stores


def damage(store: Path) -> None:
    """Overwrite the b-tree header of the store's second page (a table's root page)."""
    page = int.from_bytes(store.read_bytes()[16:18], "big") or 65536
    with store.open("r+b") as handle:
        handle.seek(page)
        handle.write(b"\xff" * 64)


def test_damaged_store_is_refused_untouched(sweep_file: Path, reference: tuple[Path, pd.DataFrame],
                                            cluster: LocalCluster, tmp_path: Path) -> None:
    out = tmp_path / "out"
    out.mkdir()
    source = reference[0] / "results.sqlite"
    with closing(sqlite3.connect(source)) as db:  # a self-contained copy: checkpoint the WAL first
        db.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    store = out / "results.sqlite"
    store.write_bytes(source.read_bytes())
    damage(store)
    digest, listing = sha256(store), sorted(p.name for p in out.iterdir())

    done = cli("sweep", sweep_file, "--out", out, "--scheduler", cluster.scheduler_address, "--quiet")
    assert done.returncode == 2, done.stderr
    lines = done.stderr.strip().splitlines()
    assert len(lines) == 1 and "damaged" in lines[0] and "results.sqlite" in lines[0], done.stderr
    assert sha256(store) == digest
    assert sorted(p.name for p in out.iterdir()) == listing
    for verb in (["export", out], ["analyze", out]):
        other = cli(*verb)
        assert other.returncode == 2 and "damaged" in other.stderr, other.stderr
    assert sha256(store) == digest


# ---------------------------------------------------------------------------
# the [cluster] section and batch systems


def test_cluster_section_forms() -> None:
    assert parse_cluster({"scheduler": "head:8786"}) == ClusterSpec(scheduler="tcp://head:8786")
    assert parse_cluster({"scheduler": "[::1]:8786"}).scheduler == "tcp://[::1]:8786"
    assert parse_cluster({"scheduler": "tls://10.0.0.7:8786"}).scheduler == "tls://10.0.0.7:8786"
    assert parse_cluster({"local_workers": 4}).local_workers == 4
    spec = parse_cluster({"batch_system": "slurm", "adapt_minimum": 0, "adapt_maximum": 20,
                          "options": {"cores": 8, "memory": "16GB"}})
    assert (spec.way, spec.adapt_maximum, spec.options["cores"]) == ("batch_system", 20, 8)


@pytest.mark.parametrize(
    ("table", "named"),
    [
        ({}, "exactly one of scheduler, local_workers, batch_system"),
        ({"scheduler": "tcp://a:1", "local_workers": 2}, "exactly one of"),
        ({"scheduler": "not an address"}, "cluster.scheduler"),
        ({"local_workers": 0}, "cluster.local_workers"),
        ({"local_workers": 2, "jobs": 3}, "cluster.jobs"),
        ({"batch_system": "cron", "jobs": 1}, "cluster.batch_system"),
        ({"batch_system": "slurm"}, "cluster.jobs"),
        ({"batch_system": "slurm", "jobs": 2, "adapt_maximum": 4}, "cluster.jobs"),
        ({"batch_system": "slurm", "adapt_minimum": 5, "adapt_maximum": 4}, "cluster.adapt_maximum"),
        ({"batch_system": "pbs", "jobs": 1, "options": 3}, "cluster.options"),
        ({"local_workers": 2, "nodes": 3}, "cluster.nodes"),
        ({"scheduler": "tcp://a:1", "connect_timeout": -1}, "cluster.connect_timeout"),
        ({"scheduler": "tcp://head:notaport"}, "cluster.scheduler"),
        ({"scheduler": "tcp://head"}, "cluster.scheduler"),
        ({"scheduler": "head:99999"}, "cluster.scheduler"),
        ({"local_workers": 2, "connect_timeout": 5}, "cluster.connect_timeout"),
        ({"batch_system": "slurm", "adapt_minimum": 1}, "cluster.adapt_maximum is missing"),
        ({"batch_system": "slurm", "jobs": 1, "options": {"cores": "one"}}, "cluster.options.cores"),
        ({"batch_system": "slurm", "jobs": 1, "options": {"memory": 8}}, "cluster.options.memory"),
        ({"batch_system": "slurm", "jobs": 1, "options": {"queue_name": "x"}}, "cluster.options.queue_name"),
        ({"batch_system": "slurm", "jobs": 1, "options": {"n_workers": 3}}, "cluster.options.n_workers"),
    ],
)
def test_bad_cluster_section_is_named(table: dict[str, Any], named: str) -> None:
    with pytest.raises(ConfigError, match=named):
        parse_cluster(table)


def test_bad_cluster_section_on_the_command_line(sweep_file: Path, tmp_path: Path) -> None:
    bad = write(tmp_path / "bad.toml", CLUSTER_TOML + '\n[cluster]\nbatch_system = "cron"\njobs = 1\n')
    out = tmp_path / "out"
    done = cli("sweep", bad, "--out", out)
    assert done.returncode == 2
    lines = done.stderr.strip().splitlines()
    assert len(lines) == 1 and "cluster.batch_system" in lines[0] and "'cron'" in lines[0], done.stderr
    assert not out.exists()
    both = cli("sweep", sweep_file, "--out", out, "--workers", "2", "--scheduler", "tcp://127.0.0.1:1")
    assert both.returncode == 2 and "--workers" in both.stderr and not out.exists()


def test_unreachable_scheduler_is_one_clear_error(sweep_file: Path, tmp_path: Path) -> None:
    unreachable = write(tmp_path / "far.toml", CLUSTER_TOML + '\n[cluster]\nscheduler = "tcp://127.0.0.1:9"\n'
                        "connect_timeout = 2\n")
    done = cli("sweep", unreachable, "--out", tmp_path / "out", "--quiet")
    assert done.returncode == 2
    lines = done.stderr.strip().splitlines()
    assert len(lines) == 1 and "cannot reach the Dask scheduler at 'tcp://127.0.0.1:9'" in lines[0], done.stderr
    assert not (tmp_path / "out").exists()  # the folder made for the lock is gone again


def test_importing_dask_jobqueue_leaves_ctrl_c_to_codebench() -> None:
    # dask_jobqueue's import installs a SIGINT handler that calls sys.exit() (a silent exit 0
    # on Ctrl-C); codebench imports it so that the handler in place stays.
    code = ("import signal; from codebench.engine.jobqueue_options import import_jobqueue; "
            "before = signal.getsignal(signal.SIGINT); import_jobqueue(); "
            "assert signal.getsignal(signal.SIGINT) is before is signal.default_int_handler")
    subprocess.run([sys.executable, "-c", code], check=True, timeout=60)


def test_batch_system_without_its_submit_command_is_one_clear_error(tmp_path: Path) -> None:
    # This machine has no SLURM: starting the cluster must say so at once, not wait for workers forever.
    sweep = write(tmp_path / "slurm.toml", CLUSTER_TOML + '\n[cluster]\nbatch_system = "slurm"\njobs = 1\n'
                  '[cluster.options]\ncores = 1\nmemory = "1GB"\n')
    env = {**os.environ, "PATH": str(Path(sys.executable).parent)}  # no sbatch anywhere on it
    done = subprocess.run([*CLI, "sweep", str(sweep), "--out", str(tmp_path / "out"), "--quiet"],
                          capture_output=True, text=True, timeout=120, env=env)
    assert done.returncode == 2, done.stderr
    lines = done.stderr.strip().splitlines()
    assert len(lines) == 1 and "'sbatch' is not on this machine's PATH" in lines[0], done.stderr
    assert not (tmp_path / "out").exists()


def test_batch_system_options_reach_the_job_script(tmp_path: Path) -> None:
    # dask-jobqueue writes the job script without a batch system present: the options
    # given in [cluster.options] must appear in it unchanged.
    sweep = write(tmp_path / "slurm.toml", CLUSTER_TOML + """
[cluster]
batch_system = "slurm"
jobs = 4

[cluster.options]
queue = "short"
account = "qec-lab"
cores = 4
processes = 4
memory = "8GB"
walltime = "01:30:00"
""")
    spec = load_sweep(sweep).cluster
    assert spec is not None and spec.jobs == 4
    jobs = batch_system_cluster(spec)
    try:
        script = jobs.job_script()
    finally:
        jobs.close()
    for line in ("#SBATCH -p short", "#SBATCH -A qec-lab", "#SBATCH -t 01:30:00", "--nworkers 4"):
        assert line in script, script
    with pytest.raises(ConfigError, match=r"cluster\.options\.no_such_option must be absent: .*walltime"):
        batch_system_cluster(ClusterSpec(batch_system="slurm", jobs=1, options={"no_such_option": 1}))


def test_workers_with_other_libraries_are_refused_before_any_batch(client: Client) -> None:
    executor = DaskExecutor(client)
    executor._expected = {**executor._expected, "stim": "0.0.1"}  # as if the coordinator had another stim
    with pytest.raises(CodebenchError, match=r"Dask worker tcp://\S+ differs from the coordinator: stim .*0\.0\.1"):
        _ = executor.capacity  # looks at the workers
    executor.close()


def test_worker_with_other_libraries_is_refused(tmp_path: Path) -> None:
    from codebench.engine.worker import (
        EnvironmentMismatch,
        environment,
        run_batch_checked,
    )
    from codebench.records import BatchTask

    task = BatchTask("k", {}, 0, 1, 0)
    other = {**environment(), "stim": "0.0.1"}
    with pytest.raises(EnvironmentMismatch, match=r"stim .* \(coordinator: 0\.0\.1\)"):
        run_batch_checked(task, other)
