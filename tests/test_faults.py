"""Faults a careless plug-in, input or machine can cause: refused in one line, nothing wrong stored.

What must hold (the engine's contract; common practice for batch pipelines
that promise reproducible counts):

* A decoder's predictions are checked on every batch (shape, dtype, packing);
  a decoder that breaks the contract, raises, or is not deterministic stops
  the run with one ``DecoderError`` line naming it (exit status 2), and no
  batch of it is ever stored, so a fixed decoder resumes from clean counts.
"""

from __future__ import annotations

import contextlib
import csv
import itertools
import os
import resource
import shutil
import signal
import sqlite3
import subprocess
import sys
import time
from collections.abc import Iterator
from contextlib import closing
from pathlib import Path

import plugin_decoder
import psutil
import pytest
from test_cluster import wait_for_rows
from test_engine import CLI, reap_group, write

from codebench.api import run_sweep
from codebench.config import parse_sweep
from codebench.errors import ConfigError, DecoderError
from codebench.records import BatchSchedule

TESTS = Path(__file__).parent


def plugin_sweep(tmp_path: Path, decoder: str) -> Path:
    return write(tmp_path / "plug.toml", f"""\
name = "plug"
seed = 3

[stopping]
shot_budget = 5000

[[study]]
code = "rotated_surface"
distances = [3]
rounds = 1
noise = "code_capacity"
p = [0.05]
decoders = ["{plugin_decoder.__name__}:{decoder}"]
""")


def stored_batches(folder: Path) -> int:
    store = folder / "results.sqlite"
    if not store.exists():
        return 0
    with closing(sqlite3.connect(f"file:{store}?mode=ro", uri=True)) as db:
        return int(db.execute("SELECT COUNT(*) FROM batches").fetchone()[0])


BROKEN = [
    ("WideOutput", "shape (256, 5)"),
    ("FlatOutput", "shape (256,)"),
    ("TinyOutput", "shape (1, 1)"),
    ("FloatOutput", "float64"),
    ("UnpackedOutput", "bool"),
    ("PaddingBitsSet", "bits beyond"),
    ("NoOutput", "returned NoneType"),
    ("RaisesInDecode", "failed in decode_batch: ValueError: lookup table exhausted"),
    ("RaisesInCompile", "failed in compile: RuntimeError: cannot build the graph"),
    ("Unseeded", "not deterministic"),
    ("MutatesInput", "failed in decode_batch"),
]


@pytest.mark.parametrize("workers", [1, 2])
@pytest.mark.parametrize(("decoder", "fragment"), BROKEN, ids=[b[0] for b in BROKEN])
def test_broken_decoder_is_refused_and_nothing_is_stored(tmp_path: Path, decoder: str, fragment: str,
                                                         workers: int) -> None:
    with pytest.raises(DecoderError) as info:
        run_sweep(plugin_sweep(tmp_path, decoder), out=tmp_path / "out", workers=workers, progress=False)
    message = str(info.value)
    assert "\n" not in message and f"plugin_decoder:{decoder}" in message and fragment in message
    assert stored_batches(tmp_path / "out") == 0


def cli_with_plugins(*args: object) -> subprocess.CompletedProcess[str]:
    """The command line with the tests' plug-in module importable (as an installed plug-in would be)."""
    env = {**os.environ, "PYTHONPATH": os.pathsep.join([str(TESTS), os.environ.get("PYTHONPATH", "")])}
    return subprocess.run([*CLI, *map(str, args)], capture_output=True, text=True, timeout=180, env=env)


def test_broken_decoder_exits_2_with_one_line(tmp_path: Path) -> None:
    done = cli_with_plugins("sweep", plugin_sweep(tmp_path, "WideOutput"), "--out", tmp_path / "out",
                            "--workers", 2, "--quiet")
    assert done.returncode == 2, done.stderr
    lines = done.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("codebench: decoder") and "Traceback" not in done.stderr


# ---------------------------------------------------------------------------
# sizes: the batch schedule is lazy


