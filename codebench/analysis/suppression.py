"""Error suppression with distance: Lambda fits and the scaling-law fit.

Definitions
-----------
The per-round logical error rate at distance ``d`` is modelled as

    eps_d = C / Lambda^((d + 1) / 2)

(Acharya et al., Nature 638, 920 (2025), Eq. 1), so for consecutive odd
distances Lambda = eps_d / eps_(d+2). The same exponent (d + 1) / 2 is kept
for every code family, including the repetition code (any d >= 2): Lambda is
always the suppression factor *per step of 2 in d*, and a pair (d1, d2) gives
Lambda = (eps_d1 / eps_d2)^(2 / (d2 - d1)).

The scaling-law fit is eps = A (p / p_th)^((d + 1) / 2) over the points below
threshold (Fowler et al., PRA 86, 032324 (2012), Eqs. 10-11).

Uncertainties
-------------
Every point is k failures in n shots over r rounds. With P = k / n and
var(P) = P (1 - P) / n, the per-round rate is eps = (1 - (1 - 2 P)^(1/r)) / 2
(:func:`codebench.stats.per_round`) with d eps / d P = (1 - 2 P)^(1/r - 1) / r,
and by the delta method var(ln eps) = var(P) (d eps / d P)^2 / eps^2. The fits
are weighted least squares in ln eps with weights 1 / var(ln eps). With two
points the fit is exact and its interval is the propagated one; with three or
more, the parameter covariance is multiplied by chi2 / dof when that exceeds 1
(scatter beyond the counting noise widens the interval; it is never narrowed).
95% intervals come from the normal quantile on the log of the parameter, so
they are asymmetric in Lambda, A and p_th.

Points left out
---------------
Points with no failures (k = 0) have no finite log and are left out of every
fit (no upper-limit treatment), with a note; so are points with P >= 1/2,
whose per-round rate is saturated.

Which distances a Lambda fit uses does not depend on any threshold estimate:
at each p the distances are taken in increasing order for as long as the
per-round rate eps keeps decreasing (the first distance whose eps is not
below the previous one ends the run), so Lambda is given at every p where
the rates fall with d. Thresholds are estimated from whole-experiment
failure rates, which cross at other p than per-round rates do; mixing the
two would drop a Lambda where the per-round rates still fall. A fit is
flagged ``near_threshold`` when p is at least half the threshold estimate
or its interval reaches Lambda <= 1: suppression there is weak and the
fitted exponent may not hold at larger d.

The scaling-law fit, a model of the region below threshold, keeps p <
``threshold`` when a threshold estimate is given (the decreasing runs
otherwise).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import numpy.typing as npt
import pandas as pd

from codebench.analysis.families import Family
from codebench.analysis.records import LambdaEstimate, LambdaPair, ScalingLaw
from codebench.stats import Z95

FloatArray = npt.NDArray[np.float64]

#: A Lambda fit at p >= this fraction of the threshold estimate is flagged as near threshold.
NEAR_THRESHOLD_FRACTION = 0.5
#: Smallest number of points, distances and rates the scaling-law fit needs.
SCALING_MIN_POINTS = 3
SCALING_MIN_DISTANCES = 2
SCALING_MIN_RATES = 2


@dataclass(frozen=True)
class Points:
    """Usable points of a family: one entry per (distance, p), counts merged.

    Attributes
    ----------
    distance, p, shots, failures, rounds : numpy.ndarray
        Per point.
    eps : numpy.ndarray
        Per-round logical error rate from the counts.
    var_log : numpy.ndarray
        Delta-method variance of ``ln eps``.
    """

    distance: npt.NDArray[np.int64]
    p: FloatArray
    shots: FloatArray
    failures: FloatArray
    rounds: FloatArray
    eps: FloatArray
    var_log: FloatArray

    def take(self, mask: npt.NDArray[Any]) -> Points:
        """The points selected by ``mask`` (a boolean mask or an index array)."""
        return Points(self.distance[mask], self.p[mask], self.shots[mask], self.failures[mask],
                      self.rounds[mask], self.eps[mask], self.var_log[mask])

    def __len__(self) -> int:
        return int(self.distance.size)


def per_round_with_variance(failures: npt.ArrayLike, shots: npt.ArrayLike,
                            rounds: npt.ArrayLike) -> tuple[FloatArray, FloatArray]:
    """Per-round rate and the delta-method variance of its log, vectorised.

    Parameters
    ----------
    failures, shots, rounds : array_like
        Counts k, n and rounds r per point (0 < k, P = k / n < 1/2, r >= 1).

    Returns
    -------
    eps : numpy.ndarray
        (1 - (1 - 2 P)^(1/r)) / 2.
    var_log : numpy.ndarray
        P (1 - P) / n * ((1 - 2 P)^(1/r - 1) / r)^2 / eps^2.

    Examples
    --------
    >>> eps, var = per_round_with_variance([200], [1000], [25])
    >>> round(float(eps[0]), 13)
    0.0101128426449
    """
    k = np.asarray(failures, dtype=np.float64)
    n = np.asarray(shots, dtype=np.float64)
    r = np.asarray(rounds, dtype=np.float64)
    total = k / n
    eps = -np.expm1(np.log1p(-2.0 * total) / r) / 2.0
    slope = np.exp((1.0 / r - 1.0) * np.log1p(-2.0 * total)) / r
    var_log = total * (1.0 - total) / n * slope**2 / eps**2
    return eps, var_log


def usable_points(family: Family) -> tuple[Points, list[str]]:
    """Points of ``family`` that can enter a log fit, and notes on those left out.

    Rows with the same (distance, p) are merged (shots and failures summed).
    """
    frame = family.frame
    prefix = f"{family.describe()}: "
    if frame.empty:
        empty = np.zeros(0)
        return Points(np.zeros(0, dtype=np.int64), empty, empty, empty, empty, empty, empty), []
    # Merge rates equal up to rounding so that one p is one group.
    p_raw = frame["p"].to_numpy(dtype=np.float64)
    p_key = np.array([float(f"{x:.12g}") for x in p_raw])
    merged = (
        pd.DataFrame({
            "distance": frame["distance"].to_numpy(dtype=np.int64),
            "rounds": frame["rounds"].to_numpy(dtype=np.float64),
            "p": p_key,
            "shots": frame["shots"].to_numpy(dtype=np.float64),
            "failures": frame["failures"].to_numpy(dtype=np.float64),
        })
        .groupby(["distance", "rounds", "p"], as_index=False, sort=True)[["shots", "failures"]]
        .sum()
        .sort_values(["p", "distance"], kind="stable")
    )
    d = merged["distance"].to_numpy(dtype=np.int64)
    p = merged["p"].to_numpy(dtype=np.float64)
    n = merged["shots"].to_numpy(dtype=np.float64)
    k = merged["failures"].to_numpy(dtype=np.float64)
    r = merged["rounds"].to_numpy(dtype=np.float64)
    notes: list[str] = []
    zero = k <= 0
    saturated = (n > 0) & (k / np.where(n > 0, n, 1.0) >= 0.5)
    if zero.any():
        notes.append(prefix + "left out of the log fits (0 failures, no upper-limit treatment): "
                     + _list_points(d[zero], p[zero]))
    if saturated.any():
        notes.append(prefix + "left out of the log fits (failure probability >= 1/2, per-round rate "
                     "saturated): " + _list_points(d[saturated], p[saturated]))
    keep = ~zero & ~saturated & (n > 0) & (r >= 1)
    d, p, n, k, r = d[keep], p[keep], n[keep], k[keep], r[keep]
    eps, var_log = per_round_with_variance(k, n, r)
    return Points(d, p, n, k, r, eps, var_log), notes


def _list_points(distances: npt.NDArray[np.int64], rates: FloatArray) -> str:
    return ", ".join(f"d={int(d)} p={float(p):.6g}" for d, p in zip(distances, rates))


def below_threshold(points: Points, threshold: float | None) -> npt.NDArray[np.bool_]:
    """Mask of the points counted as below threshold (see the module docstring)."""
    if threshold is not None:
        return np.asarray(points.p < threshold, dtype=np.bool_)
    mask = np.zeros(len(points), dtype=np.bool_)
    for p in np.unique(points.p):
        index = np.flatnonzero(points.p == p)
        index = index[np.argsort(points.distance[index], kind="stable")]
        eps = points.eps[index]
        # Keep the run of distances, from the smallest, over which eps decreases.
        rises = np.flatnonzero(np.diff(eps) >= 0)
        stop = index.size if rises.size == 0 else int(rises[0]) + 1
        mask[index[:stop]] = True
    return mask


@dataclass(frozen=True)
class LinearFit:
    """Weighted least squares y = X beta: estimates, covariance and goodness of fit.

    ``cov`` is already multiplied by chi2 / dof when dof > 0 and chi2 / dof > 1.
    """

    beta: FloatArray
    cov: FloatArray
    chi2: float
    dof: int
    inflation: float


def weighted_fit(design: FloatArray, y: FloatArray, variance: FloatArray) -> LinearFit:
    """Weighted least squares with weights ``1 / variance``.

    Parameters
    ----------
    design : numpy.ndarray
        (n, m) design matrix, rank m.
    y, variance : numpy.ndarray
        Observations and their variances.

    Examples
    --------
    >>> x = np.array([[1.0, 0.0], [1.0, 1.0], [1.0, 2.0]])
    >>> fit = weighted_fit(x, np.array([1.0, 3.0, 5.0]), np.ones(3))
    >>> [round(float(b), 12) for b in fit.beta], fit.dof
    ([1.0, 2.0], 1)
    """
    w = 1.0 / variance
    xtw = design.T * w
    normal = xtw @ design
    cov = np.asarray(np.linalg.inv(normal), dtype=np.float64)
    beta = np.asarray(cov @ (xtw @ y), dtype=np.float64)
    resid = y - design @ beta
    chi2 = float(np.sum(w * resid**2))
    dof = int(y.size - design.shape[1])
    inflation = 1.0
    if dof > 0 and chi2 / dof > 1.0:
        inflation = chi2 / dof
        cov = cov * inflation
    return LinearFit(beta, cov, chi2, dof, inflation)


def _log_interval(log_value: float, log_var: float) -> tuple[float, float, float]:
    """(value, low, high) from a normal 95% interval on the log."""
    half = Z95 * float(np.sqrt(max(log_var, 0.0)))
    return float(np.exp(log_value)), float(np.exp(log_value - half)), float(np.exp(log_value + half))


@dataclass(frozen=True)
class LambdaFit:
    """Lambda from eps_d = C / Lambda^((d + 1) / 2), weighted least squares in ln eps.

    ``log_cov`` is the 2 x 2 covariance of (ln C, ln Lambda).
    """

    lam: float
    low: float
    high: float
    C: float
    log_cov: list[list[float]]
    chi2: float
    dof: int
    inflation: float
    ln_lambda_se: float
    distances: list[int]


def fit_lambda(distances: npt.ArrayLike, log_eps: npt.ArrayLike, var_log: npt.ArrayLike) -> LambdaFit:
    """The Lambda fit over distances with ln eps and var(ln eps) (at least two distinct distances).

    Shared by :func:`lambda_fits` and the device forecast.

    >>> fit = fit_lambda([3, 5], np.log([1e-3, 2.5e-4]), [0.01, 0.01])
    >>> round(fit.lam, 9), fit.distances
    (4.0, [3, 5])
    """
    d = np.asarray(distances, dtype=np.float64)
    x = -(d + 1.0) / 2.0
    fit = weighted_fit(np.column_stack([np.ones_like(x), x]), np.asarray(log_eps, dtype=np.float64),
                       np.asarray(var_log, dtype=np.float64))
    lam, low, high = _log_interval(float(fit.beta[1]), float(fit.cov[1, 1]))
    return LambdaFit(lam, low, high, float(np.exp(fit.beta[0])), [[float(v) for v in row] for row in fit.cov],
                     fit.chi2, fit.dof, float(fit.inflation), float(np.sqrt(fit.cov[1, 1])),
                     [int(v) for v in d])


def lambda_pair(d1: int, d2: int, log_eps1: float, log_eps2: float, var1: float, var2: float) -> tuple[float, float, float]:
    """Lambda = (eps_d1 / eps_d2)^(2 / (d2 - d1)) with its 95% interval (lambda, low, high).

    >>> [round(v, 6) for v in lambda_pair(3, 5, float(np.log(1e-3)), float(np.log(2.5e-4)), 0.0, 0.0)]
    [4.0, 4.0, 4.0]
    """
    scale = 2.0 / (d2 - d1)
    return _log_interval(scale * (log_eps1 - log_eps2), scale**2 * (var1 + var2))


def _all_finite(*values: float) -> bool:
    return all(np.isfinite(value) for value in values)


def lambda_fits(family: Family, threshold: float | None) -> tuple[list[LambdaEstimate], list[LambdaPair], list[str]]:
    """Lambda at each p where the per-round rates of at least two distances fall with d.

    Parameters
    ----------
    family : Family
        One curve family.
    threshold : float or None
        Threshold estimate, used only to flag fits near it (see the module
        docstring); the distances are those over which eps decreases at each p.

    Returns
    -------
    fits : list of LambdaEstimate
        One record per p, whose ``log_cov`` is the 2 x 2 covariance of
        (ln C, ln Lambda) used by :func:`codebench.analysis.projections.project`.
    pairs : list of LambdaPair
        One record per consecutive pair of those distances at each p, with
        lambda = (eps_d1 / eps_d2)^(2 / (d2 - d1)).
    notes : list of str
        Why a fit is missing.
    """
    prefix = f"{family.describe()}: "
    points, notes = usable_points(family)
    selected = points.take(below_threshold(points, None))
    fits: list[LambdaEstimate] = []
    pairs: list[LambdaPair] = []
    missing: list[str] = []
    for p in np.unique(points.p):
        at_p = selected.take(selected.p == p)
        order = np.argsort(at_p.distance, kind="stable")
        at_p = at_p.take(order)
        if np.unique(at_p.distance).size < 2:
            missing.append(f"{float(p):.6g}")
            continue
        y = np.log(at_p.eps)
        fit = fit_lambda(at_p.distance, y, at_p.var_log)
        if _all_finite(fit.lam, fit.low, fit.high, fit.C, fit.chi2):
            near = fit.low <= 1.0 or (threshold is not None and p >= NEAR_THRESHOLD_FRACTION * threshold)
            fits.append(LambdaEstimate(
                family.id, float(p), fit.lam, fit.low, fit.high, tuple(fit.distances), fit.C, fit.chi2, fit.dof,
                fit.inflation, fit.ln_lambda_se, tuple(tuple(row) for row in fit.log_cov), bool(near)))
        else:
            notes.append(prefix + f"Lambda fit at p={float(p):.6g} is not finite; left out.")
        for i in range(len(at_p) - 1):
            d1, d2 = int(at_p.distance[i]), int(at_p.distance[i + 1])
            lam, low, high = lambda_pair(d1, d2, float(y[i]), float(y[i + 1]), float(at_p.var_log[i]),
                                         float(at_p.var_log[i + 1]))
            if _all_finite(lam, low, high):
                pairs.append(LambdaPair(family.id, float(p), (d1, d2), lam, low, high))
    if missing:
        notes.append(prefix + "no Lambda fit at p = " + ", ".join(missing)
                     + " (the per-round rate does not fall from the smallest distance with failures to the next).")
    if points.p.size == 0:
        notes.append(prefix + "no Lambda fit: no point with failures.")
    return fits, pairs, notes


def scaling_law_fit(family: Family, threshold: float | None) -> tuple[list[ScalingLaw], list[str]]:
    """Fit eps = A (p / p_th)^((d + 1) / 2) over the below-threshold points.

    The model is linear in (ln A, ln p_th): ln eps - ((d + 1) / 2) ln p =
    ln A - ((d + 1) / 2) ln p_th, fitted by weighted least squares with
    weights 1 / var(ln eps).

    Parameters
    ----------
    family : Family
        One curve family.
    threshold : float or None
        Threshold estimate (see :func:`lambda_fits` for ``None``).

    Returns
    -------
    records : list of ScalingLaw
        At most one.
    notes : list of str
        Why the fit is missing. Needs >= 3 points spanning >= 2 distances and
        >= 2 values of p.
    """
    prefix = f"{family.describe()}: "
    points, _ = usable_points(family)  # the notes on left-out points come from lambda_fits
    selected = points.take(below_threshold(points, threshold))
    distances = np.unique(selected.distance)
    rates = np.unique(selected.p)
    if len(selected) < SCALING_MIN_POINTS or distances.size < SCALING_MIN_DISTANCES or rates.size < SCALING_MIN_RATES:
        return [], [prefix + f"no scaling-law fit: needs >= {SCALING_MIN_POINTS} below-threshold points "
                    f"with failures spanning >= {SCALING_MIN_DISTANCES} distances and >= "
                    f"{SCALING_MIN_RATES} values of p; have {len(selected)} points, {distances.size} "
                    f"distances, {rates.size} values of p."]
    half = (selected.distance.astype(np.float64) + 1.0) / 2.0
    y = np.log(selected.eps) - half * np.log(selected.p)
    fit = weighted_fit(np.column_stack([np.ones_like(half), -half]), y, selected.var_log)
    a, a_low, a_high = _log_interval(float(fit.beta[0]), float(fit.cov[0, 0]))
    p_th, p_low, p_high = _log_interval(float(fit.beta[1]), float(fit.cov[1, 1]))
    if not _all_finite(a, a_low, a_high, p_th, p_low, p_high, fit.chi2):
        return [], [prefix + "scaling-law fit is not finite; left out."]
    return [ScalingLaw(family.id, a, a_low, a_high, p_th, p_low, p_high, len(selected),
                       tuple(int(d) for d in distances), tuple(float(p) for p in rates), fit.chi2, fit.dof,
                       float(fit.inflation))], []


__all__ = [
    "LinearFit", "Points", "below_threshold", "lambda_fits", "per_round_with_variance",
    "scaling_law_fit", "usable_points", "weighted_fit",
]
