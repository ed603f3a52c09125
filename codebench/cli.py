"""The ``codebench`` command line: one function per verb.

Exit status: 0 success, 2 bad input (one line on standard error, no
traceback), 1 anything else, 130 interrupted (finished batches are kept).
"""

from __future__ import annotations

import argparse
import contextlib
import os
import sys
from pathlib import Path
from typing import TYPE_CHECKING, Callable, Iterator, NoReturn, Sequence

from codebench.build import noise_model, noisy_circuit
from codebench.errors import (
    EXIT_BAD_INPUT,
    EXIT_FAILURE,
    EXIT_INTERRUPTED,
    EXIT_OK,
    CodebenchError,
    ConfigError,
    Interrupted,
    OutputError,
    RunFault,
    not_allowed,
)
from codebench.stats import INTERVALS

if TYPE_CHECKING:
    import pandas as pd

    from codebench.analysis import AnalysisResult



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
    notes: dict[str, None] = {}
    seen: set[tuple[object, ...]] = set()
    for point in sweep.points:  # where each patch sits on a device (a patch that does not fit stops here)
        if (point.noise, point.noise_options, point.code, point.distance) in seen:
            continue
        seen.add((point.noise, point.noise_options, point.code, point.distance))
        note = noise_model(point).qubit_note(point.code, point.distance)
        if note is not None:
            notes[note] = None
    if not args.quiet:
        for note in notes:
            print(note, file=sys.stderr)
    frame = run_sweep(sweep, out=out, workers=args.workers, progress=not args.quiet, scheduler=args.scheduler)
    print(summary_table(frame))
    print(f"\nwrote {out / 'results.csv'} and {out / 'results.sqlite'}")
    return EXIT_OK


def cmd_export(args: argparse.Namespace) -> int:
    from codebench.api import export_csv

    if args.csv is None and Path(args.dir).is_dir() and not os.access(args.dir, os.W_OK):
        raise ConfigError(f"the results folder '{args.dir}' is read-only; give --csv FILE to write the table "
                          "elsewhere.")
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


def _output_folder(args: argparse.Namespace, what: str) -> Path:
    """Where ``figures`` / ``report`` write: ``--to``, else the results folder unless that is read-only."""
    if args.to is not None:
        return Path(args.to)
    folder = Path(args.dir)
    if not os.access(folder, os.W_OK):
        raise ConfigError(f"the results folder '{folder}' is read-only; give --to FOLDER to write the {what} "
                          "elsewhere.")
    return folder


@contextlib.contextmanager
def _to_option(args: argparse.Namespace) -> Iterator[None]:
    """A ``--to`` folder that cannot be written is a bad argument (exit 2), named as such."""
    try:
        yield
    except OutputError as exc:
        if args.to is None:
            raise
        reason = str(exc).rstrip(".")
        raise ConfigError(not_allowed("--to", args.to, f"a folder codebench can write ({reason})")) from None


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
    target = _output_folder(args, "figures")
    with _to_option(args):
        paths = write_figures(target, frame, result)
    print(f"wrote {len(paths)} files into {target / 'figures'}")
    return EXIT_OK


def cmd_report(args: argparse.Namespace) -> int:
    from codebench.api import STORE_NAME
    from codebench.report import FORECAST_FILE, write_forecast_report, write_report

    folder = Path(args.dir)
    if (folder / FORECAST_FILE).is_file() and not (folder / STORE_NAME).exists():
        # A forecast's --out folder: its own page (its samples in store/ are the forecast's, not a sweep).
        target = _output_folder(args, "report")
        with _to_option(args):
            path = write_forecast_report(folder, to=None if args.to is None else target)
        print(f"wrote {path} and {path.parent / 'summary.md'}")
        return EXIT_OK

    frame, result = _analysis(args)
    target = _output_folder(args, "report")
    with _to_option(args):
        path = write_report(Path(args.dir), frame, result, to=target)
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


