"""What a forecast is asked: one typed, checked request."""

from __future__ import annotations

import math
import os
from dataclasses import dataclass, field
from typing import Callable, Mapping, Sequence

import numpy as np

from codebench.build import size_estimate
from codebench.codes import CODE_FAMILIES
from codebench.config.study import MAX_DETECTORS, MAX_DISTANCE
from codebench.decoders import DECODERS
from codebench.engine.executors import Executor
from codebench.errors import ConfigError, not_allowed
from codebench.forecast.whatif import check_improve
from codebench.layout import Basis
from codebench.noise.calibration import Device

__all__ = ["DEFAULT_DISTANCES", "DEFAULT_SEED", "DEFAULT_TARGETS", "METHODS", "ForecastRequest", "parse_bases"]

#: Largest budgets taken: about a week of a 2-core machine at the reference rate. Larger ones would only
#: build absurd shot plans (and a mistyped exponent should not take the machine's memory).
MAX_WORK = 1e14
MAX_SECONDS = 1e6
DEFAULT_DISTANCES = (3, 5, 7)
DEFAULT_TARGETS = (1e-6, 1e-9, 1e-12)
DEFAULT_SEED = 20260101
METHODS = ("auto", "direct", "extrapolated", "stratified")


def parse_bases(text: str | Sequence[str], allowed: Sequence[str]) -> tuple[Basis, ...]:
    """``"Z"``, ``"X"``, ``"Z,X"`` or ``"both"`` (every basis of the code) as a tuple of bases.

    >>> parse_bases("both", ("Z", "X")), parse_bases("X", ("Z", "X"))
    (('Z', 'X'), ('X',))
    """
    parts = [p.strip() for p in text.split(",")] if isinstance(text, str) else [str(p) for p in text]
    if parts == ["both"]:
        parts = list(allowed)
    what = "one of " + ", ".join(repr(b) for b in allowed) + ", a comma-separated list of them, or 'both'"
    if not parts or any(p not in allowed for p in parts) or len(set(parts)) != len(parts):
        raise ConfigError(not_allowed("--basis", text if isinstance(text, str) else ",".join(parts), what))
    return tuple("Z" if p == "Z" else "X" for p in parts)


