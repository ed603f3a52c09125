"""Cost of ``codebench figures`` and ``codebench report`` on a 200-point sweep, in CPU and wall time.

The sweep (repetition code under circuit-level depolarizing noise at four distances, the rotated
surface code under SI1000 at three distances and both bases, each with two decoders, and a
code-capacity family: 200 points, small shot budgets) is sampled once into ``--folder`` (kept, so
reruns measure only the drawing). Then, after a discarded warm-up of each, ``--repeats`` interleaved
measurements of: ``figures`` from scratch (no figure files, so every figure is drawn), ``report``
reusing those figures, and ``report`` from scratch. Printed: the medians, and their ratio to the
baseline measured when this benchmark was written (issue text: 37 s and 39 s of CPU on the 2-core
reference machine); the goal is a ratio of at least 3.

Usage::

    python scripts/bench_report.py [--folder results/bench_report] [--repeats 3]
"""

from __future__ import annotations

import argparse
import shutil
import statistics
from pathlib import Path
from typing import Any

from cpu_meter import measure

from codebench.api import run_sweep
from codebench.cli import main as cli

#: CPU seconds of `figures` and of `report` on such a sweep before the issue's work (issue text).
BASELINE_CPU = {"figures": 37.0, "report": 39.0}

SWEEP: dict[str, Any] = {
    "name": "bench_report", "seed": 11, "stopping": {"failure_target": 50, "shot_budget": 4000},
    "study": [
        {"label": "rep", "code": "repetition", "distances": [3, 5, 7, 9], "rounds": "d",
         "noise": "circuit_depolarizing", "p": {"geomspace": [0.005, 0.08, 10]},
         "decoders": ["mwpm", "mwpm_correlated"]},
        {"label": "surf", "code": "rotated_surface", "distances": [3, 5, 7], "rounds": "d", "basis": ["Z", "X"],
         "noise": "si1000", "p": {"geomspace": [0.001, 0.01, 8]}, "decoders": ["mwpm", "mwpm_correlated"]},
        {"label": "cap", "code": "rotated_surface", "distances": [3, 5, 7], "rounds": 1, "noise": "code_capacity",
         "p": {"geomspace": [0.02, 0.2, 8]}, "decoders": ["mwpm"]},
    ],
}


def clear(folder: Path, *names: str) -> None:
    for name in names:
        path = folder / name
        if path.is_dir():
            shutil.rmtree(path)
        else:
            path.unlink(missing_ok=True)


def figures_from_scratch(folder: Path) -> None:
    clear(folder, "figures", ".figures.json")
    cli(["figures", str(folder)])


def report_reusing(folder: Path) -> None:
    clear(folder, "report")
    cli(["report", str(folder)])


def report_from_scratch(folder: Path) -> None:
    clear(folder, "figures", ".figures.json", "report")
    cli(["report", str(folder)])


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--folder", default="results/bench_report", help="where the sweep is kept")
    parser.add_argument("--repeats", type=int, default=3)
    args = parser.parse_args()
    folder = Path(args.folder)
    frame = run_sweep(SWEEP, out=folder, progress=False)
    print(f"{len(frame)} points in {folder}")
    cases = {"figures (all drawn)": figures_from_scratch, "report (figures reused)": report_reusing,
             "report (from scratch)": report_from_scratch}
    for work in cases.values():  # warm-up, discarded
        work(folder)
    runs: dict[str, list[tuple[float, float]]] = {name: [] for name in cases}
    for _ in range(args.repeats):
        for name, work in cases.items():
            runs[name].append(measure(lambda: work(folder)))
    print(f"{'measurement':<26} {'wall s':>8} {'CPU s':>8} {'baseline CPU / CPU':>19}")
    for name, values in runs.items():
        wall = statistics.median(w for w, _ in values)
        cpu = statistics.median(c for _, c in values)
        base = BASELINE_CPU["figures" if name.startswith("figures") else "report"]
        print(f"{name:<26} {wall:8.2f} {cpu:8.2f} {base / cpu:19.2f}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
