"""Projections: the distance and qubit count that reach a target per-round rate.

From a Lambda fit at one p (:func:`codebench.analysis.suppression.lambda_fits`),
eps_d = C / Lambda^((d + 1) / 2) (Acharya et al., Nature 638, 920 (2025),
Eq. 1). For each target t the projected distance is the smallest distance the
code family allows (``distance_problem(d) is None``, searched up to
:data:`MAX_DISTANCE`) with eps_d <= t; the physical qubits are the code
family's own ``qubit_count(d)``.

Range
-----
When the record carries ``log_cov`` (the covariance of (ln C, ln Lambda) from
the fit), the range uses the pointwise 95% band of the predicted ln eps_d,
ln C - ((d + 1) / 2) ln Lambda +- 1.96 sd_d, which propagates the uncertainty
of C and Lambda together with their correlation: ``distance_low`` is the
smallest d whose lower band reaches t, ``distance_high`` the smallest d whose
upper band does. Far from the data the band's slope tends to that of the
Lambda interval ends, so the high end of Lambda gives the smaller distance.
Without ``log_cov`` the range comes from the Lambda interval ends only, with
C held at its fitted value.

A target is unreachable by growing d when Lambda <= 1: the distance is then
``None`` with a note, never a made-up number. When only the interval reaches
below 1 (or the band never reaches t by :data:`MAX_DISTANCE`),
``distance_high`` is ``None``. Every projection beyond the fitted distances
is an extrapolation and is flagged as such, with the fitted distances.
"""

from __future__ import annotations

from functools import lru_cache
from typing import Sequence

import numpy as np
import numpy.typing as npt

from codebench.analysis.families import Family
from codebench.analysis.records import LambdaEstimate, Projection
from codebench.codes import get_code_family
from codebench.stats import Z95

#: Largest distance searched for a projection.
MAX_DISTANCE = 1001


@lru_cache(maxsize=None)
def _allowed_distances(code: str) -> npt.NDArray[np.int64]:
    family = get_code_family(code)
    return np.array([d for d in range(1, MAX_DISTANCE + 1) if family.distance_problem(d) is None],
                    dtype=np.int64)


@lru_cache(maxsize=4096)
def _qubits(code: str, distance: int) -> int:
    return int(get_code_family(code).qubit_count(distance))


def _first_reaching(distances: npt.NDArray[np.int64], log_eps: npt.NDArray[np.float64],
                    log_target: float) -> int | None:
    """Smallest distance whose ``log_eps`` is at or below ``log_target``."""
    hits = np.flatnonzero(log_eps <= log_target)
    return None if hits.size == 0 else int(distances[hits[0]])


def distances_for_target(
    distances: npt.NDArray[np.int64],
    log_c: float,
    log_lambda: float,
    log_target: float,
    log_cov: npt.NDArray[np.float64] | None,
    lambda_low: float,
    lambda_high: float,
) -> tuple[int | None, int | None, int | None]:
    """(central, low, high) projected distance for one target.

    Parameters
    ----------
    distances : numpy.ndarray
        Allowed distances, increasing.
    log_c, log_lambda : float
        Fitted ln C and ln Lambda.
    log_target : float
        ln of the target per-round rate.
    log_cov : numpy.ndarray or None
        Covariance of (ln C, ln Lambda); ``None`` uses the Lambda interval only.
    lambda_low, lambda_high : float
        Ends of the Lambda interval (used when ``log_cov`` is ``None``).

    Returns
    -------
    tuple of (int or None)
        ``None`` where the target is never reached (within the search).

    Examples
    --------
    >>> ds = np.arange(3, 102, 2)
    >>> distances_for_target(ds, np.log(0.1), np.log(2.0), np.log(1e-6), None, 2.0, 2.0)
    (33, 33, 33)
    """
    half = (distances.astype(np.float64) + 1.0) / 2.0
    central = None if log_lambda <= 0 else _first_reaching(distances, log_c - half * log_lambda, log_target)
    if log_cov is not None:
        sd = np.sqrt(np.maximum(log_cov[0, 0] - 2.0 * half * log_cov[0, 1] + half**2 * log_cov[1, 1], 0.0))
        predicted = log_c - half * log_lambda
        low = _first_reaching(distances, predicted - Z95 * sd, log_target)
        upper_slope = log_lambda - Z95 * float(np.sqrt(max(log_cov[1, 1], 0.0)))
        high = None if upper_slope <= 0 else _first_reaching(distances, predicted + Z95 * sd, log_target)
    else:
        low = None if lambda_high <= 1 else _first_reaching(
            distances, log_c - half * float(np.log(lambda_high)), log_target)
        high = None if lambda_low <= 1 else _first_reaching(
            distances, log_c - half * float(np.log(lambda_low)), log_target)
    if central is None:
        # Above threshold the band may still dip below t by chance; without a
        # central projection there is no range to report.
        low = None
    return central, low, high


