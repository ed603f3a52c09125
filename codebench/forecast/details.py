"""The method-specific numbers of one distance of a forecast (``DistanceForecast.details``).

:class:`DirectDetails` (direct sampling at the device's noise), :class:`ExtrapolatedDetails` (the
raised-noise power law: :class:`RaisedPoint` per scale and the :class:`PowerLawFit`) and
:class:`StratifiedDetails` (sampling by fault count: :class:`SpectrumPoint` per stratum and the
:class:`SpectrumSummary` of the estimate). Each ``to_json()`` gives the keys that follow the method's
in the row's JSON, in their fixed order.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Union

from codebench.forecast.rare_events import SpectrumVariant

__all__ = [
    "DirectDetails", "ExtrapolatedDetails", "MethodDetails", "PowerLawFit", "RaisedPoint", "SpectrumPoint",
    "SpectrumSummary", "StratifiedDetails",
]


@dataclass(frozen=True)
class DirectDetails:
    """Direct sampling at the device's own noise (scale 1)."""

    scales: tuple[float, ...] = (1.0,)

    def to_json(self) -> dict[str, Any]:
        return {"scales": list(self.scales)}


@dataclass(frozen=True)
class RaisedPoint:
    """Counts at one raised noise scale, with the per-round rate and its 95% Wilson interval."""

    scale: float
    shots: int
    failures: int
    per_round_rate: float | None
    low: float | None
    high: float | None

    def to_json(self) -> dict[str, Any]:
        return {"scale": self.scale, "shots": self.shots, "failures": self.failures,
                "per_round_rate": self.per_round_rate, "low": self.low, "high": self.high}


@dataclass(frozen=True)
class PowerLawFit:
    """The free-exponent fit ln eps = a + b ln s over the raised scales."""

    exponent: float
    exponent_se: float
    exponent_nominal: float
    fit_chi2: float
    fit_dof: int
    fit_inflation: float
    interval: str

    def to_json(self) -> dict[str, Any]:
        return {"exponent": self.exponent, "exponent_se": self.exponent_se,
                "exponent_nominal": self.exponent_nominal, "fit_chi2": self.fit_chi2, "fit_dof": self.fit_dof,
                "fit_inflation": self.fit_inflation, "interval": self.interval}


@dataclass(frozen=True)
class ExtrapolatedDetails:
    """The raised-noise power law: the scales, their counts and (with two usable scales) the fit."""

    scales: tuple[float, ...]
    points: tuple[RaisedPoint, ...]
    fit: PowerLawFit | None = None

    @property
    def exponent(self) -> float | None:
        return None if self.fit is None else self.fit.exponent

    def to_json(self) -> dict[str, Any]:
        out: dict[str, Any] = {"scales": list(self.scales), "points": [p.to_json() for p in self.points]}
        if self.fit is not None:
            out.update(self.fit.to_json())
        return out


@dataclass(frozen=True)
class SpectrumPoint:
    """Counts of one stratum: shots with exactly ``w`` faults."""

    w: int
    shots: int
    failures: int

    def to_json(self) -> dict[str, Any]:
        return {"w": self.w, "shots": self.shots, "failures": self.failures}


@dataclass(frozen=True)
class SpectrumSummary:
    """How the stratified estimate was made (present when some stratum failed)."""

    w_dominant: tuple[int, int]
    model_share: float
    spectrum_onset: int
    spectrum_terms: int
    tail_bound: float
    spectrum_variants: tuple[SpectrumVariant, ...]
    per_experiment: tuple[float, float, float]

    def to_json(self) -> dict[str, Any]:
        return {"w_dominant": list(self.w_dominant), "model_share": self.model_share,
                "spectrum_onset": self.spectrum_onset, "spectrum_terms": self.spectrum_terms,
                "tail_bound": self.tail_bound, "spectrum_variants": [v.to_json() for v in self.spectrum_variants],
                "per_experiment": list(self.per_experiment)}


@dataclass(frozen=True)
class StratifiedDetails:
    """Stratified sampling by fault count: the strata, the estimate's make-up, the detector error model size."""

    w_sampled: tuple[int, int] | None
    mean_faults: float
    spectrum: tuple[SpectrumPoint, ...]
    extrapolated_in_w: bool | None
    summary: SpectrumSummary | None
    mechanisms: int
    table_reused_from: str | None

    @property
    def w_dominant(self) -> tuple[int, int] | None:
        return None if self.summary is None else self.summary.w_dominant

    def to_json(self) -> dict[str, Any]:
        out: dict[str, Any] = {
            "w_sampled": None if self.w_sampled is None else list(self.w_sampled), "mean_faults": self.mean_faults,
            "spectrum": [p.to_json() for p in self.spectrum], "extrapolated_in_w": self.extrapolated_in_w,
        }
        if self.summary is not None:
            out.update(self.summary.to_json())
        out.update({"mechanisms": self.mechanisms, "table_reused_from": self.table_reused_from})
        return out


MethodDetails = Union[DirectDetails, ExtrapolatedDetails, StratifiedDetails]
