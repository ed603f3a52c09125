"""Fits a design review asks for: thresholds, pseudo-thresholds, Lambda, scaling law, projections.

:func:`analyze` runs every fit on every family of a results table
(:mod:`codebench.analysis.families`) and returns an :class:`AnalysisResult`:
typed records per family (:mod:`codebench.analysis.records`), whose
``to_json()`` is the JSON document of ``codebench analyze --format json``.
Where data are too few for a fit, it adds a note saying what is missing
instead of a number.
"""

from __future__ import annotations

from typing import Sequence

import numpy as np
import pandas as pd

from codebench.analysis.comparisons import DecoderComparison, decoder_comparisons
from codebench.analysis.families import Family, FamilyId, group_families
from codebench.analysis.measured import MeasuredComparison, compare_measured
from codebench.analysis.projections import project
from codebench.analysis.records import (
    CrossingThreshold,
    FssThreshold,
    LambdaEstimate,
    LambdaPair,
    Projection,
    PseudoThreshold,
    ScalingLaw,
    ThresholdEstimate,
)
from codebench.analysis.result import AnalysisResult, AnalysisSettings, FamilyAnalysis
from codebench.analysis.suppression import lambda_fits, scaling_law_fit
from codebench.analysis.thresholds import (
    best_threshold,
    crossing_thresholds,
    fss_threshold,
    pseudo_thresholds,
)
from codebench.noise import NOISE_MODELS

DEFAULT_TARGETS = (1e-6, 1e-9, 1e-12)


def threshold_applies(family: Family) -> bool:
    """Whether whole-experiment failure curves of this family can cross at a threshold.

    Rounds must grow with d (``"d"``, ``"2d"``, ...), or the noise model must
    act once (:attr:`codebench.noise.NoiseModel.acts_once`, as code capacity
    does), or there is a single round.
    """
    model = NOISE_MODELS.get(family.noise)
    acts_once = model is not None and model.acts_once
    return family.rounds_rule.endswith("d") or acts_once or family.rounds_rule == "1"


def analyze_family(family: Family, *, targets: Sequence[float], bootstrap: int,
                   rng: np.random.Generator) -> FamilyAnalysis:
    """Every fit of one family, drawing the bootstrap resamples from ``rng`` (in a fixed order)."""
    notes: list[str] = []
    thresholds: list[ThresholdEstimate] = []
    applies = threshold_applies(family)
    if applies:
        crossings, crossing_notes = crossing_thresholds(family, bootstrap=bootstrap, rng=rng)
        thresholds += crossings
        notes += crossing_notes
        fss, fss_notes = fss_threshold(family, bootstrap=bootstrap, rng=rng)
        thresholds += fss
        notes += fss_notes
    else:
        notes.append(f"{family.describe()}: no threshold estimate (fixed number of rounds > 1; "
                     "thresholds need rounds growing with d).")
    pseudo, pseudo_notes = pseudo_thresholds(family, bootstrap=bootstrap, rng=rng)
    notes += pseudo_notes
    # Drawn on the per-round figure; not thresholds (their notes would repeat the threshold notes). A
    # child stream of its own, so the threshold intervals draw exactly the resamples they drew before.
    per_round, _ = crossing_thresholds(family, bootstrap=bootstrap, rng=rng.spawn(1)[0], quantity="per_round_rate")
    chosen = best_threshold(thresholds)
    threshold = None if chosen is None else float(chosen.threshold)
    lambdas, pairs, lambda_notes = lambda_fits(family, threshold)
    notes += lambda_notes
    laws, law_notes = scaling_law_fit(family, threshold)
    notes += law_notes
    projections, projection_notes = project(family, lambdas, targets)
    notes += projection_notes
    return FamilyAnalysis(family.id, applies, tuple(thresholds), tuple(pseudo), tuple(lambdas), tuple(pairs),
                          tuple(laws), tuple(projections), tuple(notes), tuple(per_round))


def analyze(
    frame: pd.DataFrame,
    *,
    targets: Sequence[float] = DEFAULT_TARGETS,
    bootstrap: int = 1000,
    seed: int = 0,
) -> AnalysisResult:
    """Run every fit on every family of ``frame`` (a results table).

    Returns an :class:`AnalysisResult`: per family (``families``) the
    threshold estimates, pseudo-thresholds, Lambda fits and pairs, scaling
    law, projections and the notes on why a fit is missing; the same
    sections over all families as properties; the ``settings``; and
    ``to_json()``.
    """
    rng = np.random.default_rng(seed)
    settings = AnalysisSettings(tuple(targets), bootstrap, seed)
    families = group_families(frame)
    general = () if families else ("no family of points with at least two distances: nothing to fit.",)
    return AnalysisResult(
        tuple(analyze_family(family, targets=targets, bootstrap=bootstrap, rng=rng) for family in families),
        settings, general, compare_measured(frame), decoder_comparisons(frame))


__all__ = [
    "DEFAULT_TARGETS", "AnalysisResult", "DecoderComparison", "decoder_comparisons", "AnalysisSettings", "CrossingThreshold", "Family", "FamilyAnalysis",
    "FamilyId", "FssThreshold", "LambdaEstimate", "MeasuredComparison", "compare_measured", "LambdaPair", "Projection", "PseudoThreshold", "ScalingLaw",
    "ThresholdEstimate", "analyze", "analyze_family", "best_threshold", "crossing_thresholds", "fss_threshold",
    "group_families", "lambda_fits", "project", "pseudo_thresholds", "scaling_law_fit", "threshold_applies",
]
