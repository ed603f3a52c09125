"""The device side of the command line: ``codebench forecast`` and ``codebench placements``."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path
from typing import Any

from codebench.cli_args import (
    MAX_WORKERS,
    SEED_LIMIT,
    bounded_int,
    distances,
    improvement,
    improvements,
    placement_choice,
    positive_number,
    rates,
)
from codebench.errors import EXIT_OK, ConfigError, not_allowed


def cmd_forecast(args: argparse.Namespace) -> int:
    import json

    from codebench.forecast import DEFAULT_TARGETS, forecast
    from codebench.forecast.render import forecast_table

    targets = [t for group in args.target for t in group] if args.target else list(DEFAULT_TARGETS)
    improve = improvements(args.improve)
    result = forecast(args.device, code=args.code, distances=args.distances, basis=args.basis,
                      decoder=args.decoder, targets=targets, budget_seconds=args.budget_seconds, work=args.work,
                      workers=args.workers, seed=args.seed, out=args.out, improve=improve, method=args.method,
                      progress=not args.quiet, placement=placement_choice(args.placement))
    if args.format == "json":
        print(json.dumps(result.to_json(), indent=2, allow_nan=False))
    else:
        print(forecast_table(result))
    if args.out:
        out = Path(args.out)
        print(f"wrote {out / 'forecast.json'}, {out / 'forecast.csv'}, {out / 'forecast.png'}, "
              f"{out / 'forecast.svg'} (samples in {out / 'store'})", file=sys.stderr)
    return EXIT_OK


def cmd_placements(args: argparse.Namespace) -> int:
    from codebench.figures.chip import write_chip_figure
    from codebench.forecast.placements import (
        COLOUR_KEYS,
        RANKED_CHOICES,
        placements_report,
        placements_text,
    )
    from codebench.noise.placement import interaction_graph

    improve = improvements(args.improve)
    out = Path(args.out)
    if out.exists() and not out.is_dir():
        raise ConfigError(not_allowed("--out", str(out), "a folder (or a path that does not exist yet)"))
    report = placements_report(args.device, args.code, args.distance, top=args.top, sample=args.sample,
                               shots=args.shots, seed=args.seed, improve=improve,
                               placement=placement_choice(args.placement), progress=not args.quiet)
    print(placements_text(report))
    from codebench.codes import CODE_FAMILIES

    family = CODE_FAMILIES[args.code]
    qubits, pairs = interaction_graph(family, args.distance, "cz" if report.device.native_2q == "cz" else "cx")
    used_pairs = [(report.chosen[qubits.index(a)], report.chosen[qubits.index(b)]) for a, b in pairs]
    out.mkdir(parents=True, exist_ok=True)
    png, svg = write_chip_figure(
        report.device, report.chosen, used_pairs, args.colour_by, COLOUR_KEYS[args.colour_by],
        f"{args.code} d={args.distance} on {report.device.name}",
        (f"{report.choice} of {report.found} placements by the logical-error proxy"
         if report.choice in RANKED_CHOICES else f"placement given by {report.choice} ({report.found} exist)"),
        out / f"placements_{args.code}_d{args.distance}")
    print(f"wrote {png}, {svg}", file=sys.stderr)
    return EXIT_OK


def add_device_commands(sub: Any) -> None:
    """The ``forecast`` and ``placements`` verbs."""
    fc = sub.add_parser("forecast", help="forecast a device's logical qubit from its calibration file")
    fc.add_argument("device", help="device calibration file (TOML or JSON)")
    fc.add_argument("--code", default="rotated_surface", help="code family (default: rotated_surface)")
    fc.add_argument("--distances", type=distances, default=[3, 5, 7], help="comma-separated (default: 3,5,7)")
    fc.add_argument("--basis", default="Z",
                    help="memory basis: Z, X, Z,X or both (both: also the logical qubit's error, either basis "
                         "failing; default: Z)")
    fc.add_argument("--decoder", help="decoder (default: the code family's, flag_matching for heavy_hex, "
                                      "mwpm otherwise)")
    fc.add_argument("--target", type=rates("--target"), action="append",
                    help="target per-round rate; repeatable or comma-separated (default: 1e-6,1e-9,1e-12)")
    budget = fc.add_mutually_exclusive_group()
    budget.add_argument("--budget-seconds", default=60.0,
                    type=positive_number("--budget-seconds", "a positive number of seconds up to 1e+06", 1e6),
                    help="budget, turned into counted work at a fixed rate; sampling stops at 3x this "
                         "whatever the plan (default: 60)")
    budget.add_argument("--work", type=positive_number("--work", "a positive amount of counted work "
                                                    "(shots x detectors, e.g. 5e9) up to 1e+14", 1e14),
                    help="budget as counted work (shots x detectors) instead: no time limit, the same plan "
                         "on any machine")
    fc.add_argument("--improve", type=improvement, action="append", metavar="PARAM=FACTOR",
                    help="what-if: scale t1_us/t2_us (factor on 1/T), gate_1q_error, gate_2q_error, readout_error, "
                         "reset_error, link_error (couplers marked link), zz_khz, or noise (all but link_error and "
                         "zz_khz together); repeatable")
    fc.add_argument("--placement", help="on a device with a coupling graph: best (default), worst or median "
                                        "placement by the proxy, or device qubit ids, comma-separated")
    fc.add_argument("--method", choices=["auto", "direct", "extrapolated", "stratified"], default="auto",
                    help="how each distance is estimated (default: auto: direct where it reaches "
                         "100 failures in the budget, else stratified by fault count)")
    fc.add_argument("--format", choices=["table", "json"], default="table")
    fc.add_argument("--out", help="folder for forecast.json/.csv/.png/.svg and the sample store")
    fc.add_argument("--workers", type=bounded_int("--workers", 1, MAX_WORKERS), help="local worker processes (default: all cores)")
    fc.add_argument("--seed", type=bounded_int("--seed", 0, SEED_LIMIT - 1), default=20260101, help="seed of the sampling (default: 20260101)")
    fc.add_argument("--quiet", action="store_true", help="no progress lines")
    fc.set_defaults(func=cmd_forecast)

    pl = sub.add_parser("placements", help="rank the placements of a code on a device's qubits; draw the chip")
    pl.add_argument("device", help="device calibration file (TOML or JSON) with a [coupling] graph")
    pl.add_argument("--code", default="rotated_surface", help="code family (default: rotated_surface)")
    pl.add_argument("--distance", type=bounded_int("--distance", 2, 201), required=True, help="code distance")
    pl.add_argument("--sample", action="store_true",
                    help="also sample each shown placement (rounds = d) for a per-round rate")
    pl.add_argument("--shots", type=bounded_int("--shots", 100, 10**8), default=20_000,
                    help="shots per sampled placement (default: 20000)")
    pl.add_argument("--top", type=bounded_int("--top", 1, 10_000), default=10,
                    help="best placements shown (the median and the worst are always shown; default: 10)")
    pl.add_argument("--colour-by", choices=["t1_us", "t2_us", "readout_error", "gate_1q_error", "reset_error"],
                    default="t1_us", help="per-qubit number that colours the chip (default: t1_us)")
    pl.add_argument("--placement", help="which placement the figure draws: best (default), worst, median, or "
                                        "device qubit ids, comma-separated")
    pl.add_argument("--improve", type=improvement, action="append", metavar="PARAM=FACTOR",
                    help="what-if edits of the device, as for forecast; repeatable")
    pl.add_argument("--out", default=".", help="folder for placements_<code>_d<D>.png/.svg (default: .)")
    pl.add_argument("--seed", type=bounded_int("--seed", 0, SEED_LIMIT - 1), default=1,
                    help="seed of the sampling (default: 1)")
    pl.add_argument("--quiet", action="store_true", help="no progress lines")
    pl.set_defaults(func=cmd_placements)
