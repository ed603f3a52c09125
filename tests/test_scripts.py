"""The benchmark scripts still run (tiny settings) and print the lines the README quotes.

Nothing here looks at a time or a ratio's value: benchmarks print measurements,
tests never assert on them. What must hold is that each script runs end to
end and that the counts it compares agree.
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

SCRIPTS = Path(__file__).resolve().parents[1] / "scripts"


def run_script(name: str, *args: str) -> str:
    done = subprocess.run([sys.executable, str(SCRIPTS / name), *args], capture_output=True, text=True, timeout=300)
    assert done.returncode == 0, done.stderr
    return done.stdout


def test_bench_cluster_runs_both_executors_with_identical_counts() -> None:
    out = run_script("bench_cluster.py", "--shots", "10000", "--repeats", "1")
    assert "counts identical in all 2 runs" in out
    assert "throughput ratio dask / local:" in out
    assert "CPU-time ratio local / dask:" in out


def test_bench_scaling_prints_the_table_and_the_fitted_exponent() -> None:
    out = run_script("bench_scaling.py", "--distances", "3,5,7", "--seconds", "0.3", "--passes", "1")
    assert "| d | rounds | qubits | detectors |" in out
    assert "decode cost exponent (per shot ~ detectors^k), all d: k =" in out


@pytest.mark.slow
def test_measure_memory_reports_coordinator_and_workers() -> None:
    out = run_script("measure_memory.py", "--shots", "20000")
    assert "peak resident memory: coordinator" in out
    assert out.count("peak resident memory: worker") == 2


@pytest.mark.parametrize("args", [["--shots", "5"], ["--repeats", "0"]])
def test_bench_cluster_refuses_bad_arguments(args: list[str]) -> None:
    done = subprocess.run([sys.executable, str(SCRIPTS / "bench_cluster.py"), *args], capture_output=True, text=True,
                          timeout=60)
    assert done.returncode == 2 and "--shots must be at least" in done.stderr


def test_bench_rare_events_prints_a_row_per_distance() -> None:
    out = run_script("bench_rare_events.py", "--distances", "3,5", "--work", "3e7", "--devices", "improved",
                     "--direct-seconds", "0.3")
    assert "ratio_wall" in out and "ratio_cpu" in out
    assert len([line for line in out.splitlines() if line.startswith("improved ")]) == 2


def test_check_intervals_quick_prints_coverage() -> None:
    out = run_script("check_intervals.py", "--quick", "--seeds", "2", "--work", "1e7", "--reference-failures", "200")
    assert "coverage" in out and "stratified" in out


def test_bench_overhead_prints_every_case() -> None:
    out = run_script("bench_overhead.py", "--shots", "3000", "--small-shots", "300", "--cases", "small,d3",
                     "--repeats", "1")
    lines = out.splitlines()
    assert lines[0].startswith("2-worker pool start-up and close")
    header = next(i for i, line in enumerate(lines) if "bare/eng1 wall" in line)
    assert [line.split()[0] for line in lines[header + 1:]] == ["small", "d3"]
    assert "eng1/eng2 cpu" in lines[header]


def test_bench_throughput_prints_wall_and_cpu_ratios() -> None:
    out = run_script("bench_throughput.py", "--shots", "20000", "--repeats", "1")
    for line in ("cpu_ratio ", "cpu_ratio_2_vs_1 ", "ratio_2_vs_1 ", "ratio "):
        assert any(row.startswith(line) for row in out.splitlines()), line


def test_link_tolerance_prints_a_row_per_distance_and_ratio() -> None:
    out = run_script("link_tolerance.py", "--shots", "2000", "--distances", "3,5", "--ratios", "1,10")
    rows = [line for line in out.splitlines() if line.startswith("| 3 |") or line.startswith("| 5 |")]
    assert len(rows) == 4
    assert "ratio 10: Lambda_3/5 =" in out
