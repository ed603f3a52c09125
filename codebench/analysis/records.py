"""Typed records of the fits: one frozen dataclass per kind of estimate.

Every record carries its family (:class:`~codebench.analysis.families.FamilyId`)
and, through :meth:`to_json`, gives the JSON object the analysis has always
written: the family's keys first (``code, basis, noise, decoder, rounds``),
then the record's own, with the quantity it uses under ``"quantity"``. Keys
and their order are fixed; ``codebench analyze --format json``, the report
and the figures read them. Attribute names are the JSON keys, except
``lam`` for ``"lambda"`` (a Python keyword); ``method``, ``quantity`` and
``definition`` are constants of each record type.

Numbers are plain Python values (no numpy scalars); a missing end of an
interval is ``None``.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, ClassVar, Sequence, Union

from codebench.analysis.families import FamilyId

#: Covariance of (ln C, ln Lambda) of a Lambda fit, row by row.
LogCov = tuple[tuple[float, ...], ...]

PSEUDO_DEFINITION = "p at which the per-round logical error rate equals p"


@dataclass(frozen=True)
class CrossingThreshold:
    """Where the curves of two consecutive distances cross, with a bootstrap interval.

    ``quantity`` is ``failure_rate`` (the whole experiment: a threshold estimate) or
    ``per_round_rate`` (the per-round curves, which cross elsewhere at finite d).
    """

    family: FamilyId
    distances: tuple[int, int]
    threshold: float
    low: float | None
    high: float | None
    bootstrap: int
    valid_bootstrap: int
    quantity: str = "failure_rate"

    method: ClassVar[str] = "crossing"

    def to_json(self) -> dict[str, Any]:
        return {
            **self.family.to_json(), "method": self.method, "quantity": self.quantity,
            "distances": list(self.distances), "threshold": self.threshold, "low": self.low, "high": self.high,
            "bootstrap": self.bootstrap, "valid_bootstrap": self.valid_bootstrap,
        }


@dataclass(frozen=True)
class FssThreshold:
    """The finite-size-scaling fit P = A + B x + C x^2, x = (p - p_th) d^(1/nu), near the crossings."""

    family: FamilyId
    distances: tuple[int, ...]
    threshold: float
    low: float | None
    high: float | None
    nu: float
    nu_low: float | None
    nu_high: float | None
    A: float
    B: float
    C: float
    window: tuple[float, float]
    points: int
    deviance: float
    dof: int
    gof_p_value: float | None
    interval: str

    method: ClassVar[str] = "finite_size_scaling"
    quantity: ClassVar[str] = "failure_rate"

    def to_json(self) -> dict[str, Any]:
        return {
            **self.family.to_json(), "method": self.method, "quantity": self.quantity,
            "distances": list(self.distances), "threshold": self.threshold, "low": self.low, "high": self.high,
            "nu": self.nu, "nu_low": self.nu_low, "nu_high": self.nu_high,
            "A": self.A, "B": self.B, "C": self.C,
            "window": list(self.window), "points": self.points,
            "deviance": self.deviance, "dof": self.dof, "gof_p_value": self.gof_p_value, "interval": self.interval,
        }


#: A threshold estimate of either method.
ThresholdEstimate = Union[CrossingThreshold, FssThreshold]


@dataclass(frozen=True)
class PseudoThreshold:
    """The p at which the per-round logical error rate of one distance equals p."""

    family: FamilyId
    distance: int
    pseudo_threshold: float
    low: float | None
    high: float | None
    bootstrap: int
    valid_bootstrap: int

    definition: ClassVar[str] = PSEUDO_DEFINITION
    quantity: ClassVar[str] = "per_round_rate"

    def to_json(self) -> dict[str, Any]:
        return {
            **self.family.to_json(), "distance": self.distance, "pseudo_threshold": self.pseudo_threshold,
            "low": self.low, "high": self.high, "definition": self.definition, "quantity": self.quantity,
            "bootstrap": self.bootstrap, "valid_bootstrap": self.valid_bootstrap,
        }


@dataclass(frozen=True)
class LambdaEstimate:
    """Lambda at one p from eps_d = C / Lambda^((d + 1) / 2), weighted least squares in ln eps.

    ``log_cov`` is the 2 x 2 covariance of (ln C, ln Lambda); ``None`` only in
    hand-made records, whose projections then use the Lambda interval alone.
    """

    family: FamilyId
    p: float
    lam: float
    low: float
    high: float
    distances: tuple[int, ...]
    C: float
    chi2: float
    dof: int
    inflation: float
    ln_lambda_se: float
    log_cov: LogCov | None
    #: p is at least half the threshold estimate, or the interval reaches Lambda <= 1 (weak suppression).
    near_threshold: bool = False

    method: ClassVar[str] = "weighted_log_fit"
    quantity: ClassVar[str] = "per_round_rate"

    def to_json(self) -> dict[str, Any]:
        return {
            **self.family.to_json(), "p": self.p, "lambda": self.lam, "low": self.low, "high": self.high,
            "distances": list(self.distances), "C": self.C, "method": self.method, "quantity": self.quantity,
            "chi2": self.chi2, "dof": self.dof, "inflation": self.inflation, "ln_lambda_se": self.ln_lambda_se,
            "log_cov": None if self.log_cov is None else [list(row) for row in self.log_cov],
            "near_threshold": self.near_threshold,
        }


@dataclass(frozen=True)
class LambdaPair:
    """Lambda = (eps_d1 / eps_d2)^(2 / (d2 - d1)) of two consecutive distances at one p."""

    family: FamilyId
    p: float
    distances: tuple[int, int]
    lam: float
    low: float
    high: float

    method: ClassVar[str] = "pair_ratio"
    quantity: ClassVar[str] = "per_round_rate"

    def to_json(self) -> dict[str, Any]:
        return {
            **self.family.to_json(), "p": self.p, "distances": list(self.distances), "lambda": self.lam,
            "low": self.low, "high": self.high, "method": self.method, "quantity": self.quantity,
        }


@dataclass(frozen=True)
class ScalingLaw:
    """The fit eps = A (p / p_th)^((d + 1) / 2) over the below-threshold points of a family."""

    family: FamilyId
    A: float
    A_low: float
    A_high: float
    p_th: float
    p_th_low: float
    p_th_high: float
    points: int
    distances: tuple[int, ...]
    rates: tuple[float, ...]
    chi2: float
    dof: int
    inflation: float

    method: ClassVar[str] = "weighted_log_fit"
    quantity: ClassVar[str] = "per_round_rate"

    def to_json(self) -> dict[str, Any]:
        return {
            **self.family.to_json(), "A": self.A, "A_low": self.A_low, "A_high": self.A_high,
            "p_th": self.p_th, "p_th_low": self.p_th_low, "p_th_high": self.p_th_high,
            "points": self.points, "distances": list(self.distances), "rates": list(self.rates),
            "chi2": self.chi2, "dof": self.dof, "inflation": self.inflation,
            "method": self.method, "quantity": self.quantity,
        }


@dataclass(frozen=True)
class Projection:
    """Smallest distance (and qubits) whose projected per-round rate reaches ``target``, from one Lambda fit.

    Unreachable ends are ``None``; ``extrapolation`` is ``None`` without a
    central distance, else whether it lies outside ``fitted_distances``.
    """

    family: FamilyId
    p: float
    target: float
    lam: float
    distance: int | None
    qubits: int | None
    distance_low: int | None
    distance_high: int | None
    qubits_low: int | None
    qubits_high: int | None
    reachable: bool
    extrapolation: bool | None
    fitted_distances: tuple[int, ...]
    range_from: str
    max_distance_searched: int

    def to_json(self) -> dict[str, Any]:
        return {
            **self.family.to_json(), "p": self.p, "target": self.target, "lambda": self.lam,
            "distance": self.distance, "qubits": self.qubits,
            "distance_low": self.distance_low, "distance_high": self.distance_high,
            "qubits_low": self.qubits_low, "qubits_high": self.qubits_high,
            "reachable": self.reachable, "extrapolation": self.extrapolation,
            "fitted_distances": list(self.fitted_distances), "range_from": self.range_from,
            "max_distance_searched": self.max_distance_searched,
        }


def best_threshold(records: Sequence[ThresholdEstimate]) -> ThresholdEstimate | None:
    """The finite-size-scaling record if any, else the crossing of the largest distance pair, else None."""
    for record in records:
        if isinstance(record, FssThreshold):
            return record
    crossings = [r for r in records if isinstance(r, CrossingThreshold)]
    if not crossings:
        return None
    return max(crossings, key=lambda r: r.distances)


__all__ = [
    "PSEUDO_DEFINITION", "CrossingThreshold", "LambdaEstimate", "LambdaPair", "LogCov", "Projection",
    "PseudoThreshold", "ScalingLaw", "FssThreshold", "ThresholdEstimate", "best_threshold",
]
