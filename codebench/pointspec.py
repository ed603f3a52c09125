"""Pick one point for ``codebench circuit``: from a sweep file, or from explicit options."""

from __future__ import annotations

import argparse
import re
from pathlib import Path

from codebench.build import point_label
from codebench.config import load_sweep, parse_sweep
from codebench.errors import ConfigError, not_allowed
from codebench.noise import NOISE_MODELS
from codebench.records import Point


def point_list(config: str) -> str:
    """One line per point of a sweep file, with the index ``--point`` takes."""
    sweep = load_sweep(config)
    return "\n".join(f"{i}: {point_label(p)}" for i, p in enumerate(sweep.points))


def point_from_args(args: argparse.Namespace) -> Point:
    """The point named by ``--point N`` in a sweep file, or by ``--code ... --p``."""
    if args.config is not None:
        sweep = load_sweep(args.config)
        if args.point is None:
            raise ConfigError(f"--point is required with a sweep file (0 to {len(sweep.points) - 1}).")
        if not 0 <= args.point < len(sweep.points):
            raise ConfigError(not_allowed("--point", args.point, f"an integer from 0 to {len(sweep.points) - 1}"))
        chosen: Point = sweep.points[args.point]
        return chosen
    device = getattr(args, "device", None)
    noise = args.noise if args.noise is not None else ("device" if device is not None else None)
    rate = args.p if args.p is not None else (1.0 if device is not None else None)
    missing = [flag for flag, value in (("code", args.code), ("distance", args.distance), ("noise", noise),
                                        ("p", rate)) if value is None]
    if missing:
        raise ConfigError("give a sweep file and --point N, or all of --code, --distance, --noise, --p "
                          f"(or --device FILE for the noise; missing: {', '.join('--' + m for m in missing)}).")
    rounds: object = args.rounds if args.rounds is not None else "d"
    if isinstance(rounds, str) and rounds.isdigit():
        rounds = int(rounds)
    model = NOISE_MODELS.get(str(noise))
    rate_key = model.rate.key if model is not None else "p"
    study: dict[str, object] = {"code": args.code, "distances": [args.distance], "rounds": rounds,
                                "basis": [args.basis], "noise": noise, rate_key: [rate], "decoders": ["mwpm"]}
    if device is not None:
        study["device"] = str(Path(device).resolve())
    try:
        sweep = parse_sweep({"name": "circuit", "seed": 0, "study": [study]}, source="command line")
    except ConfigError as exc:
        raise ConfigError(_in_option_names(str(exc))) from None
    return sweep.points[0]


#: Sweep-file key paths of the study built from the options, and the options that set them.
_OPTION_OF = {"distances[0]": "--distance", "code": "--code", "rounds": "--rounds", "basis[0]": "--basis",
              "noise": "--noise", "p[0]": "--p", "scale[0]": "--p", "device": "--device"}
_KEY_PATH = re.compile(r"study\[0\]\.(" + "|".join(re.escape(k) for k in _OPTION_OF) + r")(?![\w\[])")


def _in_option_names(message: str) -> str:
    """A sweep-file message about the study built from the options, in the options' own names.

    >>> _in_option_names("command line: study[0].distances[0] must be an odd integer >= 3; got 4.")
    '--distance must be an odd integer >= 3; got 4.'
    """
    text = message.removeprefix("command line: ")
    return _KEY_PATH.sub(lambda match: _OPTION_OF[match.group(1)], text)