def _placement_choice(text: str | None) -> str | list[str] | None:
    """``--placement``: best | worst | median, or comma-separated device qubit ids."""
    if text is None or text in ("best", "worst", "median"):
        return text
    return [q.strip() for q in text.split(",")] if "," in text else text


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
                      progress=not args.quiet, placement=_placement_choice(args.placement))
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
        placements_report,
        placements_text,
    )
    from codebench.noise.placement import interaction_graph

    improve: dict[str, float] = {}
    for name, factor in args.improve or []:
        improve[name] = improve.get(name, 1.0) * factor
    out = Path(args.out)
    if out.exists() and not out.is_dir():
        raise ConfigError(not_allowed("--out", str(out), "a folder (or a path that does not exist yet)"))
    report = placements_report(args.device, args.code, args.distance, top=args.top, sample=args.sample,
                               shots=args.shots, seed=args.seed, improve=improve,
                               placement=_placement_choice(args.placement), progress=not args.quiet)
    print(placements_text(report))
    from codebench.codes import CODE_FAMILIES

    family = CODE_FAMILIES[args.code]
    qubits, pairs = interaction_graph(family, args.distance, "cz" if report.device.native_2q == "cz" else "cx")
    used_pairs = [(report.chosen[qubits.index(a)], report.chosen[qubits.index(b)]) for a, b in pairs]
    out.mkdir(parents=True, exist_ok=True)
    png, svg = write_chip_figure(
        report.device, report.chosen, used_pairs, args.colour_by, COLOUR_KEYS[args.colour_by],
        f"{args.code} d={args.distance} on {report.device.name}",
        f"{report.choice} of {report.found} placements by the logical-error proxy",
        out / f"placements_{args.code}_d{args.distance}")
    print(f"wrote {png}, {svg}", file=sys.stderr)
    return EXIT_OK


class _VersionAction(argparse.Action):
    """``--version``: one unwrapped line, then exit 0 (argparse's own action wraps it at 80 columns)."""

    def __call__(self, parser: argparse.ArgumentParser, namespace: argparse.Namespace, values: object,
                 option_string: str | None = None) -> None:
        print(_version_line())
        parser.exit()


