"""Thresholds and pseudo-thresholds of a family of points: the three estimates, and the choice among them.

Three estimates, each returning ``(records, notes)``: typed records
(:mod:`codebench.analysis.records`), and one-line notes saying why an
estimate is missing. Each lives in a module of its own:

* :func:`crossing_thresholds` (:mod:`~codebench.analysis.crossings`) --
  where the whole-experiment failure curves of two consecutive distances
  cross, with a parametric bootstrap interval.
* :func:`fss_threshold` (:mod:`~codebench.analysis.finite_size_scaling`) --
  a finite-size-scaling fit P = A + B x + C x^2, x = (p - p_th) d^(1/nu),
  by binomial maximum likelihood over a window around the crossings, with
  Wald intervals from the numerical Hessian of the negative log-likelihood.
* :func:`pseudo_thresholds` (:mod:`~codebench.analysis.pseudo`) -- per
  distance, the p at which the per-round logical error rate equals p.

The curves they read and the sign changes they look for are in
:mod:`~codebench.analysis.curves`; :func:`best_threshold` picks the estimate
the Lambda fits use as "below threshold".

Thresholds use the failure probability of the whole memory experiment
(column ``failure_rate``), as is usual when rounds grow with d (or for code
capacity, or one round); per-round curves cross elsewhere at finite d.
Every record names the quantity it uses under ``"quantity"``.
"""

from __future__ import annotations

from codebench.analysis.crossings import crossing_thresholds
from codebench.analysis.finite_size_scaling import fss_threshold
from codebench.analysis.pseudo import pseudo_thresholds
from codebench.analysis.records import (
    PSEUDO_DEFINITION,
    CrossingThreshold,
    FssThreshold,
    PseudoThreshold,
    ThresholdEstimate,
    best_threshold,
)

__all__ = [
    "PSEUDO_DEFINITION", "CrossingThreshold", "FssThreshold", "PseudoThreshold", "ThresholdEstimate",
    "best_threshold", "crossing_thresholds", "fss_threshold", "pseudo_thresholds",
]
