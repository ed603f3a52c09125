"""Measured coverage of the forecast's 95% intervals against long direct runs.

For each case, a long direct run (stim's circuit sampler and the point's
decoder, to ``--reference-failures`` failures) gives the reference rate; then
each method runs under ``--seeds`` seeds with a small budget (the reference
should be several times more precise than the intervals it checks, or the
measured coverage reads low), and the table
reports how many intervals contain the reference, and their median width
(high / low). Methods: ``stratified`` (the point alone, counted work
``--work`` each) and ``extrapolated`` (``codebench.forecast.forecast`` with
``method="extrapolated"`` on the device cases, d = 3 and 5).

Usage::

    python scripts/check_intervals.py [--seeds 20] [--work 3e7] [--reference-failures 10000] [--quick]

``--quick`` runs three cases with 6 seeds (about a minute). Prints one line per
(case, method)::

    case  method  trials  covered  coverage  median_width  reference
"""

from __future__ import annotations

import argparse
from pathlib import Path

from codebench.config import parse_sweep
from codebench.engine.local import InProcessExecutor
from codebench.forecast import forecast
from codebench.forecast.coverage import (
    Trial,
    direct_reference,
    stratified_trials,
    summarise,
)
from codebench.records import Point
from codebench.stats import per_round

ROOT = Path(__file__).resolve().parents[1]
DEVICES = ROOT / "configs" / "devices"


def _point(noise: dict[str, object], distance: int) -> Point:
    study = {"code": "rotated_surface", "distances": [distance], "rounds": "d", "basis": ["Z"], "decoders": ["mwpm"],
             **noise}
    return parse_sweep({"name": "coverage", "seed": 1, "study": [study]}, source="check_intervals").points[0]


def _device(name: str) -> dict[str, object]:
    return {"noise": "device", "device": str(DEVICES / f"{name}.toml"), "scale": [1.0]}


SI1000 = {"noise": "si1000", "p": [0.002]}
CASES = [
    ("improved d=3", _device("larkspur_improved"), 3, "larkspur_improved"),
    ("improved d=5", _device("larkspur_improved"), 5, "larkspur_improved"),
    ("si1000 p=2e-3 d=3", SI1000, 3, None),
    ("si1000 p=2e-3 d=5", SI1000, 5, None),
    ("current d=5 (many faults per shot)", _device("larkspur_current"), 5, None),
    ("goal d=3", _device("larkspur_goal"), 3, None),
    ("improved d=7", _device("larkspur_improved"), 7, None),
]


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seeds", type=int, help="seeds per case (default: 20, or 6 with --quick)")
    parser.add_argument("--work", type=float, default=3e7, help="counted work per stratified trial")
    parser.add_argument("--reference-failures", type=int, default=10000,
                        help="failures of each direct reference run (at most --reference-shots shots)")
    parser.add_argument("--reference-shots", type=int, default=50_000_000)
    parser.add_argument("--quick", action="store_true")
    args = parser.parse_args()
    cases = CASES[:3] if args.quick else CASES
    seeds = list(range(1, (args.seeds or (6 if args.quick else 20)) + 1))
    print(f"{'case':38s} {'method':13s} {'trials':>6s} {'covered':>7s} {'coverage':>8s} {'median_width':>12s} "
          f"reference (per experiment)")
    for label, noise, distance, device in cases:
        point = _point(noise, distance)
        ref = direct_reference(point, args.reference_failures, args.reference_shots, seed=12345)
        lo, hi = ref.interval
        ref_text = f"{ref.rate:.4g} [{lo:.3g}, {hi:.3g}] ({ref.failures} in {ref.shots:,})"
        rows = {"stratified": stratified_trials(point, seeds, args.work, InProcessExecutor)}
        if device is not None and distance in (3, 5):
            trials = []
            for seed in seeds[: max(3, len(seeds) // 2)]:
                result = forecast(DEVICES / f"{device}.toml", distances=(3, 5), method={distance: "extrapolated"},
                                  work=args.work * 4, workers=2, seed=seed)
                row = result.at(distance)
                # Back to per experiment (rounds = d), the reference's quantity.
                to_total = (lambda e: None if e is None else (1 - (1 - 2 * e) ** distance) / 2)
                trials.append(Trial(seed, to_total(row.per_round_rate), to_total(row.low), to_total(row.high)))
            rows["extrapolated"] = trials
        for method, trials in rows.items():
            s = summarise(trials, ref.rate)
            print(f"{label:38s} {method:13s} {s['trials']:6d} {s['covered']:7d} {s['coverage']:8.0%} "
                  f"{s['median_width_factor']:12.2f} {ref_text}", flush=True)
    print(f"(per-round equivalents: eps = (1 - (1 - 2 P)^(1/d)) / 2, e.g. {per_round(0.01, 5):.3g} for P = 0.01, d = 5)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
