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
from typing import TYPE_CHECKING, Iterator, Sequence

from codebench.build import noise_model, noisy_circuit
from codebench.cli_args import (
    MAX_WORKERS,
    SEED_LIMIT,
    Parser,
    bounded_int,
    point_options,
    positive_int,
    rates,
)
from codebench.cli_device import add_device_commands
from codebench.cli_lab import add_lab_commands
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
    from codebench.api import export_with_count

    if args.csv is None and Path(args.dir).is_dir() and not os.access(args.dir, os.W_OK):
        raise ConfigError(f"the results folder '{args.dir}' is read-only; give --csv FILE to write the table "
                          "elsewhere.")
    try:
        path, count = export_with_count(args.dir, args.csv, args.interval, args.all)
    except OutputError as exc:
        if args.csv is None:
            raise
        reason = str(exc).rstrip(".")
        raise ConfigError(not_allowed("--csv", args.csv, f"a file path codebench can write ({reason})")) from None
    _say_unlisted(args, count)
    print(f"wrote {path}")
    return EXIT_OK


def _analysis(args: argparse.Namespace) -> tuple[pd.DataFrame, AnalysisResult]:
    from codebench.analysis import analyze
    from codebench.api import results_and_unlisted

    frame, count = results_and_unlisted(args.dir, args.interval, args.all)
    _say_unlisted(args, count)
    return frame, analyze(frame, targets=args.targets, bootstrap=args.bootstrap, seed=args.seed)


def _say_unlisted(args: argparse.Namespace, count: int) -> None:
    """A note on standard error when the store holds ``count`` points the current sweep file no longer lists."""
    if count and not args.all:
        print(f"codebench: note: {count} stored point(s) are not in the sweep file of the latest run (it was "
              "edited); --all includes them.", file=sys.stderr)
    elif count:
        print(f"codebench: note: {count} stored point(s) not in the sweep file of the latest run are included "
              "under the study '(not in the sweep file)'.", file=sys.stderr)


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


def _all_option(verb: argparse.ArgumentParser) -> None:
    verb.add_argument("--all", action="store_true",
                      help="also the stored points the sweep file of the latest run no longer lists")


def build_parser() -> argparse.ArgumentParser:
    parser = Parser(prog="codebench", description="Logical-qubit memory experiments: sample, decode, fit.")
    parser.add_argument("--version", action=_VersionAction, nargs=0,
                        help="print codebench's version and those of the libraries it samples and decodes with")
    parser.add_argument("--debug", action="store_true",
                        help="after an error, also print its traceback (for reports of a bug or a plug-in's fault)")
    sub = parser.add_subparsers(dest="verb", required=True, parser_class=Parser)

    sweep = sub.add_parser("sweep", help="run or resume a sweep file")
    sweep.add_argument("config", help="sweep file (TOML)")
    sweep.add_argument("--out", help="output folder (default: results/<name>)")
    sweep.add_argument("--workers", type=bounded_int("--workers", 1, MAX_WORKERS),
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
    _all_option(export)
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
        _all_option(verb_parser)
        verb_parser.add_argument("--targets", type=rates("--targets"), default=[1e-6, 1e-9, 1e-12],
                                 help="target per-round rates for projections (default: 1e-6,1e-9,1e-12)")
        verb_parser.add_argument("--interval", choices=sorted(INTERVALS), default="wilson",
                                 help="95%% binomial interval of the tables (default: wilson)")
        verb_parser.add_argument("--bootstrap", type=positive_int("--bootstrap"), default=1000,
                                 help="bootstrap resamples for crossing intervals (default: 1000)")
        verb_parser.add_argument("--seed", type=bounded_int("--seed", 0, SEED_LIMIT - 1), default=0, help="seed of the bootstrap (default: 0)")
        verb_parser.set_defaults(func=func)

    circuit = sub.add_parser("circuit", help="print one point's noisy stim circuit")
    point_options(circuit)
    circuit.add_argument("--list", action="store_true", help="list the sweep's points with their indices")
    circuit.set_defaults(func=cmd_circuit)
    add_lab_commands(sub)
    add_device_commands(sub)

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
