"""What :func:`codebench.forecast.forecast` returns: typed records, and the JSON of ``forecast.json``.

:class:`ForecastResult` holds one :class:`DistanceForecast` per distance (the
logical qubit's, and per basis with several bases), the Lambda fit
(:class:`LambdaSummary`) with the consecutive-pair Lambdas
(:class:`LambdaStep`), the target distances (:class:`TargetForecast`), the
break-even against an idle qubit (:class:`BreakEven`), the budget
(:class:`BudgetSummary`), the cautions and the notes. Every record's
``to_json()`` gives the JSON object written to ``forecast.json`` and by
``codebench forecast --format json``: keys and their order are fixed, values
are plain JSON types, non-finite numbers are ``None`` (:func:`plain`, which
the forecast also applies to the records themselves, so attributes and JSON
agree). Attribute names are the JSON keys, except ``lam``, ``lam_low`` and
``lam_high`` for ``lambda``, ``lambda_low`` and ``lambda_high``.

A distance's method-specific numbers are in ``details``
(:mod:`codebench.forecast.details`: direct, extrapolated or stratified;
``None`` for a distance that was never sampled or for the either-basis rows);
their keys follow the method's in the row's JSON.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass, field
from typing import Any, ClassVar, Mapping, TypeVar, cast

import numpy as np

from codebench.forecast.details import MethodDetails

__all__ = [
    "BreakEven", "BreakEvenRow", "BudgetSummary", "DistanceForecast", "ForecastResult", "LambdaStep",
    "LambdaSummary", "TargetForecast", "plain",
]

T = TypeVar("T")


def plain(value: T) -> T:
    """``value`` with plain types throughout: numpy scalars as Python numbers, non-finite floats as ``None``.

    Walks frozen dataclasses (rebuilt with the plain values), mappings (as
    dicts with ``str`` keys), lists and tuples (kept as tuples inside
    records, lists elsewhere).

    >>> plain([np.float64(0.5), float("inf"), np.int64(3), (np.bool_(True),)])
    [0.5, None, 3, [True]]
    """
    return cast(T, _plain(value, in_record=False))


def _plain(value: Any, *, in_record: bool) -> Any:
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        changes = {f.name: _plain(getattr(value, f.name), in_record=True)
                   for f in dataclasses.fields(value) if f.init}
        return dataclasses.replace(value, **changes)
    if isinstance(value, Mapping):
        return {str(k): _plain(v, in_record=in_record) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        items = [_plain(v, in_record=in_record) for v in value]
        return tuple(items) if in_record else items
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        return float(value) if math.isfinite(float(value)) else None
    return value


# --------------------------------------------------------------------------- one distance


@dataclass(frozen=True)
class DistanceForecast:
    """One distance: the per-round logical error with its 95% interval, how it was obtained, and per second.

    ``reason`` says why the method was chosen (``None`` on the either-basis
    rows, whose JSON has no such key). ``pilot_only`` marks a distance the
    hard time limit reached first: its counts are the pilot's, and its JSON
    has no ``decode_us_per_round`` key.
    """

    distance: int
    rounds: int
    per_round_rate: float | None
    low: float | None
    high: float | None
    method: str
    method_kind: str
    shots: int
    failures: int
    flags: tuple[str, ...]
    details: MethodDetails | None
    log_rate: float | None
    log_rate_variance: float | None
    reason: str | None
    decode_us_per_round: float | None
    qubits: int
    round_duration_us: float
    per_second_rate: float | None
    per_second_low: float | None
    per_second_high: float | None
    keeps_up: bool | None
    pilot_only: bool = False

    def to_json(self) -> dict[str, Any]:
        out: dict[str, Any] = {
            "distance": self.distance, "rounds": self.rounds, "per_round_rate": self.per_round_rate,
            "low": self.low, "high": self.high, "method": self.method, "method_kind": self.method_kind,
            "shots": self.shots, "failures": self.failures, "flags": list(self.flags),
        }
        if self.details is not None:
            out.update(self.details.to_json())
        out.update({"log_rate": self.log_rate, "log_rate_variance": self.log_rate_variance})
        if self.reason is not None:
            out["reason"] = self.reason
        if not self.pilot_only:
            out["decode_us_per_round"] = self.decode_us_per_round
        out.update({
            "qubits": self.qubits, "round_duration_us": self.round_duration_us,
            "per_second_rate": self.per_second_rate, "per_second_low": self.per_second_low,
            "per_second_high": self.per_second_high, "keeps_up": self.keeps_up,
        })
        return plain(out)


# --------------------------------------------------------------------------- Lambda, targets, break-even, budget


@dataclass(frozen=True)
class LambdaSummary:
    """The Lambda fit over the forecast distances (shared with :func:`codebench.analysis.suppression.fit_lambda`).

    ``consistency_p`` is the chi-square p-value of one constant Lambda (None with no degree of freedom).
    """

    lam: float
    lam_low: float
    lam_high: float
    C: float
    log_cov: tuple[tuple[float, ...], ...]
    distances: tuple[int, ...]
    chi2: float
    dof: int
    inflation: float
    consistency_p: float | None

    model: ClassVar[str] = ("eps_d = C / Lambda^((d+1)/2), weighted least squares in ln eps "
                            "(Acharya et al., Nature 638, 920 (2025), Eq. 1)")

    def to_json(self) -> dict[str, Any]:
        return plain({
            "lambda": self.lam, "lambda_low": self.lam_low, "lambda_high": self.lam_high, "C": self.C,
            "log_cov": [list(row) for row in self.log_cov], "distances": list(self.distances), "chi2": self.chi2,
            "dof": self.dof, "inflation": self.inflation, "consistency_p": self.consistency_p, "model": self.model,
        })


@dataclass(frozen=True)
class LambdaStep:
    """Lambda between two consecutive distances with an estimate, with its 95% interval."""

    distances: tuple[int, int]
    lam: float
    low: float
    high: float

    def to_json(self) -> dict[str, Any]:
        return plain({"distances": list(self.distances), "lambda": self.lam, "low": self.low, "high": self.high})


@dataclass(frozen=True)
class TargetForecast:
    """Distance and qubits that reach one target per-round rate, or why none is given (``not_projected``)."""

    target: float
    distance: int | None = None
    qubits: int | None = None
    distance_low: int | None = None
    distance_high: int | None = None
    qubits_low: int | None = None
    qubits_high: int | None = None
    reachable: bool = False
    extrapolation: bool | None = None
    not_projected: str | None = None

    def to_json(self) -> dict[str, Any]:
        return plain({
            "target": self.target, "distance": self.distance, "qubits": self.qubits,
            "distance_low": self.distance_low, "distance_high": self.distance_high,
            "qubits_low": self.qubits_low, "qubits_high": self.qubits_high, "reachable": self.reachable,
            "extrapolation": self.extrapolation, "not_projected": self.not_projected,
        })


@dataclass(frozen=True)
class BreakEvenRow:
    """One distance against the best and the median idle qubit (``None`` where the rate is unknown)."""

    distance: int
    per_round_rate: float | None
    verdict: str
    beats_best: bool | None
    beats_median: bool | None
    beats_best_at_95: bool | None
    beats_median_at_95: bool | None
    ratio_to_best: float | None
    ratio_to_median: float | None

    def to_json(self) -> dict[str, Any]:
        return plain({
            "distance": self.distance, "per_round_rate": self.per_round_rate, "verdict": self.verdict,
            "beats_best": self.beats_best, "beats_median": self.beats_median,
            "beats_best_at_95": self.beats_best_at_95, "beats_median_at_95": self.beats_median_at_95,
            "ratio_to_best": self.ratio_to_best, "ratio_to_median": self.ratio_to_median,
        })


@dataclass(frozen=True)
class BreakEven:
    """The logical error per round against one idle physical qubit over the same round."""

    round_duration_us: float
    idle_error_best: float
    idle_error_median: float
    best_qubit: str
    best_qubit_t1_us: float
    best_qubit_t2_us: float
    qubits_considered: int
    distances: tuple[BreakEvenRow, ...]

    definition: ClassVar[str] = (
        "p_idle = px + py + pz of the Pauli-twirled amplitude and phase damping channel over one "
        "round (Tomita & Svore, PRA 90, 062320 (2014), Eqs. 9-10), per listed device qubit")

    def row(self, distance: int) -> BreakEvenRow | None:
        return next((r for r in self.distances if r.distance == distance), None)

    def to_json(self) -> dict[str, Any]:
        return plain({
            "round_duration_us": self.round_duration_us, "idle_error_best": self.idle_error_best,
            "idle_error_median": self.idle_error_median, "best_qubit": self.best_qubit,
            "best_qubit_t1_us": self.best_qubit_t1_us, "best_qubit_t2_us": self.best_qubit_t2_us,
            "qubits_considered": self.qubits_considered, "definition": self.definition,
            "distances": [r.to_json() for r in self.distances],
        })


@dataclass(frozen=True)
class BudgetSummary:
    """The budget in counted work, what was spent, what the hard time limit cut short, and the wall time."""

    seconds: float
    work: float
    work_spent: float
    hard_limit_reached: bool
    cut_short: tuple[str, ...]
    methods: Mapping[str, str]
    wall_seconds: float

    def to_json(self) -> dict[str, Any]:
        return plain({
            "seconds": self.seconds, "work": self.work, "work_spent": self.work_spent,
            "hard_limit_reached": self.hard_limit_reached, "cut_short": list(self.cut_short),
            "methods": dict(self.methods), "wall_seconds": self.wall_seconds,
        })


# --------------------------------------------------------------------------- the forecast


@dataclass(frozen=True)
class ForecastResult:
    """A forecast of one device's logical qubit (see the module docstring).

    ``distances`` are the logical qubit's rows: one basis's own, or with
    several bases the either-basis rows, each basis's being in ``per_basis``
    (``None`` with one basis). ``device_file`` is ``None`` when the device
    was given as an object.
    """

    device: str
    device_file: str | None
    device_digest: str
    improve: Mapping[str, float]
    code: str
    bases: tuple[str, ...]
    decoder: str
    seed: int
    round_duration_us: float
    distances: tuple[DistanceForecast, ...]
    per_basis: Mapping[str, tuple[DistanceForecast, ...]] | None
    lambda_fit: LambdaSummary | None
    lambda_pairs: tuple[LambdaStep, ...]
    constant_lambda: bool
    targets: tuple[TargetForecast, ...]
    break_even: BreakEven
    budget: BudgetSummary
    cautions: tuple[str, ...]
    notes: tuple[str, ...]
    #: Device qubits of each distance's patch (code qubit order), where the device maps them.
    placements: Mapping[str, tuple[str, ...]] = field(default_factory=dict)

    method_note: ClassVar[str] = (
        "direct: counts at the device's noise; stratified: P_L = sum_w P(W = w) f(w) over the "
        "number of faults w; extrapolated: power law in a raised noise scale (module docs)")

    @property
    def basis(self) -> str:
        """The bases as given on the command line, comma-separated."""
        return ",".join(self.bases)

    @property
    def lam(self) -> float | None:
        return None if self.lambda_fit is None else self.lambda_fit.lam

    @property
    def lam_low(self) -> float | None:
        return None if self.lambda_fit is None else self.lambda_fit.lam_low

    @property
    def lam_high(self) -> float | None:
        return None if self.lambda_fit is None else self.lambda_fit.lam_high

    def at(self, distance: int) -> DistanceForecast:
        """The logical qubit's row of ``distance`` (``KeyError`` if it was not forecast)."""
        for row in self.distances:
            if row.distance == distance:
                return row
        raise KeyError(distance)

    def to_json(self) -> dict[str, Any]:
        """The JSON document of ``forecast.json`` (plain types; ``json.dumps(..., allow_nan=False)`` works)."""
        return plain({
            "method_note": self.method_note,
            "device": self.device, "device_file": self.device_file, "device_digest": self.device_digest,
            "improve": dict(self.improve), "code": self.code, "basis": self.basis,
            "bases": list(self.bases), "decoder": self.decoder, "seed": self.seed,
            "round_duration_us": self.round_duration_us,
            "distances": [r.to_json() for r in self.distances],
            "per_basis": None if self.per_basis is None else {
                b: [r.to_json() for r in rows] for b, rows in self.per_basis.items()},
            "lambda": self.lam, "lambda_low": self.lam_low, "lambda_high": self.lam_high,
            "lambda_fit": None if self.lambda_fit is None else self.lambda_fit.to_json(),
            "lambda_pairs": [p.to_json() for p in self.lambda_pairs], "constant_lambda": self.constant_lambda,
            "targets": [t.to_json() for t in self.targets],
            "break_even": self.break_even.to_json(),
            "budget": self.budget.to_json(),
            "cautions": list(self.cautions),
            "notes": list(self.notes),
            # Only where the device maps the code's qubits, so documents of devices without do not change.
            **({"placements": {d: list(q) for d, q in self.placements.items()}} if self.placements else {}),
        })
