"""Finite-size-scaling fit of a family's failure-rate curves near their crossing.

Model: P = A + B x + C x^2 with x = (p - p_th) d^(1/nu), P the failure
probability of the whole memory experiment, fitted by binomial maximum
likelihood over a window around the crossings of consecutive distances
(:mod:`codebench.analysis.crossings`), with Wald intervals from the
numerical Hessian of the negative log-likelihood (:func:`fss_threshold`).
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import numpy.typing as npt
from scipy import optimize as _opt
from scipy import special as _sp
from scipy import stats as _st

from codebench.analysis.curves import (
    FloatArray,
    IntArray,
    corrected,
    family_points,
    pair_crossing,
    percentile_interval,
    shared_rates,
)
from codebench.analysis.families import Family
from codebench.analysis.records import FssThreshold

#: Two-sided 95% normal quantile (Wald intervals of the scaling fit).
Z95 = 1.959963984540054
#: Relative half-widths tried for the scaling-fit window, narrowest first.
WINDOWS = (0.25, 0.3, 0.4, 0.5, 0.6, 0.75, 1.0)
#: Clip of the modelled failure probability inside the likelihood.
CLIP = 1e-12
#: Range allowed for the scaling exponent nu.
NU_BOUNDS = (0.2, 10.0)
#: Refits of the parametric bootstrap used when the Hessian is unusable.
MAX_REFITS = 100


class _ScalingData:
    """Points of the scaling fit, with p in units of the window centre ``pc``.

    The fit parameters are theta = (A, b, c, t, s) with
    u = (p / pc - t) d^(exp(-s)) and P = A + b u + c u^2, so that
    p_th = t pc, nu = exp(s), B = b / pc and C = c / pc^2 in the model
    P = A + B x + C x^2, x = (p - p_th) d^(1/nu). These units keep every
    parameter of order one, which the optimiser and the finite-difference
    Hessian need.
    """

    def __init__(self, p: FloatArray, d: FloatArray, n: FloatArray, k: FloatArray, pc: float) -> None:
        self.q = p / pc
        self.logd = np.log(d)
        self.n = n
        self.k = k
        self.pc = pc
        rate = k / n
        # saturated log-likelihood: deviance = 2 (nll - nll_saturated)
        self.saturated = -float(np.sum(_sp.xlogy(k, rate) + _sp.xlogy(n - k, 1.0 - rate)))

    def model(self, theta: FloatArray) -> tuple[FloatArray, FloatArray, FloatArray]:
        """(P unclipped, u, d^(1/nu)) at theta."""
        a, b, c, t, s = theta
        scale = np.exp(self.logd * np.exp(-s))
        u = (self.q - t) * scale
        return a + b * u + c * u * u, u, scale

    def half_deviance(self, theta: FloatArray) -> float:
        prob = np.clip(self.model(theta)[0], CLIP, 1.0 - CLIP)
        nll = -float(np.sum(self.k * np.log(prob) + (self.n - self.k) * np.log1p(-prob)))
        return nll - self.saturated

    def gradient(self, theta: FloatArray) -> FloatArray:
        raw, u, scale = self.model(theta)
        prob = np.clip(raw, CLIP, 1.0 - CLIP)
        inside = (raw > CLIP) & (raw < 1.0 - CLIP)
        dp = np.where(inside, -(self.k / prob - (self.n - self.k) / (1.0 - prob)), 0.0)
        _, b, c, _, s = theta
        du = b + 2.0 * c * u
        return np.array([
            dp.sum(), (dp * u).sum(), (dp * u * u).sum(),
            (dp * du * -scale).sum(),
            (dp * du * u * self.logd * -np.exp(-s)).sum(),
        ])

    def hessian(self, theta: FloatArray) -> FloatArray:
        """Central differences of the analytic gradient, symmetrised."""
        size = theta.size
        out = np.empty((size, size))
        for i in range(size):
            h = 1e-5 * max(1.0, abs(float(theta[i])))
            up = theta.copy()
            dn = theta.copy()
            up[i] += h
            dn[i] -= h
            out[:, i] = (self.gradient(up) - self.gradient(dn)) / (2.0 * h)
        return (out + out.T) / 2.0

    def start(self, t: float, s: float) -> FloatArray:
        """(A, b, c) by weighted least squares at fixed (t, s), completing theta."""
        theta = np.array([0.0, 0.0, 0.0, t, s])
        _, u, _ = self.model(theta)
        rate = corrected(self.k, self.n)
        weight = np.sqrt(self.n / (rate * (1.0 - rate)))
        design = np.stack([np.ones_like(u), u, u * u], axis=1)
        coef = np.linalg.lstsq(design * weight[:, None], rate * weight, rcond=None)[0]
        return np.concatenate([coef, [t, s]])


def _fit(data: _ScalingData, starts: list[FloatArray], bounds: list[tuple[float | None, float | None]]) -> Any:
    """Best L-BFGS-B minimum of the half deviance over the starting points."""
    best: Any = None
    for theta0 in starts:
        result = _opt.minimize(data.half_deviance, theta0, jac=data.gradient, method="L-BFGS-B", bounds=bounds,
                               options={"maxiter": 2000, "ftol": 1e-13, "gtol": 1e-9})
        if best is None or result.fun < best.fun:
            best = result
    return best


def _window(p: FloatArray, d: IntArray, pc: float) -> tuple[float, npt.NDArray[np.bool_]]:
    """Relative half-width w of the scaling-fit window and the points inside it.

    w is the narrowest of :data:`WINDOWS` holding >= 3 values of p at every
    distance that has >= 3 within the widest window (a distance sampled too
    sparsely near the crossing does not drag the window out to 1).
    """
    distances = np.unique(d)

    def inside(w: float) -> npt.NDArray[np.bool_]:
        return np.asarray(np.abs(p - pc) <= w * pc * (1 + 1e-9), dtype=np.bool_)

    widest = inside(WINDOWS[-1])
    wanted = [dist for dist in distances if np.count_nonzero(widest & (d == dist)) >= 3]
    for w in WINDOWS:
        mask = inside(w)
        if all(np.count_nonzero(mask & (d == dist)) >= 3 for dist in wanted):
            return w, mask
    return WINDOWS[-1], widest


def fss_threshold(
    family: Family, *, bootstrap: int = 200, rng: np.random.Generator
) -> tuple[list[FssThreshold], list[str]]:
    """Finite-size-scaling fit of the failure-rate curves near their crossing.

    Model: P = A + B x + C x^2 with x = (p - p_th) d^(1/nu), P the failure
    probability of the whole memory experiment, fitted by binomial maximum
    likelihood (L-BFGS-B on the negative log-likelihood, P clipped into
    (1e-12, 1 - 1e-12)) to the points with |p - p_c| <= w p_c. p_c is the
    mean of the crossings of consecutive distances (:func:`codebench.analysis.crossings.crossing_thresholds`)
    and w the narrowest of :data:`WINDOWS` that holds >= 3 values of p at
    every distance (see :func:`_window`); p_th is kept inside the window and
    nu inside :data:`NU_BOUNDS`, and a fit that runs to either edge is not
    reported. The fit starts at p_th = p_c with nu = 1 and with nu = 1.5.

    Intervals are Wald intervals from the numerical Hessian of the negative
    log-likelihood in the parameters (p_th / p_c, ln nu), so the nu interval
    is exp(ln nu +- 1.96 se) and stays positive; the covariance is scaled by
    max(1, deviance / dof) when the curves scatter more than binomially
    (quasi-likelihood, common practice). If the Hessian is not positive
    definite, the intervals come from min(``bootstrap``, 100) parametric
    bootstrap refits (counts drawn from the fitted model, so without the
    overdispersion scaling) instead. The record names the method under
    ``"interval"``.

    Goodness of fit: deviance 2 sum[k ln(k / (n P)) + (n - k) ln((n - k) / (n (1 - P)))],
    dof = points - 5 and the chi-square upper tail probability.

    Parameters
    ----------
    family : Family
        The curves.
    bootstrap : int
        Bound on the number of refits of the fall-back interval.
    rng : numpy.random.Generator
        Source of the fall-back resamples.

    Returns
    -------
    records : list of FssThreshold
        At most one record.
    notes : list of str
        Why there is no record, or what to be wary of in it.
    """
    prefix = f"{family.describe()}: "
    points = family_points(family)
    distances = family.distances
    crossings = []
    for d1, d2 in zip(distances[:-1], distances[1:]):
        p, n1, k1, n2, k2 = shared_rates(points, d1, d2)
        if p.size >= 3:
            log_cross = pair_crossing(p, n1, k1, n2, k2).log_crossing
            if np.isfinite(log_cross):
                crossings.append(float(np.exp(log_cross)))
    if not crossings:
        return [], [f"{prefix}finite-size-scaling fit needs a crossing of consecutive distances' curves "
                    "to centre its window on; none found."]
    pc = float(np.mean(crossings))
    p_all = points["p"].to_numpy(dtype=np.float64)
    d_all = points["distance"].to_numpy(dtype=np.int64)
    w, mask = _window(p_all, d_all, pc)
    inside = points[mask]
    n_points = int(mask.sum())
    n_dist = int(inside["distance"].nunique())
    low_edge, high_edge = pc * (1 - w), pc * (1 + w)
    if n_dist < 2 or n_points < 5:
        return [], [f"{prefix}finite-size-scaling fit needs >= 2 distances and >= 5 points within "
                    f"[{low_edge:.6g}, {high_edge:.6g}] of the crossing p = {pc:.6g}; "
                    f"have {n_dist} distance(s) and {n_points} point(s)."]
    data = _ScalingData(inside["p"].to_numpy(dtype=np.float64), inside["distance"].to_numpy(dtype=np.float64),
                        inside["shots"].to_numpy(dtype=np.float64), inside["failures"].to_numpy(dtype=np.float64), pc)
    s_bounds = (math.log(NU_BOUNDS[0]), math.log(NU_BOUNDS[1]))
    t_bounds = (1 - w, 1 + w)
    bounds: list[tuple[float | None, float | None]] = [(None, None)] * 3 + [t_bounds, s_bounds]
    result = _fit(data, [data.start(1.0, 0.0), data.start(1.0, math.log(1.5))], bounds)
    theta = np.asarray(result.x, dtype=np.float64)
    notes: list[str] = []
    t, s = float(theta[3]), float(theta[4])
    edge = 1e-6
    if min(t - t_bounds[0], t_bounds[1] - t) < edge * w or min(s - s_bounds[0], s_bounds[1] - s) < edge:
        return [], [f"{prefix}finite-size-scaling fit ran to the edge of its range (p_th = {t * pc:.6g}, "
                    f"nu = {math.exp(s):.3g}) in [{low_edge:.6g}, {high_edge:.6g}]; not reported."]
    if not np.isfinite(result.fun):
        return [], [f"{prefix}finite-size-scaling fit failed ({result.message})."]
    deviance = max(0.0, 2.0 * float(result.fun))
    dof = n_points - 5
    gof = float(_st.chi2.sf(deviance, dof)) if dof > 0 else None
    phi = max(1.0, deviance / dof) if dof > 0 else 1.0
    interval = "wald (numerical hessian of the nll in p_th and ln nu)"
    if phi > 1.0:
        interval += f", scaled by deviance/dof = {phi:.3g}"
    hess = data.hessian(theta)
    t_int, s_int = _wald(hess, theta, phi)
    if t_int is not None and _newton_decrement(hess, data.gradient(theta)) > 0.01:
        notes.append(f"{prefix}finite-size-scaling fit may not have converged ({result.message}).")
    if t_int is None or s_int is None:
        interval = f"parametric bootstrap refit ({min(bootstrap, MAX_REFITS)} refits)"
        t_int, s_int = _refit_intervals(data, theta, bounds, min(bootstrap, MAX_REFITS), rng)
        notes.append(f"{prefix}finite-size-scaling Hessian not positive definite; intervals from {interval}.")
    if dof <= 0:
        notes.append(f"{prefix}finite-size-scaling fit has {n_points} points for 5 parameters: no goodness of fit.")
    elif gof is not None and gof < 0.01:
        notes.append(f"{prefix}finite-size-scaling fit is poor (deviance {deviance:.3g} on {dof} dof, "
                     f"p-value {gof:.2g}); intervals widened by deviance/dof.")
    a, b, c = (float(x) for x in theta[:3])
    record = FssThreshold(
        family.id, tuple(sorted(int(x) for x in inside["distance"].unique())),
        threshold=t * pc,
        low=None if t_int is None else t_int[0] * pc, high=None if t_int is None else t_int[1] * pc,
        nu=math.exp(s),
        nu_low=None if s_int is None else math.exp(s_int[0]),
        nu_high=None if s_int is None else math.exp(s_int[1]),
        A=a, B=b / pc, C=c / pc ** 2,
        window=(low_edge, high_edge), points=n_points,
        deviance=deviance, dof=dof, gof_p_value=gof, interval=interval,
    )
    return [record], notes


Interval = tuple[float, float] | None


def _wald(hess: FloatArray, theta: FloatArray, phi: float) -> tuple[Interval, Interval]:
    """Wald 95% intervals of t and s from the inverse Hessian ``hess`` (times ``phi``); None if unusable."""
    if not np.all(np.isfinite(hess)):
        return None, None
    try:
        np.linalg.cholesky(hess)
    except np.linalg.LinAlgError:
        return None, None
    cov = np.linalg.inv(hess) * phi
    se_t, se_s = math.sqrt(max(cov[3, 3], 0.0)), math.sqrt(max(cov[4, 4], 0.0))
    t, s = float(theta[3]), float(theta[4])
    return (t - Z95 * se_t, t + Z95 * se_t), (s - Z95 * se_s, s + Z95 * se_s)


def _newton_decrement(hess: FloatArray, grad: FloatArray) -> float:
    """g' H^-1 g / 2: how much further the half deviance would fall at a Newton step (inf if H is singular)."""
    try:
        return float(grad @ np.linalg.solve(hess, grad)) / 2.0
    except np.linalg.LinAlgError:
        return math.inf


