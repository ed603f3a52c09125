"""What :func:`codebench.analysis.analyze` returns: the fits of every family, typed, and their JSON.

:class:`AnalysisResult` holds one :class:`FamilyAnalysis` per curve family
(in the order of :func:`~codebench.analysis.families.group_families`); its
section properties (``thresholds``, ``lambdas``, ...) list the records of
every family in that order, and :meth:`AnalysisResult.to_json` is the JSON
document of ``codebench analyze --format json``::

    {"thresholds": [...], "pseudo_thresholds": [...], "lambdas": [...],
     "lambda_pairs": [...], "scaling_laws": [...], "projections": [...],
     "notes": [...], "settings": {"targets", "bootstrap", "seed", "confidence"},
     "per_round_crossings": [...]}

``thresholds`` use whole-experiment failure rates; ``per_round_crossings``
are where the per-round curves cross (not thresholds: drawn on the per-round
figure only).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from codebench.analysis.comparisons import DecoderComparison
from codebench.analysis.families import FamilyId
from codebench.analysis.measured import MeasuredComparison
from codebench.analysis.records import (
    CrossingThreshold,
    LambdaEstimate,
    LambdaPair,
    Projection,
    PseudoThreshold,
    ScalingLaw,
    ThresholdEstimate,
    best_threshold,
)

#: Confidence level of every interval of the analysis.
CONFIDENCE = 0.95


@dataclass(frozen=True)
class AnalysisSettings:
    """The options the fits ran with."""

    targets: tuple[float, ...]
    bootstrap: int
    seed: int
    confidence: float = CONFIDENCE

    def to_json(self) -> dict[str, Any]:
        return {"targets": list(self.targets), "bootstrap": self.bootstrap, "seed": self.seed,
                "confidence": self.confidence}


@dataclass(frozen=True)
class FamilyAnalysis:
    """Every fit of one curve family, and the notes on what is missing (each starts with the family).

    ``threshold_applies`` says whether thresholds were estimated at all
    (:func:`codebench.analysis.threshold_applies`).
    """

    family: FamilyId
    threshold_applies: bool
    thresholds: tuple[ThresholdEstimate, ...]
    pseudo_thresholds: tuple[PseudoThreshold, ...]
    lambdas: tuple[LambdaEstimate, ...]
    lambda_pairs: tuple[LambdaPair, ...]
    scaling_laws: tuple[ScalingLaw, ...]
    projections: tuple[Projection, ...]
    notes: tuple[str, ...]
    per_round_crossings: tuple[CrossingThreshold, ...] = ()

    @property
    def best_threshold(self) -> ThresholdEstimate | None:
        """The estimate the Lambda fits took as the threshold (:func:`~codebench.analysis.records.best_threshold`)."""
        return best_threshold(self.thresholds)


@dataclass(frozen=True)
class AnalysisResult:
    """The fits of every family of a results table; ``general_notes`` are those of no one family."""

    families: tuple[FamilyAnalysis, ...]
    settings: AnalysisSettings
    general_notes: tuple[str, ...] = ()
    #: Measured points beside their simulated twins (``codebench lab decode``); in the JSON only when any.
    measured: tuple[MeasuredComparison, ...] = ()
    #: Decoders of one physical point compared on the same shots; in the JSON only when any.
    decoder_comparisons: tuple[DecoderComparison, ...] = ()

    @property
    def thresholds(self) -> tuple[ThresholdEstimate, ...]:
        return tuple(r for f in self.families for r in f.thresholds)

    @property
    def pseudo_thresholds(self) -> tuple[PseudoThreshold, ...]:
        return tuple(r for f in self.families for r in f.pseudo_thresholds)

    @property
    def lambdas(self) -> tuple[LambdaEstimate, ...]:
        return tuple(r for f in self.families for r in f.lambdas)

    @property
    def lambda_pairs(self) -> tuple[LambdaPair, ...]:
        return tuple(r for f in self.families for r in f.lambda_pairs)

    @property
    def scaling_laws(self) -> tuple[ScalingLaw, ...]:
        return tuple(r for f in self.families for r in f.scaling_laws)

    @property
    def projections(self) -> tuple[Projection, ...]:
        return tuple(r for f in self.families for r in f.projections)

    @property
    def per_round_crossings(self) -> tuple[CrossingThreshold, ...]:
        return tuple(r for f in self.families for r in f.per_round_crossings)

    @property
    def notes(self) -> tuple[str, ...]:
        """Every note: the general ones, then each family's."""
        return self.general_notes + tuple(n for f in self.families for n in f.notes)

    def for_family(self, family: FamilyId) -> FamilyAnalysis | None:
        """The fits of ``family`` (None if the table has no such family)."""
        return next((f for f in self.families if f.family == family), None)

    def to_json(self) -> dict[str, Any]:
        """The JSON document of the analysis (plain types; ``json.dumps(..., allow_nan=False)`` works)."""
        return {
            "thresholds": [r.to_json() for r in self.thresholds],
            "pseudo_thresholds": [r.to_json() for r in self.pseudo_thresholds],
            "lambdas": [r.to_json() for r in self.lambdas],
            "lambda_pairs": [r.to_json() for r in self.lambda_pairs],
            "scaling_laws": [r.to_json() for r in self.scaling_laws],
            "projections": [r.to_json() for r in self.projections],
            "notes": list(self.notes),
            "settings": self.settings.to_json(),
            "per_round_crossings": [r.to_json() for r in self.per_round_crossings],
        } | ({"measured": [r.to_json() for r in self.measured]} if self.measured else {}) | (
            {"decoder_comparisons": [r.to_json() for r in self.decoder_comparisons]}
            if self.decoder_comparisons else {})


__all__ = ["CONFIDENCE", "AnalysisResult", "AnalysisSettings", "FamilyAnalysis"]