def project(family: Family, lambda_records: Sequence[LambdaEstimate],
            targets: Sequence[float]) -> tuple[list[Projection], list[str]]:
    """Smallest distance and qubit count reaching each target, from each Lambda fit.

    Parameters
    ----------
    family : Family
        The family the Lambda records were fitted on.
    lambda_records : sequence of LambdaEstimate
        Records from :func:`codebench.analysis.suppression.lambda_fits`
        (``log_cov`` may be ``None``, see the module docstring).
    targets : sequence of float
        Target per-round logical error rates, each in (0, 1/2).

    Returns
    -------
    records : list of Projection
        One per (Lambda record, target); unreachable ends are ``None``.
        ``extrapolation`` is true when the distance lies outside the fitted
        distances.
    notes : list of str
        Unreachable targets, open-ended ranges, bad targets.
    """
    prefix = f"{family.describe()}: "
    notes: list[str] = []
    out: list[Projection] = []
    if not lambda_records:
        return out, notes
    good_targets = [float(t) for t in targets if 0.0 < float(t) < 0.5]
    bad = [t for t in targets if not 0.0 < float(t) < 0.5]
    if bad:
        notes.append(prefix + "projection targets outside (0, 1/2) ignored: " + ", ".join(f"{float(t):.6g}" for t in bad))
    try:
        allowed = _allowed_distances(family.code)
    except KeyError:
        return out, notes + [prefix + f"no projection: unknown code family {family.code!r}."]
    for rec in lambda_records:
        p = float(rec.p)
        lam, lam_low, lam_high, c = float(rec.lam), float(rec.low), float(rec.high), float(rec.C)
        fitted = sorted(int(d) for d in rec.distances)
        log_cov = None if rec.log_cov is None else np.asarray(rec.log_cov, dtype=np.float64)
        if lam <= 1.0:
            notes.append(prefix + f"at p={p:.6g}, Lambda = {lam:.4g} <= 1: the targets are unreachable by "
                         "growing the distance (no projection).")
        elif lam_low <= 1.0:
            notes.append(prefix + f"at p={p:.6g}, the Lambda interval reaches {lam_low:.4g} <= 1: the upper "
                         "end of each projected range is unbounded (distance_high = None).")
        unreached: list[str] = []
        for target in good_targets:
            central, low, high = distances_for_target(
                allowed, float(np.log(c)), float(np.log(lam)), float(np.log(target)), log_cov, lam_low, lam_high)
            if lam > 1.0 and central is None:
                unreached.append(f"{target:.3g}")
            out.append(Projection(
                family.id, p, target, lam,
                distance=central, qubits=None if central is None else _qubits(family.code, central),
                distance_low=low, distance_high=high,
                qubits_low=None if low is None else _qubits(family.code, low),
                qubits_high=None if high is None else _qubits(family.code, high),
                reachable=central is not None,
                extrapolation=None if central is None else not fitted[0] <= central <= fitted[-1],
                fitted_distances=tuple(fitted),
                range_from="lambda_interval" if log_cov is None else "prediction_band",
                max_distance_searched=MAX_DISTANCE,
            ))
        if unreached:
            notes.append(prefix + f"at p={p:.6g}, target(s) {', '.join(unreached)} not reached by d = "
                         f"{MAX_DISTANCE} (distance None).")
    return out, notes


__all__ = ["MAX_DISTANCE", "distances_for_target", "project"]
