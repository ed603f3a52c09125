"""The ``codebench`` command line: one function per verb.

Exit status: 0 success, 2 bad input (one line on standard error, no
traceback), 1 anything else, 130 interrupted (finished batches are kept).
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path
from typing import TYPE_CHECKING, Callable, NoReturn, Sequence

from codebench.build import noisy_circuit
from codebench.errors import (
    CodebenchError,
    ConfigError,
    Interrupted,
    OutputError,
    RunFault,
    not_allowed,
)
from codebench.stats import INTERVALS

if TYPE_CHECKING:
    import numpy as np
    import pandas as pd

    from codebench.analysis import AnalysisResult
    from codebench.lab.experiment import Experiment

EXIT_OK, EXIT_FAILURE, EXIT_BAD_INPUT, EXIT_INTERRUPTED = 0, 1, 2, 130


class _Parser(argparse.ArgumentParser):
    """An argument parser whose errors are one line and exit status 2."""

    def error(self, message: str) -> NoReturn:
        self.exit(EXIT_BAD_INPUT, f"codebench: {message} (see `{self.prog} --help`)\n")


#: Most local worker processes (as codebench.engine.local.MAX_LOCAL_WORKERS; not imported, to start fast).
MAX_WORKERS = 512
#: Seeds are unsigned 63-bit integers everywhere (sweep files, forecasts, bootstraps).
SEED_LIMIT = 2**63


def _bounded_int(name: str, low: int, high: int | None = None) -> Callable[[str], int]:
    """An integer option in [low, high], refused in the usual one-line template naming the option."""
    allowed = f"an integer in [{low}, {high:,}]" if high is not None else f"an integer >= {low}"

    def parse(text: str) -> int:
        try:
            value = int(text)
        except ValueError:
            raise argparse.ArgumentTypeError(not_allowed(name, text, allowed)) from None
        if value < low or (high is not None and value > high):
            raise argparse.ArgumentTypeError(not_allowed(name, text, allowed))
        return value

    return parse


def _positive_int(name: str) -> Callable[[str], int]:
    return _bounded_int(name, 1)


def _address(text: str) -> str:
    from codebench.engine.cluster import scheduler_address

    try:
        return scheduler_address(text, "--scheduler")
    except CodebenchError as exc:
        raise argparse.ArgumentTypeError(str(exc)) from None


def cmd_sweep(args: argparse.Namespace) -> int:
    from codebench.api import run_sweep
    from codebench.config import load_sweep
    from codebench.tables import summary_table

    sweep = load_sweep(args.config)
    out = Path(args.out) if args.out else sweep.output_dir_default
    frame = run_sweep(sweep, out=out, workers=args.workers, progress=not args.quiet, scheduler=args.scheduler)
    print(summary_table(frame))
    print(f"\nwrote {out / 'results.csv'} and {out / 'results.sqlite'}")
    return EXIT_OK


def cmd_export(args: argparse.Namespace) -> int:
    from codebench.api import export_csv

    try:
        path = export_csv(args.dir, args.csv, args.interval)
    except OutputError as exc:
        if args.csv is None:
            raise
        reason = str(exc).rstrip(".")
        raise ConfigError(not_allowed("--csv", args.csv, f"a file path codebench can write ({reason})")) from None
    print(f"wrote {path}")
    return EXIT_OK


def _targets(text: str) -> list[float]:
    try:
        values = [float(part) for part in text.split(",") if part.strip()]
    except ValueError:
        values = []
    if not values or not all(0 < v < 0.5 for v in values):
        raise argparse.ArgumentTypeError(not_allowed("--targets", text, "comma-separated rates in (0, 0.5)"))
    return values


def _analysis(args: argparse.Namespace) -> tuple[pd.DataFrame, AnalysisResult]:
    from codebench.analysis import analyze
    from codebench.api import load_results

    frame = load_results(args.dir, args.interval)
    return frame, analyze(frame, targets=args.targets, bootstrap=args.bootstrap, seed=args.seed)


def cmd_analyze(args: argparse.Namespace) -> int:
    import json

    from codebench.analysis.render import analysis_table

    _, result = _analysis(args)
    if args.format == "json":
        print(json.dumps(result.to_json(), indent=2, allow_nan=False))
    else:
        print(analysis_table(result))
    return EXIT_OK


def cmd_figures(args: argparse.Namespace) -> int:
    from codebench.figures import write_figures

    frame, result = _analysis(args)
    paths = write_figures(Path(args.dir), frame, result)
    print(f"wrote {len(paths)} files into {Path(args.dir) / 'figures'}")
    return EXIT_OK


def cmd_report(args: argparse.Namespace) -> int:
    from codebench.report import write_report

    frame, result = _analysis(args)
    path = write_report(Path(args.dir), frame, result)
    print(f"wrote {path} and {path.parent / 'summary.md'}")
    return EXIT_OK


def cmd_circuit(args: argparse.Namespace) -> int:
    from codebench.pointspec import point_from_args, point_list

    if args.list and args.config is not None:
        print(point_list(args.config))
        return EXIT_OK
    point = point_from_args(args)
    sys.stdout.write(str(noisy_circuit(point)) + "\n")
    return EXIT_OK


def _point_options(verb: argparse.ArgumentParser) -> None:
    """The options that name one point: a sweep file and --point, or the point's own options."""
    verb.add_argument("config", nargs="?", help="sweep file; pick the point with --point")
    verb.add_argument("--point", type=int, help="index of the point in the sweep's grid, from 0")
    verb.add_argument("--code", help="code family (without a sweep file)")
    verb.add_argument("--distance", type=int)
    verb.add_argument("--rounds", help="rounds: an integer or a multiple of d such as 'd'")
    verb.add_argument("--basis", default="Z")
    verb.add_argument("--noise")
    verb.add_argument("--p", type=float, help="the noise model's rate (for device noise: its scale, default 1)")
    verb.add_argument("--device", help="device calibration file: device noise in its native gates, qubits named "
                                       "by its [[layouts]] entry for the code and distance")