def eager_sizes(shot_budget: int, cap: int) -> list[int]:
    """The schedule as first written (an eager list): the reference the lazy one must equal."""
    sizes: list[int] = []
    total, size = 0, min(1024, cap)
    while total < shot_budget:
        take = min(size, shot_budget - total)
        sizes.append(take)
        total += take
        size = min(size * 2 if size < 8192 else size + size // 4, cap)
    return sizes


@pytest.mark.parametrize("cap", [1, 7, 1000, 1024, 2048, 8192, 8193, 80000, 1 << 18])
@pytest.mark.parametrize("budget", [0, 1, 1023, 1024, 5000, 40000, 123457, 2_000_000])
def test_lazy_schedule_equals_the_eager_one(budget: int, cap: int) -> None:
    schedule = BatchSchedule(budget, cap)
    assert list(schedule) == eager_sizes(budget, cap)
    assert sum(schedule) == budget


def test_a_huge_budget_costs_nothing_to_schedule() -> None:
    # An eager list here held 10**14 entries (the campaign's hang); the lazy one adds up exactly.
    schedule = BatchSchedule(2**63 - 1, 80000)
    head = list(itertools.takewhile(lambda size: size < 80000, schedule))
    full = len(schedule) - len(head) - 1
    assert schedule[100] == 80000 and 0 < schedule[-1] <= 80000
    assert sum(head) + full * 80000 + schedule[-1] == 2**63 - 1


# ---------------------------------------------------------------------------
# sizes: generous upper limits, refused before anything is built

SURFACE = {"code": "rotated_surface", "distances": [3], "rounds": "d", "noise": "si1000", "p": [0.001],
           "decoders": ["mwpm"]}
TOO_BIG = [
    ("distance", {"distances": [10001]}, "study[0].distances[0] must be a distance of at most 201; got 10001."),
    ("rounds", {"rounds": 1_000_000_000}, "study[0].rounds must be a positive integer (at most 10,000)"),
    ("rounds multiple", {"distances": [101], "rounds": "200d"}, "at most 10,000 rounds"),
    ("geomspace count", {"p": {"geomspace": [0.001, 0.01, 100_000_000]}}, "study[0].p.geomspace[2] must be an "
                                                                             "integer in [1, 10,000]"),
    ("detectors", {"distances": [201], "rounds": "d"}, "about 8,160,800 detectors on 80,801 qubits"),
    ("grid", {"code": "repetition", "distances": list(range(3, 200, 2)), "p": {"geomspace": [0.001, 0.01, 300]}},
     "expands to 29,700 points"),
]


@pytest.mark.parametrize(("change", "fragment"), [c[1:] for c in TOO_BIG], ids=[c[0] for c in TOO_BIG])
def test_oversized_sweeps_are_refused_in_one_line(change: dict[str, object], fragment: str) -> None:
    with pytest.raises(ConfigError) as info:
        parse_sweep({"name": "big", "seed": 1, "study": [{**SURFACE, **change}]})
    assert fragment in str(info.value) and "\n" not in str(info.value)


def test_oversized_sweep_file_exits_2_and_writes_nothing(tmp_path: Path) -> None:
    sweep = write(tmp_path / "big.toml", 'name = "big"\nseed = 1\n[[study]]\ncode = "rotated_surface"\n'
                  'distances = [3]\nrounds = 1000000000\nnoise = "si1000"\np = [0.001]\ndecoders = ["mwpm"]\n')
    done = cli_with_plugins("sweep", sweep, "--out", tmp_path / "out")
    assert done.returncode == 2 and "at most 10,000" in done.stderr and "Traceback" not in done.stderr
    assert not (tmp_path / "out").exists()


# ---------------------------------------------------------------------------
# orphans: worker processes die with their coordinator

LONG_SWEEP = """\
name = "long"
seed = 1
[stopping]
failure_target = 1000000000
shot_budget = 1000000000
[[study]]
code = "rotated_surface"
distances = [5]
rounds = "d"
noise = "si1000"
p = [0.001]
decoders = ["mwpm"]
"""


def test_kill_9_of_the_coordinator_leaves_no_process_behind(tmp_path: Path) -> None:
    sweep = write(tmp_path / "long.toml", LONG_SWEEP)
    proc = subprocess.Popen([*CLI, "sweep", str(sweep), "--out", str(tmp_path / "out"), "--workers", "2", "--quiet"],
                            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, start_new_session=True)
    try:
        wait_for_rows(tmp_path / "out" / "results.sqlite", 2, proc)  # the pool is up and working
        family = psutil.Process(proc.pid).children(recursive=True)
        assert len(family) >= 3  # fork server, resource tracker, 2 workers
        os.kill(proc.pid, signal.SIGKILL)
        proc.wait(timeout=30)
        gone, alive = psutil.wait_procs(family, timeout=30)
        assert not alive, f"left running after kill -9 of the coordinator: {[p.cmdline()[-1][:60] for p in alive]}"
    finally:
        reap_group(proc.pid, grace=5)


# ---------------------------------------------------------------------------
# a worker that dies: one line, exit 1, and a rerun resumes to the uninterrupted counts

CRASH_SWEEP = """\
name = "crash"
seed = 4
[stopping]
failure_target = 1000000
shot_budget = 20000
[[study]]
code = "rotated_surface"
distances = [3]
rounds = "d"
noise = "si1000"
p = [0.004]
decoders = ["plugin_decoder:CrashesOnThirdBatch"]
"""


@pytest.mark.parametrize("how", ["segfault", "exit"])
@pytest.mark.parametrize("workers", [1, 2])
def test_a_worker_crashed_by_a_decoder_is_one_line_and_the_rerun_resumes(
        tmp_path: Path, workers: int, how: str, monkeypatch: pytest.MonkeyPatch) -> None:
    # With one worker too: a plug-in decoder runs in a worker process, never in the coordinator.
    sweep = write(tmp_path / "crash.toml", CRASH_SWEEP)
    out = tmp_path / "out"
    monkeypatch.setenv("CODEBENCH_TEST_CRASH", how)
    done = cli_with_plugins("sweep", sweep, "--out", out, "--workers", workers, "--quiet")
    monkeypatch.delenv("CODEBENCH_TEST_CRASH")
    assert done.returncode == 1, done.stderr
    lines = done.stderr.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in done.stderr, done.stderr
    assert "worker process died" in lines[0] and "rotated_surface d=3" in lines[0] and "rerun" in lines[0]
    # The crashing 4,096-shot batch is submitted only once a batch has come back (and been stored); with
    # two workers batch 1 may still be running when the pool breaks, so one stored batch is what is sure.
    assert stored_batches(out) >= 1
    resumed = cli_with_plugins("sweep", sweep, "--out", out, "--workers", workers, "--quiet")
    assert resumed.returncode == 0, resumed.stderr
    reference = cli_with_plugins("sweep", sweep, "--out", tmp_path / "reference", "--workers", workers, "--quiet")
    assert reference.returncode == 0
    assert shots_and_failures(out) == shots_and_failures(tmp_path / "reference")


def shots_and_failures(folder: Path) -> list[tuple[str, str]]:
    with (folder / "results.csv").open() as handle:
        return [(row["shots"], row["failures"]) for row in csv.DictReader(handle)]


# ---------------------------------------------------------------------------
# a full disk: one line, nothing stray, and a rerun with space resumes to the uninterrupted counts

FILL_SWEEP = """\
name = "fill"
seed = 6
[stopping]
failure_target = 1000000
shot_budget = 400000
[[study]]
code = "repetition"
distances = [3, 5]
rounds = "d"
noise = "circuit_depolarizing"
p = [0.001, 0.002, 0.004, 0.008]
decoders = ["mwpm"]
"""


@contextlib.contextmanager
def small_disk(folder: Path, size: str) -> Iterator[Path]:
    """A tmpfs of ``size`` mounted at ``folder`` (skips the test where mounting is not allowed)."""
    folder.mkdir()
    done = subprocess.run(["mount", "-t", "tmpfs", "-o", f"size={size}", "tmpfs", str(folder)],
                          capture_output=True, text=True)
    if done.returncode != 0:
        pytest.skip(f"cannot mount a tmpfs here ({done.stderr.strip()}); the file-size-limit case covers it")
    try:
        yield folder
    finally:
        subprocess.run(["umount", "-l", str(folder)], capture_output=True)


def run_limited(args: list[object], file_size: int | None) -> subprocess.CompletedProcess[str]:
    """The command line, its files limited to ``file_size`` bytes (a disk that fills; SIGXFSZ ignored)."""
    def limit() -> None:
        signal.signal(signal.SIGXFSZ, signal.SIG_IGN)
        if file_size is not None:
            resource.setrlimit(resource.RLIMIT_FSIZE, (file_size, file_size))
    return subprocess.run([*CLI, *map(str, args)], capture_output=True, text=True, timeout=300, preexec_fn=limit)


def leftovers(folder: Path) -> list[str]:
    """Files in ``folder`` other than the store, its SQLite companions and the run lock."""
    expected = {"results.sqlite", "results.sqlite-wal", "results.sqlite-shm", "results.lock", "results.csv"}
    return sorted(p.name for p in folder.iterdir() if p.name not in expected)


@pytest.mark.parametrize("how", ["tmpfs", "file-size limit"])
def test_a_full_disk_is_one_line_leaves_nothing_stray_and_the_rerun_resumes(tmp_path: Path, how: str) -> None:
    sweep = write(tmp_path / "fill.toml", FILL_SWEEP)
    reference = run_limited(["sweep", sweep, "--out", tmp_path / "reference", "--workers", 1, "--quiet"], None)
    assert reference.returncode == 0, reference.stderr
    with contextlib.ExitStack() as stack:
        if how == "tmpfs":
            disk = stack.enter_context(small_disk(tmp_path / "disk", "2m"))
            filler = disk / "filler"
            # Leave about 160 kB: the store's write-ahead log takes a page or two per batch.
            free = shutil.disk_usage(disk).free
            filler.write_bytes(b"\0" * max(0, free - 160_000))
            out, limit = disk / "out", None
        else:
            out, limit = tmp_path / "out", 160_000
        full = run_limited(["sweep", sweep, "--out", out, "--workers", 1, "--quiet"], limit)
        assert full.returncode == 1, full.stderr
        lines = full.stderr.strip().splitlines()
        assert len(lines) == 1 and "Traceback" not in full.stderr, full.stderr
        assert "cannot write the results store" in lines[0] and "rerun the same command to resume" in lines[0]
        assert stored_batches(out) > 0 and leftovers(out) == []
        if how == "tmpfs":
            filler.unlink()
        resumed = run_limited(["sweep", sweep, "--out", out, "--workers", 1, "--quiet"], None)
        assert resumed.returncode == 0, resumed.stderr
        assert shots_and_failures(out) == shots_and_failures(tmp_path / "reference")
        assert leftovers(out) == []


# ---------------------------------------------------------------------------
# read-only stores: read as they are; a sweep on one says "read-only", not "damaged"


@contextlib.contextmanager
def read_only_copy(source: Path, folder: Path) -> Iterator[Path]:
    """A copy of ``source`` on a read-only tmpfs (skips the test where mounting is not allowed)."""
    with small_disk(folder, "64m") as disk:
        shutil.copytree(source, disk / "results")
        done = subprocess.run(["mount", "-o", "remount,ro", str(disk)], capture_output=True, text=True)
        if done.returncode != 0:
            pytest.skip(f"cannot remount read-only here ({done.stderr.strip()})")
        yield disk / "results"


def test_a_read_only_store_is_analysed_and_exported_and_refused_for_a_sweep(tmp_path: Path) -> None:
    sweep = write(tmp_path / "fill.toml", FILL_SWEEP.replace("shot_budget = 400000", "shot_budget = 20000"))
    made = run_limited(["sweep", sweep, "--out", tmp_path / "made", "--workers", 1, "--quiet"], None)
    assert made.returncode == 0, made.stderr
    before = {p.name: p.read_bytes() for p in (tmp_path / "made").iterdir() if p.is_file()}
    with read_only_copy(tmp_path / "made", tmp_path / "ro") as folder:
        analysed = run_limited(["analyze", folder, "--format", "json"], None)
        assert analysed.returncode == 0, analysed.stderr
        exported = run_limited(["export", folder, "--csv", tmp_path / "copy.csv"], None)
        assert exported.returncode == 0, exported.stderr
        assert (tmp_path / "copy.csv").read_text() == before["results.csv"].decode()
        refused = run_limited(["sweep", sweep, "--out", folder, "--workers", 1, "--quiet"], None)
        assert refused.returncode == 2 and "read-only" in refused.stderr and "damaged" not in refused.stderr
        assert len(refused.stderr.strip().splitlines()) == 1
        for verb in ("figures", "report"):
            asked = run_limited([verb, folder, "--bootstrap", 50], None)
            assert asked.returncode == 2 and "read-only" in asked.stderr and "--to" in asked.stderr
            assert len(asked.stderr.strip().splitlines()) == 1
            elsewhere = run_limited([verb, folder, "--bootstrap", 50, "--to", tmp_path / "review"], None)
            assert elsewhere.returncode == 0, elsewhere.stderr
        in_place = run_limited(["export", folder], None)
        assert in_place.returncode == 2 and "read-only" in in_place.stderr and "--csv" in in_place.stderr
        (tmp_path / "a_file").write_text("")
        for verb in ("figures", "report"):
            blocked = run_limited([verb, folder, "--bootstrap", 50, "--to", tmp_path / "a_file"], None)
            assert blocked.returncode == 2 and "--to" in blocked.stderr and "is a file" in blocked.stderr
        blocked = run_limited(["export", folder, "--csv", tmp_path / "a_file" / "x.csv"], None)
        assert blocked.returncode == 2 and "'" + str(tmp_path / "a_file") + "' is a file, not a folder" in blocked.stderr
        assert (tmp_path / "review" / "report" / "index.html").is_file()
        assert any((tmp_path / "review" / "figures").glob("*.png"))
        assert {p.name: p.read_bytes() for p in folder.iterdir() if p.is_file()} == before


# ---------------------------------------------------------------------------
# Ctrl-C while the worker pool starts


@pytest.mark.parametrize("delay", [0.0, 0.1, 0.3, 0.6, 1.0])
def test_ctrl_c_while_workers_start_prints_no_traceback(tmp_path: Path, delay: float) -> None:
    # Ctrl-C in a terminal sends SIGINT to the whole process group: fork server and workers too. The
    # moment is taken from the run's own state (its first child process: the fork server starting the
    # workers), not from the clock, so a busy machine shifts nothing.
    import psutil

    sweep = write(tmp_path / "long.toml", LONG_SWEEP)
    proc = subprocess.Popen([*CLI, "sweep", str(sweep), "--out", str(tmp_path / "out"), "--workers", "2", "--quiet"],
                            stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True, start_new_session=True)
    try:
        me = psutil.Process(proc.pid)
        started = time.monotonic() + 120
        while proc.poll() is None and not me.children() and time.monotonic() < started:
            time.sleep(0.01)
        time.sleep(delay)
        os.killpg(proc.pid, signal.SIGINT)
        deadline = time.monotonic() + 60
        while proc.poll() is None and time.monotonic() < deadline:
            time.sleep(0.5)
            if proc.poll() is None:  # the SIGINT fell in the start-up window, which ignores it: again
                with contextlib.suppress(ProcessLookupError):
                    os.killpg(proc.pid, signal.SIGINT)
        _, err = proc.communicate(timeout=30)
    finally:
        reap_group(proc.pid, grace=5)
    assert proc.returncode == 130, err
    assert "Traceback" not in err and len(err.strip().splitlines()) == 1, err


def test_ctrl_c_while_the_command_loads_its_libraries_is_one_line(tmp_path: Path) -> None:
    # A Ctrl-C during the imports (about a second on a busy machine), made deterministic: the import of
    # the command line itself raises KeyboardInterrupt, as the signal would.
    script = ("import sys\n"
              "class Interrupting:\n"
              "    def find_spec(self, name, path=None, target=None):\n"
              "        if name == 'codebench.cli':\n"
              "            raise KeyboardInterrupt\n"
              "        return None\n"
              "sys.meta_path.insert(0, Interrupting())\n"
              "from codebench.launch import entry\n"
              "entry()\n")
    done = subprocess.run([sys.executable, "-c", script, "sweep", "x.toml"], cwd=tmp_path, capture_output=True,
                          text=True, timeout=120)
    assert done.returncode == 130
    assert done.stderr.strip() == "codebench: interrupted; nothing was written."
    assert list(tmp_path.iterdir()) == []


# ---------------------------------------------------------------------------
# a plug-in decoder installed on the coordinator only


def test_a_plugin_missing_on_the_dask_workers_is_named_as_such(tmp_path: Path,
                                                                monkeypatch: pytest.MonkeyPatch) -> None:
    from distributed import Client, LocalCluster

    from codebench.engine.dask_executor import DaskExecutor
    from codebench.errors import ClusterError

    with LocalCluster(n_workers=1, threads_per_worker=1, processes=True, dashboard_address=":0") as local:
        with Client(local) as client:
            client.wait_for_workers(1, timeout=60)
            # Only now is the plug-in importable, and only here: the worker started without it.
            (tmp_path / "coordinator_only.py").write_text(
                "from codebench.decoders.matching import Matching\n\n"
                "class Here(Matching):\n    name = 'here'\n")
            monkeypatch.syspath_prepend(str(tmp_path))
            sweep = write(tmp_path / "plug.toml", CRASH_SWEEP.replace("plugin_decoder:CrashesOnThirdBatch",
                                                                      "coordinator_only:Here"))
            with DaskExecutor(client) as executor, pytest.raises(ClusterError) as info:
                run_sweep(sweep, out=tmp_path / "out", executor=executor, progress=False)
    message = str(info.value)
    assert "cannot load the plug-in decoder 'coordinator_only:Here'" in message
    assert "loads on the coordinator" in message and "\n" not in message


# ---------------------------------------------------------------------------
# the command line's own option names in its messages


@pytest.mark.parametrize(("args", "fragment"), [
    (["--distance", "4"], "--distance must be an odd integer >= 3 for rotated_surface; got 4."),
    (["--distance", "3", "--p", "0.5"], "--p must be a number in [0, 0.1] for si1000; got 0.5."),
    (["--distance", "3", "--rounds", "0"], "--rounds must be"),
])
def test_circuit_options_are_named_in_messages(args: list[str], fragment: str) -> None:
    done = subprocess.run([*CLI, "circuit", "--code", "rotated_surface", "--noise", "si1000", "--p", "0.001", *args],
                          capture_output=True, text=True, timeout=60)
    assert done.returncode == 2 and fragment in done.stderr, done.stderr
    assert "study[0]" not in done.stderr and len(done.stderr.strip().splitlines()) == 1


@pytest.mark.parametrize(("args", "fragment"), [
    (["analyze", "{dir}", "--seed", "-1"], "--seed must be an integer in [0, "),
    (["figures", "{dir}", "--seed", "-1"], "--seed must be an integer in [0, "),
    (["sweep", "{sweep}", "--workers", "100000"], "--workers must be an integer in [1, 512]"),
    (["export", "{dir}", "--csv", "/proc/x.csv"], "--csv must be a file path codebench can write"),
    (["export", "{dir}", "--csv", "{tmp}"], "it is a folder"),
])
def test_bad_options_are_one_line_naming_the_option(tmp_path: Path, args: list[str], fragment: str) -> None:
    sweep = write(tmp_path / "small.toml", FILL_SWEEP.replace("shot_budget = 400000", "shot_budget = 2000"))
    made = run_limited(["sweep", sweep, "--out", tmp_path / "made", "--workers", 1, "--quiet"], None)
    assert made.returncode == 0, made.stderr
    before = sorted(p.name for p in tmp_path.iterdir())
    filled = [a.format(dir=tmp_path / "made", sweep=sweep, tmp=tmp_path) for a in args]
    done = run_limited(filled, None)
    assert done.returncode == 2 and fragment in done.stderr, done.stderr
    assert len(done.stderr.strip().splitlines()) == 1 and "Traceback" not in done.stderr
    assert sorted(p.name for p in tmp_path.iterdir()) == before  # no stray file


def test_debug_adds_the_traceback_of_a_plugin_error(tmp_path: Path) -> None:
    sweep = plugin_sweep(tmp_path, "RaisesInDecode")
    plain = cli_with_plugins("sweep", sweep, "--out", tmp_path / "a", "--quiet")
    debug = cli_with_plugins("--debug", "sweep", sweep, "--out", tmp_path / "b", "--quiet")
    assert plain.returncode == debug.returncode == 2
    assert "Traceback" not in plain.stderr and "Traceback" in debug.stderr
    assert "lookup table exhausted" in debug.stderr.splitlines()[-1]


@pytest.mark.parametrize(("args", "fragment"), [
    (["--distances", "3,10001"], "--distances[1] must be a distance of at most 201; got 10001."),
    (["--distances", "3,201"], "at most 2,000,000 detectors (this one: about 8,160,800)"),
])
def test_forecast_distances_are_bounded_before_anything_is_built(args: list[str], fragment: str) -> None:
    done = run_limited(["forecast", TESTS.parent / "configs" / "devices" / "larkspur_current.toml", "--work", "1e6",
                        *args], None)
    assert done.returncode == 2 and fragment in done.stderr and "Traceback" not in done.stderr, done.stderr


def test_forecast_of_a_folder_says_it_is_a_folder(tmp_path: Path) -> None:
    done = run_limited(["forecast", tmp_path, "--work", "1e6"], None)
    assert done.returncode == 2 and "is a folder" in done.stderr and "does not exist" not in done.stderr


# ---------------------------------------------------------------------------
# the API from a plain script without the main guard (worker processes import the script)


def test_a_script_without_the_main_guard_is_told_what_to_add(tmp_path: Path) -> None:
    script = write(tmp_path / "plain.py", (
        "import codebench\n"
        "cfg = {'name': 'plain', 'seed': 1, 'stopping': {'shot_budget': 2000}, 'study': [{'code': 'repetition',\n"
        "       'distances': [3], 'rounds': 'd', 'noise': 'si1000', 'p': [0.01], 'decoders': ['mwpm']}]}\n"
        "codebench.run_sweep(cfg, out='out', workers=2, progress=False)\n"))
    done = subprocess.run([sys.executable, str(script)], cwd=tmp_path, capture_output=True, text=True, timeout=300)
    assert done.returncode != 0
    last = done.stderr.strip().splitlines()[-1]
    assert "WorkerLost" in last and "plain.py" in last and 'if __name__ == "__main__":' in last
    assert "another codebench run" not in done.stderr
    assert not (tmp_path / "out").exists()
    guarded = write(tmp_path / "guarded.py", script.read_text().replace(
        "codebench.run_sweep(", "if __name__ == '__main__':\n    codebench.run_sweep("))
    assert subprocess.run([sys.executable, str(guarded)], cwd=tmp_path, capture_output=True, text=True,
                          timeout=300).returncode == 0
    assert (tmp_path / "out" / "results.csv").is_file()