def _version_line() -> str:
    from importlib.metadata import PackageNotFoundError, version

    def of(package: str) -> str:
        try:
            return version(package)
        except PackageNotFoundError:
            return "not installed"

    libraries = ", ".join(f"{name} {of(name)}" for name in ("stim", "pymatching", "ldpc", "numpy"))
    return f"codebench {of('codebench')} ({libraries}; Python {sys.version.split()[0]})"


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(prog="codebench", description="Logical-qubit memory experiments: sample, decode, fit.")
    parser.add_argument("--version", action=_VersionAction, nargs=0,
                        help="print codebench's version and those of the libraries it samples and decodes with")
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
        if verb != "analyze":
            verb_parser.add_argument("--to", metavar="FOLDER",
                                     help=f"write the {verb} into FOLDER instead of DIR (for read-only results)")
        verb_parser.add_argument("--targets", type=_targets, default=[1e-6, 1e-9, 1e-12],
                                 help="target per-round rates for projections (default: 1e-6,1e-9,1e-12)")
        verb_parser.add_argument("--interval", choices=sorted(INTERVALS), default="wilson",
                                 help="95%% binomial interval of the tables (default: wilson)")
        verb_parser.add_argument("--bootstrap", type=_positive_int("--bootstrap"), default=1000,
                                 help="bootstrap resamples for crossing intervals (default: 1000)")
        verb_parser.add_argument("--seed", type=_bounded_int("--seed", 0, SEED_LIMIT - 1), default=0, help="seed of the bootstrap (default: 0)")
        verb_parser.set_defaults(func=func)

    circuit = sub.add_parser("circuit", help="print one point's noisy stim circuit")
    circuit.add_argument("config", nargs="?", help="sweep file; pick the point with --point")
    circuit.add_argument("--point", type=int, help="index of the point in the sweep's grid, from 0")
    circuit.add_argument("--list", action="store_true", help="list the sweep's points with their indices")
    circuit.add_argument("--code", help="code family (without a sweep file)")
    circuit.add_argument("--distance", type=int)
    circuit.add_argument("--rounds", help="rounds: an integer or a multiple of d such as 'd'")
    circuit.add_argument("--basis", default="Z")
    circuit.add_argument("--noise")
    circuit.add_argument("--p", type=float)
    circuit.set_defaults(func=cmd_circuit)

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
    budget = fc.add_mutually_exclusive_group()
    budget.add_argument("--budget-seconds", default=60.0,
                    type=_positive_number("--budget-seconds", "a positive number of seconds up to 1e+06", 1e6),
                    help="budget, turned into counted work at a fixed rate; sampling stops at 3x this "
                         "whatever the plan (default: 60)")
    budget.add_argument("--work", type=_positive_number("--work", "a positive amount of counted work "
                                                    "(shots x detectors, e.g. 5e9) up to 1e+14", 1e14),
                    help="budget as counted work (shots x detectors) instead: no time limit, the same plan "
                         "on any machine")
    fc.add_argument("--improve", type=_improvement, action="append", metavar="PARAM=FACTOR",
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
    fc.add_argument("--workers", type=_bounded_int("--workers", 1, MAX_WORKERS), help="local worker processes (default: all cores)")
    fc.add_argument("--seed", type=_bounded_int("--seed", 0, SEED_LIMIT - 1), default=20260101, help="seed of the sampling (default: 20260101)")
    fc.add_argument("--quiet", action="store_true", help="no progress lines")
    fc.set_defaults(func=cmd_forecast)

    pl = sub.add_parser("placements", help="rank the placements of a code on a device's qubits; draw the chip")
    pl.add_argument("device", help="device calibration file (TOML or JSON) with a [coupling] graph")
    pl.add_argument("--code", default="rotated_surface", help="code family (default: rotated_surface)")
    pl.add_argument("--distance", type=_bounded_int("--distance", 2, 201), required=True, help="code distance")
    pl.add_argument("--sample", action="store_true",
                    help="also sample each shown placement (rounds = d) for a per-round rate")
    pl.add_argument("--shots", type=_bounded_int("--shots", 100, 10**8), default=20_000,
                    help="shots per sampled placement (default: 20000)")
    pl.add_argument("--top", type=_bounded_int("--top", 1, 10_000), default=10,
                    help="best placements shown (the median and the worst are always shown; default: 10)")
    pl.add_argument("--colour-by", choices=["t1_us", "t2_us", "readout_error", "gate_1q_error", "reset_error"],
                    default="t1_us", help="per-qubit number that colours the chip (default: t1_us)")
    pl.add_argument("--placement", help="which placement the figure draws: best (default), worst, median, or "
                                        "device qubit ids, comma-separated")
    pl.add_argument("--improve", type=_improvement, action="append", metavar="PARAM=FACTOR",
                    help="what-if edits of the device, as for forecast; repeatable")
    pl.add_argument("--out", default=".", help="folder for placements_<code>_d<D>.png/.svg (default: .)")
    pl.add_argument("--seed", type=_bounded_int("--seed", 0, SEED_LIMIT - 1), default=1,
                    help="seed of the sampling (default: 1)")
    pl.add_argument("--quiet", action="store_true", help="no progress lines")
    pl.set_defaults(func=cmd_placements)
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
        # Interrupted comes from a running sweep, which stores each batch as it finishes; a Ctrl-C
        # before that (reading and checking the input) has written nothing.
        what = ("finished batches are stored, rerun to resume" if isinstance(exc, Interrupted)
                else "nothing was written")
        print(f"codebench: interrupted; {what}.", file=sys.stderr)
        return EXIT_INTERRUPTED


def _report(args: argparse.Namespace, exc: BaseException) -> None:
    """One line; with ``--debug``, the traceback (a plug-in's own error included) before it."""
    if getattr(args, "debug", False):
        import traceback

        traceback.print_exception(exc)
    print(f"codebench: {exc}", file=sys.stderr)
