"""The lab side of the command line: ``codebench qasm`` and ``codebench lab decode|inspect``."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path
from typing import TYPE_CHECKING, Any

from codebench.cli_args import Parser, point_options
from codebench.errors import EXIT_OK, ConfigError, DataError, not_allowed

if TYPE_CHECKING:
    import numpy as np

    from codebench.lab.experiment import Experiment


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
    loose = [f"--{key}" for key in ("point", "distance", "rounds", "noise", "p") if getattr(args, key) is not None]
    if loose and not named:
        raise ConfigError(f"{', '.join(loose)} name a point only with --code, --device or a sweep file; with "
                          "--description alone the description names the point: drop them.")
    point = point_from_args(args) if named else None
    experiment = experiment_of(point, description, f"description '{args.description}'")
    experiment.point = with_decoder(experiment.point, args.decoder)
    records = read_records(args.records, experiment.bits, args.format)
    dets, obs = experiment.events(records)
    refuse_unrelated_records(dets, experiment.point.label())
    print(f"codebench lab: {len(records):,} shots of {experiment.bits} bits read from {args.records} "
          f"({experiment.point.label()}); decoding ...", file=sys.stderr)
    return experiment, dets, obs


#: A detector firing in this fraction of shots or more cannot belong to the described experiment: noise that
#: randomises a detector leaves nothing to decode (records of another experiment give about 1/2).
UNRELATED_FRACTION = 0.45


def refuse_unrelated_records(detection_events: np.ndarray, label: str) -> None:
    """Refuse records whose detectors fire at random (``detection_events``: bool, one row per shot).

    Records of another experiment with the same number of bits (another basis, another point) make the
    detectors that compare its bits fire in about half of the shots.
    """
    if not detection_events.size:
        return
    per_detector = detection_events.mean(axis=0)
    random = [int(k) for k in (per_detector >= UNRELATED_FRACTION).nonzero()[0]]
    if random:
        raise DataError(f"the records do not fit {label}: {len(random)} of its {len(per_detector)} detectors "
                        f"(first: {random[0]}) fire in {per_detector[random[0]]:.0%} of the shots, as random bits "
                        "do; are they records of another experiment, or is the description of another circuit?")


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
    point_options(verb)
    verb.add_argument("--description", help="the experiment's description file (JSON, from `codebench qasm`)")
    verb.add_argument("--format", choices=["01", "b8", "r8", "npy"], help="format of the records (default: suffix)")
    verb.add_argument("--decoder", help="decoder (default: the point's)")
    verb.add_argument("--out", required=True, help="folder to write into")


def add_lab_commands(sub: Any) -> None:
    """The ``qasm`` and ``lab`` verbs."""
    qasm = sub.add_parser("qasm", help="export one point's experiment as OpenQASM 3 plus its description (JSON)")
    point_options(qasm)
    qasm.add_argument("--out", required=True,
                      help="program file to write (e.g. experiment.qasm); the description goes beside it (.json)")
    qasm.set_defaults(func=cmd_qasm)

    lab = sub.add_parser("lab", help="measured records: decode them, see where the device departs from its model")
    lab_verbs = lab.add_subparsers(dest="lab_verb", metavar="{decode,inspect}", required=True, parser_class=Parser)
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