def cmd_qasm(args: argparse.Namespace) -> int:
    from codebench.files import write_text
    from codebench.pointspec import point_from_args
    from codebench.qasm import export_point

    point = point_from_args(args)
    program = Path(args.out)
    if program.suffix == ".json":
        raise ConfigError(not_allowed("--out", args.out, "the program's path (the description is written beside "
                                      "it with the suffix .json)"))
    exported = export_point(point)
    described = program.with_suffix(".json")
    write_text(program, exported.program)
    write_text(described, exported.description_text())
    print(f"wrote {program} ({exported.description.measurements} measurement bits, "
          f"{len(exported.description.detectors)} detectors) and {described}")
    return EXIT_OK


def _weights(text: str) -> list[str]:
    chosen = [part.strip() for part in text.split(",") if part.strip()]
    if not chosen or not set(chosen) <= {"model", "data"}:
        raise argparse.ArgumentTypeError(not_allowed("--weights", text, "model, data or model,data"))
    return list(dict.fromkeys(chosen))


def _lab_experiment(args: argparse.Namespace) -> tuple[Experiment, np.ndarray, np.ndarray]:
    """(experiment, detection events, observable flips) of the records named on the command line."""
    from codebench.lab.experiment import experiment_of, with_decoder
    from codebench.lab.shots import read_records
    from codebench.pointspec import point_from_args
    from codebench.qasm import load_description

    description = load_description(args.description) if args.description else None
    named = args.config is not None or args.code is not None or args.device is not None
    point = point_from_args(args) if named else None
    experiment = experiment_of(point, description, f"description '{args.description}'")
    experiment.point = with_decoder(experiment.point, args.decoder)
    records = read_records(args.records, experiment.bits, args.format)
    dets, obs = experiment.events(records)
    print(f"codebench lab: {len(records):,} shots of {experiment.bits} bits read from {args.records} "
          f"({experiment.point.label()}); decoding ...", file=sys.stderr)
    return experiment, dets, obs