def _refit_intervals(
    data: _ScalingData, theta: FloatArray, bounds: list[tuple[float | None, float | None]], refits: int,
    rng: np.random.Generator,
) -> tuple[Interval, Interval]:
    """Percentile 95% intervals of t and s over parametric bootstrap refits from the fitted model."""
    if refits <= 0:
        return None, None
    prob = np.clip(data.model(theta)[0], 0.0, 1.0)
    draws = rng.binomial(data.n.astype(np.int64), prob, size=(refits, data.n.size)).astype(np.float64)
    ts = np.full(refits, np.nan)
    ss = np.full(refits, np.nan)
    for i in range(refits):  # one optimisation per refit; the data of all refits were drawn at once
        again = _ScalingData(data.q * data.pc, np.exp(data.logd), data.n, draws[i], data.pc)
        result = _fit(again, [theta], bounds)
        if np.isfinite(result.fun):
            ts[i], ss[i] = result.x[3], result.x[4]
    t_int, s_int = percentile_interval(ts), percentile_interval(ss)
    if t_int[0] is None or t_int[1] is None or s_int[0] is None or s_int[1] is None:
        return None, None
    return (t_int[0], t_int[1]), (s_int[0], s_int[1])


__all__ = ["CLIP", "MAX_REFITS", "NU_BOUNDS", "WINDOWS", "Z95", "fss_threshold"]
