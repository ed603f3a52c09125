"""Argument types and shared options of the command line (one-line messages naming the option)."""

from __future__ import annotations

import argparse
from typing import Callable, NoReturn

from codebench.errors import EXIT_BAD_INPUT, CodebenchError, ConfigError, not_allowed


class Parser(argparse.ArgumentParser):
    """An argument parser whose errors are one line and exit status 2."""

    def error(self, message: str) -> NoReturn:
        self.exit(EXIT_BAD_INPUT, f"codebench: {message} (see `{self.prog} --help`)\n")


#: Most local worker processes (as codebench.engine.local.MAX_LOCAL_WORKERS; not imported, to start fast).
MAX_WORKERS = 512
#: Seeds are unsigned 63-bit integers everywhere (sweep files, forecasts, bootstraps).
SEED_LIMIT = 2**63


def bounded_int(name: str, low: int, high: int | None = None) -> Callable[[str], int]:
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


def positive_int(name: str) -> Callable[[str], int]:
    return bounded_int(name, 1)


def point_options(verb: argparse.ArgumentParser) -> None:
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


def distances(text: str) -> list[int]:
    try:
        values = [int(part) for part in text.split(",") if part.strip()]
    except ValueError:
        values = []
    if not values:
        raise argparse.ArgumentTypeError(not_allowed("--distances", text, "a comma-separated list of integers "
                                                     "such as 3,5,7"))
    return values


def rates(flag: str) -> Callable[[str], list[float]]:
    """An argparse type: per-round rates in (0, 0.5), comma-separated, refused naming ``flag``."""
    def parse(text: str) -> list[float]:
        try:
            values = [float(part) for part in text.split(",") if part.strip()]
        except ValueError:
            values = []
        if not values or not all(0 < v < 0.5 for v in values):
            raise argparse.ArgumentTypeError(not_allowed(flag, text, "a per-round rate in (0, 0.5) "
                                                         "(or several, comma-separated)"))
        return values

    return parse


def improvement(text: str) -> tuple[str, float]:
    from codebench.forecast import parse_improve

    try:
        return parse_improve(text)
    except CodebenchError as exc:
        raise argparse.ArgumentTypeError(str(exc)) from None


def positive_number(flag: str, what: str, largest: float) -> Callable[[str], float]:
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


def placement_choice(text: str | None) -> str | list[str] | None:
    """``--placement``: best | worst | median, or comma-separated device qubit ids."""
    if text is None or text in ("best", "worst", "median"):
        return text
    return [q.strip() for q in text.split(",")] if "," in text else text


def improvements(given: list[tuple[str, float]] | None) -> dict[str, float]:
    """``--improve`` values by parameter; a parameter given twice is refused (it would multiply silently)."""
    chosen: dict[str, float] = {}
    for name, factor in given or []:
        if name in chosen:
            raise ConfigError(not_allowed("--improve", f"{name}={factor:g}", f"each parameter once ({name} was "
                                          f"already given as {chosen[name]:g}); run one forecast per scenario"))
        chosen[name] = factor
    return chosen