def cmd_lab_decode(args: argparse.Namespace) -> int:
    from codebench.lab.decoding import decode_with
    from codebench.lab.record import record_measured
    from codebench.tables import summary_table

    experiment, dets, obs = _lab_experiment(args)
    decoded = {weights: decode_with(weights, experiment, dets, obs) for weights in args.weights}
    frame = record_measured(Path(args.out), experiment, decoded, args.study, Path(args.records))
    print(summary_table(frame[frame["source"] == "measured"]))
    print(f"\nwrote {Path(args.out) / 'results.csv'} and {Path(args.out) / 'results.sqlite'}")
    return EXIT_OK


def cmd_lab_inspect(args: argparse.Namespace) -> int:
    from codebench.figures.lab import write_lab_figures
    from codebench.lab.departures import analyse
    from codebench.lab.tables import summary, write_tables

    experiment, dets, obs = _lab_experiment(args)
    result = analyse(experiment, dets, obs)
    out = Path(args.out)
    write_tables(out, result)
    figures = write_lab_figures(out, result)
    print(summary(result))
    print(f"\nwrote the tables, reweighted.dem and {len(figures)} figures (PNG and SVG) into {out}")
    return EXIT_OK


def _lab_options(verb: argparse.ArgumentParser) -> None:
    verb.add_argument("records", help="measured records: one row per shot, one bit per measurement (.01, .b8, .r8 "
                                      "or .npy)")
    _point_options(verb)
    verb.add_argument("--description", help="the experiment's description file (JSON, from `codebench qasm`)")
    verb.add_argument("--format", choices=["01", "b8", "r8", "npy"], help="format of the records (default: suffix)")
    verb.add_argument("--decoder", help="decoder (default: the point's)")
    verb.add_argument("--out", required=True, help="folder to write into")


def _distances(text: str) -> list[int]:
    try:
        values = [int(part) for part in text.split(",") if part.strip()]
    except ValueError:
        values = []
    if not values:
        raise argparse.ArgumentTypeError(not_allowed("--distances", text, "a comma-separated list of integers "
                                                     "such as 3,5,7"))
    return values


def _rates(text: str) -> list[float]:
    try:
        values = [float(part) for part in text.split(",") if part.strip()]
    except ValueError:
        values = []
    if not values or not all(0 < v < 0.5 for v in values):
        raise argparse.ArgumentTypeError(not_allowed("--target", text, "a per-round rate in (0, 0.5) "
                                                     "(or several, comma-separated)"))
    return values


def _improvement(text: str) -> tuple[str, float]:
    from codebench.forecast import parse_improve

    try:
        return parse_improve(text)
    except CodebenchError as exc:
        raise argparse.ArgumentTypeError(str(exc)) from None


def _positive_number(flag: str, what: str, largest: float) -> Callable[[str], float]:
    """An argparse type: a positive number up to ``largest``, else the one-line message for ``flag``."""
    def parse(text: str) -> float:
        try:
            value = float(text)
        except ValueError:
            value = float("nan")
        if not 0 < value <= largest:
            raise argparse.ArgumentTypeError(not_allowed(flag, text, what))
        return value

    return parse