@dataclass(frozen=True)
class ForecastRequest:
    """A forecast's inputs. :meth:`checked` validates them (one-line :class:`ConfigError` per problem).

    ``work`` sets the sampling budget directly in counted work (shots x
    detectors, :mod:`codebench.forecast.plan`); otherwise ``budget_seconds``
    is turned into counted work by a fixed rate, so the plan never depends on
    how fast this machine happens to be. ``decoder=None`` takes the code
    family's default (``flag_matching`` for heavy_hex, ``mwpm`` elsewhere).
    """

    device: Device | str | os.PathLike[str]
    code: str = "rotated_surface"
    distances: tuple[int, ...] = DEFAULT_DISTANCES
    bases: tuple[Basis, ...] = ("Z",)
    decoder: str | None = None
    targets: tuple[float, ...] = DEFAULT_TARGETS
    budget_seconds: float = 60.0
    work: float | None = None
    workers: int | None = None
    seed: int = DEFAULT_SEED
    out: str | os.PathLike[str] | None = None
    improve: Mapping[str, float] = field(default_factory=dict)
    method: str | Mapping[int, str] = "auto"
    progress: bool = False
    executor_factory: Callable[[int], Executor] | None = None
    #: Which placement a device with a coupling graph uses (None: the device file's ``placement``, "best").
    placement: str | tuple[str, ...] | None = None

    @property
    def decoder_name(self) -> str:
        return self.decoder if self.decoder is not None else CODE_FAMILIES[self.code].default_decoder

    def method_of(self, distance: int) -> str:
        return self.method.get(distance, "auto") if isinstance(self.method, Mapping) else self.method

    def checked(self) -> ForecastRequest:
        """The same request with sorted distinct distances, or :class:`ConfigError` naming the first problem."""
        if self.code not in CODE_FAMILIES:
            raise ConfigError(not_allowed("--code", self.code, "one of " + ", ".join(repr(c) for c in CODE_FAMILIES)))
        family = CODE_FAMILIES[self.code]
        for basis in self.bases:
            if basis not in family.bases:
                raise ConfigError(not_allowed("--basis", basis, "one of " + ", ".join(repr(b) for b in family.bases)))
        if not self.bases:
            raise ConfigError(not_allowed("--basis", "", "at least one basis"))
        if self.decoder_name not in DECODERS:
            raise ConfigError(not_allowed("--decoder", self.decoder_name,
                                          "one of " + ", ".join(repr(d) for d in DECODERS)))
        checked: list[int] = []
        for i, d in enumerate(self.distances):
            if isinstance(d, bool) or not isinstance(d, (int, np.integer)):
                raise ConfigError(not_allowed(f"--distances[{i}]", d, "an integer"))
            problem = family.distance_problem(int(d))
            if problem is not None:
                raise ConfigError(not_allowed(f"--distances[{i}]", d, f"{problem} for {self.code}"))
            # The distance first: the size estimate builds the layout (10**8 qubits at d = 10,001).
            detectors = size_estimate(family, int(d), int(d), family.bases[0])[1] if d <= MAX_DISTANCE else 0
            if d > MAX_DISTANCE:
                raise ConfigError(not_allowed(f"--distances[{i}]", d, f"a distance of at most {MAX_DISTANCE}"))
            if detectors > MAX_DETECTORS:
                raise ConfigError(not_allowed(f"--distances[{i}]", d, f"a distance whose d-round experiment has at "
                                              f"most {MAX_DETECTORS:,} detectors (this one: about {detectors:,})"))
            checked.append(int(d))
        if len(set(checked)) < 2:
            raise ConfigError(not_allowed("--distances", list(self.distances), "at least two different distances "
                                          "(Lambda needs two)"))
        for t in self.targets:
            if isinstance(t, bool) or not isinstance(t, (int, float)) or not 0 < t < 0.5:
                raise ConfigError(not_allowed("--target", t, "a per-round rate in (0, 0.5)"))
        _positive("--budget-seconds", self.budget_seconds, f"a positive number of seconds up to {MAX_SECONDS:g}",
                  MAX_SECONDS)
        if self.work is not None:
            _positive("--work", self.work, f"a positive amount of counted work (shots x detectors) up to {MAX_WORK:g}",
                      MAX_WORK)
        if self.workers is not None and (isinstance(self.workers, bool) or not isinstance(self.workers, int)
                                         or self.workers < 1):
            raise ConfigError(not_allowed("--workers", self.workers, "a positive integer"))
        chosen = self.method.values() if isinstance(self.method, Mapping) else [self.method]
        for m in chosen:
            if m not in METHODS:
                raise ConfigError(not_allowed("--method", m, "one of " + ", ".join(repr(x) for x in METHODS)))
        if isinstance(self.method, Mapping) and any(d not in checked for d in self.method):
            raise ConfigError(not_allowed("method", dict(self.method), "a mapping from forecast distances to methods"))
        check_improve(self.improve)
        if isinstance(self.placement, str) and self.placement not in ("best", "worst", "median"):
            raise ConfigError(not_allowed("--placement", self.placement, "best, worst, median or a comma-separated "
                                          "list of device qubit ids (one per code qubit)"))
        return ForecastRequest(**{**self.__dict__, "distances": tuple(sorted(set(checked))),
                                  "targets": tuple(float(t) for t in self.targets), "improve": dict(self.improve)})


def _positive(name: str, value: object, what: str, largest: float) -> None:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value) or value <= 0 \
            or value > largest:
        raise ConfigError(not_allowed(name, value, what))