def cmd_forecast(args: argparse.Namespace) -> int:
    import json

    from codebench.forecast import DEFAULT_TARGETS, forecast
    from codebench.forecast.render import forecast_table

    targets = [t for group in args.target for t in group] if args.target else list(DEFAULT_TARGETS)
    improve: dict[str, float] = {}
    for name, factor in args.improve or []:
        improve[name] = improve.get(name, 1.0) * factor
    result = forecast(args.device, code=args.code, distances=args.distances, basis=args.basis,
                      decoder=args.decoder, targets=targets, budget_seconds=args.budget_seconds, work=args.work,
                      workers=args.workers, seed=args.seed, out=args.out, improve=improve, method=args.method,
                      progress=not args.quiet)
    if args.format == "json":
        print(json.dumps(result.to_json(), indent=2, allow_nan=False))
    else:
        print(forecast_table(result))
    if args.out:
        out = Path(args.out)
        print(f"wrote {out / 'forecast.json'}, {out / 'forecast.csv'}, {out / 'forecast.png'}, "
              f"{out / 'forecast.svg'} (samples in {out / 'store'})", file=sys.stderr)
    return EXIT_OK


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(prog="codebench", description="Logical-qubit memory experiments: sample, decode, fit.")
    parser.add_argument("--debug", action="store_true",
                        help="after an error, also print its traceback (for reports of a bug or a plug-in's fault)")
    sub = parser.add_subparsers(dest="verb", required=True, parser_class=_Parser)

    sweep = sub.add_parser("sweep", help="run or resume a sweep file")
    sweep.add_argument("config", help="sweep file (TOML)")
    sweep.add_argument("--out", help="output folder (default: results/<name>)")
    sweep.add_argument("--workers", type=_bounded_int("--workers", 1, MAX_WORKERS),
                       help="local worker processes (default: all cores; given, it overrides a [cluster] section)")
    sweep.add_argument("--scheduler", metavar="ADDRESS", type=_address,
                       help="run on the Dask cluster of this scheduler, e.g. tcp://head-node:8786 "
                            "(overrides a [cluster] section)")
    sweep.add_argument("--quiet", action="store_true", help="no progress line")
    sweep.set_defaults(func=cmd_sweep)

    export = sub.add_parser("export", help="rewrite results.csv from the store")
    export.add_argument("dir", help="sweep output folder")
    export.add_argument("--csv", help="where to write (default: DIR/results.csv)")
    export.add_argument("--interval", choices=sorted(INTERVALS), default="wilson",
                        help="95%% binomial interval (default: wilson)")
    export.set_defaults(func=cmd_export)

    for verb, func, text in (
        ("analyze", cmd_analyze, "fit thresholds, pseudo-thresholds, Lambda and projections"),
        ("figures", cmd_figures, "write figures (PNG and SVG) into DIR/figures/"),
        ("report", cmd_report, "write a design-review bundle into DIR/report/"),
    ):
        verb_parser = sub.add_parser(verb, help=text)
        verb_parser.add_argument("dir", help="sweep output folder")
        if verb == "analyze":
            verb_parser.add_argument("--format", choices=["table", "json"], default="table")
        verb_parser.add_argument("--targets", type=_targets, default=[1e-6, 1e-9, 1e-12],
                                 help="target per-round rates for projections (default: 1e-6,1e-9,1e-12)")
        verb_parser.add_argument("--interval", choices=sorted(INTERVALS), default="wilson",
                                 help="95%% binomial interval of the tables (default: wilson)")
        verb_parser.add_argument("--bootstrap", type=_positive_int("--bootstrap"), default=1000,
                                 help="bootstrap resamples for crossing intervals (default: 1000)")
        verb_parser.add_argument("--seed", type=_bounded_int("--seed", 0, SEED_LIMIT - 1), default=0, help="seed of the bootstrap (default: 0)")
        verb_parser.set_defaults(func=func)

    circuit = sub.add_parser("circuit", help="print one point's noisy stim circuit")
    _point_options(circuit)
    circuit.add_argument("--list", action="store_true", help="list the sweep's points with their indices")
    circuit.set_defaults(func=cmd_circuit)

    qasm = sub.add_parser("qasm", help="export one point's experiment as OpenQASM 3 plus its description (JSON)")
    _point_options(qasm)
    qasm.add_argument("--out", required=True,
                      help="program file to write (e.g. experiment.qasm); the description goes beside it (.json)")
    qasm.set_defaults(func=cmd_qasm)

    lab = sub.add_parser("lab", help="measured records: decode them, see where the device departs from its model")
    lab_verbs = lab.add_subparsers(dest="lab_verb", metavar="{decode,inspect}", required=True, parser_class=_Parser)
    decode = lab_verbs.add_parser("decode", help="decode measured records into a point of a results folder "
                                                 "(source = measured)")
    _lab_options(decode)
    decode.add_argument("--weights", type=_weights, default=["model", "data"],
                        help="model (the model's weights), data (learned from the other half of the shots), or "
                             "model,data (default)")
    decode.add_argument("--study", default="measured", help="study label of the measured point (default: measured)")
    decode.set_defaults(func=cmd_lab_decode)
    inspect = lab_verbs.add_parser("inspect", help="where the records depart from the model: tables, figures, "
                                                   "re-weighted model")
    _lab_options(inspect)
    inspect.set_defaults(func=cmd_lab_inspect)

    fc = sub.add_parser("forecast", help="forecast a device's logical qubit from its calibration file")
    fc.add_argument("device", help="device calibration file (TOML or JSON)")
    fc.add_argument("--code", default="rotated_surface", help="code family (default: rotated_surface)")
    fc.add_argument("--distances", type=_distances, default=[3, 5, 7], help="comma-separated (default: 3,5,7)")
    fc.add_argument("--basis", default="Z",
                    help="memory basis: Z, X, Z,X or both (both: also the logical qubit's error, either basis "
                         "failing; default: Z)")
    fc.add_argument("--decoder", help="decoder (default: the code family's, flag_matching for heavy_hex, "
                                      "mwpm otherwise)")
    fc.add_argument("--target", type=_rates, action="append",
                    help="target per-round rate; repeatable or comma-separated (default: 1e-6,1e-9,1e-12)")
    fc.add_argument("--budget-seconds", default=60.0,
                    type=_positive_number("--budget-seconds", "a positive number of seconds up to 1e+06", 1e6),
                    help="budget, turned into counted work at a fixed rate; sampling stops at 3x this "
                         "whatever the plan (default: 60)")
    fc.add_argument("--work", type=_positive_number("--work", "a positive amount of counted work "
                                                    "(shots x detectors, e.g. 5e9) up to 1e+14", 1e14),
                    help="budget as counted work (shots x detectors) instead: no time limit, the same plan "
                         "on any machine")
    fc.add_argument("--improve", type=_improvement, action="append", metavar="PARAM=FACTOR",
                    help="what-if: scale t1_us/t2_us (factor on 1/T), gate_1q_error, gate_2q_error, readout_error, "
                         "reset_error, or noise (all of them together); repeatable")
    fc.add_argument("--method", choices=["auto", "direct", "extrapolated", "stratified"], default="auto",
                    help="how each distance is estimated (default: auto: direct where it reaches "
                         "100 failures in the budget, else stratified by fault count)")
    fc.add_argument("--format", choices=["table", "json"], default="table")
    fc.add_argument("--out", help="folder for forecast.json/.csv/.png/.svg and the sample store")
    fc.add_argument("--workers", type=_bounded_int("--workers", 1, MAX_WORKERS), help="local worker processes (default: all cores)")
    fc.add_argument("--seed", type=_bounded_int("--seed", 0, SEED_LIMIT - 1), default=20260101, help="seed of the sampling (default: 20260101)")
    fc.add_argument("--quiet", action="store_true", help="no progress lines")
    fc.set_defaults(func=cmd_forecast)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; returns the exit status."""
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:
        return int(exc.code or 0)
    try:
        status: int = args.func(args)
        return status
    except RunFault as exc:  # a lost worker or cluster, a full disk: not the input's fault
        _report(args, exc)
        return EXIT_FAILURE
    except CodebenchError as exc:
        _report(args, exc)
        return EXIT_BAD_INPUT
    except (KeyboardInterrupt, Interrupted) as exc:
        # A progress line on a terminal ends without a newline: start a line of our own.
        start = "\n" if sys.stderr.isatty() else ""
        # Interrupted comes from a running sweep, which stores each batch as it finishes; a Ctrl-C
        # before that (reading and checking the input) has written nothing.
        what = ("finished batches are stored, rerun to resume" if isinstance(exc, Interrupted)
                else "nothing was written")
        print(f"{start}codebench: interrupted; {what}.", file=sys.stderr)
        return EXIT_INTERRUPTED


def _report(args: argparse.Namespace, exc: BaseException) -> None:
    """One line; with ``--debug``, the traceback (a plug-in's own error included) before it."""
    if getattr(args, "debug", False):
        import traceback

        traceback.print_exception(exc)
    print(f"codebench: {exc}", file=sys.stderr)


def entry() -> NoReturn:
    sys.exit(main())

