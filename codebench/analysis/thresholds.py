"""Thresholds and pseudo-thresholds of a family of points.

Three estimates, each returning ``(records, notes)``: plain JSON-ready
records, and one-line notes saying why an estimate is missing.

* :func:`crossing_thresholds` -- where the whole-experiment failure curves
  of two consecutive distances cross, with a parametric bootstrap interval.
* :func:`fss_threshold` -- a finite-size-scaling fit
  P = A + B x + C x^2, x = (p - p_th) d^(1/nu), by binomial maximum
  likelihood over a window around the crossings, with Wald intervals from
  the numerical Hessian of the negative log-likelihood.
* :func:`pseudo_thresholds` -- per distance, the p at which the per-round
  logical error rate equals p.

Thresholds use the failure probability of the whole memory experiment
(column ``failure_rate``), as is usual when rounds grow with d (or for code
capacity, or one round); per-round curves cross elsewhere at finite d.
Every record names the quantity it uses under ``"quantity"``.

Rates that enter a logarithm use the continuity-corrected estimate
(k + 1/2) / (n + 1), so points with no failures (or only failures) stay
finite; a p at which *both* curves of a pair have no failures says nothing
about which curve is lower and is left out of that pair's crossing.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import numpy.typing as npt
import pandas as pd
from scipy import optimize as _opt
from scipy import special as _sp
from scipy import stats as _st

from codebench.analysis.families import Family

FloatArray = npt.NDArray[np.float64]
IntArray = npt.NDArray[np.int64]

#: Percentiles of the two-sided 95% bootstrap interval.
PERCENTILES = (2.5, 97.5)
#: Two-sided 95% normal quantile (Wald intervals of the scaling fit).
Z95 = 1.959963984540054
#: Fewer crossing resamples than this fraction earn a note.
MIN_VALID_FRACTION = 0.8
#: Relative half-widths tried for the scaling-fit window, narrowest first.
WINDOWS = (0.25, 0.3, 0.4, 0.5, 0.6, 0.75, 1.0)
#: Clip of the modelled failure probability inside the likelihood.
CLIP = 1e-12
#: Range allowed for the scaling exponent nu.
NU_BOUNDS = (0.2, 10.0)
#: Refits of the parametric bootstrap used when the Hessian is unusable.
MAX_REFITS = 100

PSEUDO_DEFINITION = "p at which the per-round logical error rate equals p"


# --------------------------------------------------------------------------- data


def _points(family: Family) -> pd.DataFrame:
    """Points of ``family`` summed over repeats of the same (distance, p), sorted.

    ``p`` is rounded to 12 significant digits so that equal rates from
    different runs match exactly across distances. Points at p <= 0 (no
    noise) have no place on a log-p axis and are left out.
    """
    frame = family.frame.loc[family.frame["p"] > 0, ["distance", "p", "rounds", "shots", "failures"]].copy()
    frame["p"] = [float(f"{float(p):.12g}") for p in frame["p"]]
    grouped = frame.groupby(["distance", "p"], sort=True).agg(
        rounds=("rounds", "max"), shots=("shots", "sum"), failures=("failures", "sum"))
    return grouped.reset_index()


def _arrays(points: pd.DataFrame, distance: int) -> tuple[FloatArray, IntArray, IntArray, IntArray]:
    """(p, shots, failures, rounds) at one distance, sorted by p."""
    part = points[points["distance"] == distance]
    return (part["p"].to_numpy(dtype=np.float64), part["shots"].to_numpy(dtype=np.int64),
            part["failures"].to_numpy(dtype=np.int64), part["rounds"].to_numpy(dtype=np.int64))


def _corrected(k: npt.NDArray[Any], n: npt.NDArray[Any]) -> FloatArray:
    """Continuity-corrected rate (k + 1/2) / (n + 1): never 0 or 1."""
    return np.asarray((k + 0.5) / (n + 1.0), dtype=np.float64)


def _per_round(total: FloatArray, rounds: npt.NDArray[Any]) -> FloatArray:
    """Vectorised :func:`codebench.stats.per_round`: (1 - (1 - 2P)^(1/r)) / 2, 1/2 at P >= 1/2."""
    clipped = np.minimum(total, 0.5)
    with np.errstate(divide="ignore"):
        eps = -np.expm1(np.log1p(-2.0 * clipped) / rounds) / 2.0
    return np.asarray(np.where(total >= 0.5, 0.5, eps), dtype=np.float64)


def _resample(rng: np.random.Generator, n: IntArray, k: IntArray, draws: int) -> IntArray:
    """``draws`` parametric resamples of the counts: failures ~ Binomial(n, k / n), shape (draws, m)."""
    return np.asarray(rng.binomial(n, k / n, size=(draws, n.size)), dtype=np.int64)


def _range(p: FloatArray) -> str:
    return f"[{float(p.min()):.6g}, {float(p.max()):.6g}]"


# --------------------------------------------------------------------------- sign changes


def _sign_changes(logp: FloatArray, g: FloatArray) -> dict[str, Any]:
    """Upward zero crossings of ``g`` (rows of shape (rows, m), NaN = left out) along ``logp``.

    An upward crossing is a step between consecutive kept points from
    g < 0 to g >= 0, located by linear interpolation in ``logp``. When a row
    has several, the one with the largest slope is chosen (the sharpest
    separation of the two curves; flat wiggles where the curves saturate
    lose).

    Returns arrays per row: ``"log_crossing"`` (NaN when there is none),
    ``"up"`` and ``"down"`` (numbers of crossings each way), ``"negative"``
    and ``"nonnegative"`` (whether every kept g is < 0 or >= 0) and
    ``"kept"`` (number of kept points).
    """
    g = np.atleast_2d(g)
    rows, m = g.shape
    kept = ~np.isnan(g)
    index = np.where(kept, np.arange(m), -1)
    running = np.maximum.accumulate(index, axis=1)
    prev = np.concatenate([np.full((rows, 1), -1), running[:, :-1]], axis=1)
    step = kept & (prev >= 0)
    safe_prev = np.maximum(prev, 0)
    g0 = np.take_along_axis(g, safe_prev, axis=1)
    x0 = logp[safe_prev]
    x1 = np.broadcast_to(logp, (rows, m))
    with np.errstate(invalid="ignore"):
        up = step & (g0 < 0) & (g >= 0)
        down = step & (g0 >= 0) & (g < 0)
    rise = np.where(up, g - g0, 1.0)
    run = np.where(up, x1 - x0, 1.0)
    where = np.where(up, x0 + run * (-np.where(up, g0, 0.0)) / rise, np.nan)
    slope = np.where(up, rise / run, -np.inf)
    best = np.argmax(slope, axis=1)
    any_up = up.any(axis=1)
    chosen = np.where(any_up, where[np.arange(rows), best], np.nan)
    filled = np.where(kept, g, 0.0)
    return {
        "log_crossing": chosen,
        "up": up.sum(axis=1),
        "down": down.sum(axis=1),
        "negative": np.all(np.where(kept, filled < 0, True), axis=1),
        "nonnegative": np.all(np.where(kept, filled >= 0, True), axis=1),
        "kept": kept.sum(axis=1),
    }


def _percentile_interval(values: FloatArray) -> tuple[float | None, float | None]:
    finite = values[np.isfinite(values)]
    if finite.size == 0:
        return None, None
    low, high = np.percentile(finite, PERCENTILES)
    return float(low), float(high)


# --------------------------------------------------------------------------- crossings


def _pair_g(r1: FloatArray, r2: FloatArray, k1: npt.NDArray[Any], k2: npt.NDArray[Any]) -> FloatArray:
    """log P_d2 - log P_d1, NaN where neither distance saw a failure."""
    g = np.log(r2) - np.log(r1)
    return np.asarray(np.where((k1 == 0) & (k2 == 0), np.nan, g), dtype=np.float64)


def _shared(points: pd.DataFrame, d1: int, d2: int) -> tuple[FloatArray, IntArray, IntArray, IntArray, IntArray]:
    """(p, n1, k1, n2, k2) at the values of p sampled at both distances."""
    p1, n1, k1, _ = _arrays(points, d1)
    p2, n2, k2, _ = _arrays(points, d2)
    common, i1, i2 = np.intersect1d(p1, p2, assume_unique=True, return_indices=True)
    return common, n1[i1], k1[i1], n2[i2], k2[i2]


def _pair_crossing(p: FloatArray, n1: IntArray, k1: IntArray, n2: IntArray, k2: IntArray) -> dict[str, Any]:
    """Point estimate of the crossing of one pair (see :func:`_sign_changes`)."""
    g = _pair_g(_corrected(k1, n1), _corrected(k2, n2), k1, k2)
    found = _sign_changes(np.log(p), g[None, :])
    return {key: value[0] for key, value in found.items()}


def _crossing_notes(found: dict[str, Any], prefix: str, what: str, p: FloatArray) -> str:
    span = _range(p)
    if int(found["kept"]) < 2:
        return f"{prefix}{what}: fewer than 2 shared values of p with failures at either distance; no crossing."
    if bool(found["negative"]):
        return f"{prefix}{what} do not cross in the sampled range {span}: the larger distance is lower everywhere, " \
               "threshold above the range."
    if bool(found["nonnegative"]):
        return f"{prefix}{what} do not cross in the sampled range {span}: the larger distance is higher everywhere, " \
               "threshold below the range."
    return f"{prefix}{what} cross only the wrong way in {span} (larger distance higher below, lower above); " \
           "no threshold."


def crossing_thresholds(
    family: Family, *, bootstrap: int = 200, rng: np.random.Generator
) -> tuple[list[dict[str, Any]], list[str]]:
    """Crossings of consecutive distances' failure-rate curves, with bootstrap intervals.

    For each pair of consecutive distances (d1 < d2) sampled at >= 3 common
    values of p, the crossing is the p at which log P_d2 - log P_d1 changes
    sign from negative to non-negative, found by linear interpolation in
    log p between the two adjacent sampled values (see :func:`_sign_changes`
    for the choice when it changes more than once). P is the failure
    probability of the whole memory experiment, continuity-corrected as
    (k + 1/2) / (n + 1).

    The interval is the 2.5 / 97.5 percentile range of the crossing over
    ``bootstrap`` parametric resamples (failures ~ Binomial(shots,
    failures / shots) at every point, drawn all at once), counting only the
    resamples whose curves cross; how many did is ``valid_bootstrap``.

    Parameters
    ----------
    family : Family
        The curves.
    bootstrap : int
        Number of resamples (0: no interval).
    rng : numpy.random.Generator
        Source of the resamples.

    Returns
    -------
    records : list of dict
        One per pair that crosses.
    notes : list of str
        Why a pair has no record, or why its interval is weak.
    """
    prefix = f"{family.describe()}: "
    records: list[dict[str, Any]] = []
    notes: list[str] = []
    points = _points(family)
    distances = family.distances
    for d1, d2 in zip(distances[:-1], distances[1:]):
        p, n1, k1, n2, k2 = _shared(points, d1, d2)
        what = f"curves of d={d1} and d={d2}"
        if p.size < 3:
            notes.append(f"{prefix}crossing needs >= 3 values of p shared by distances {d1} and {d2}; have {p.size}.")
            continue
        found = _pair_crossing(p, n1, k1, n2, k2)
        if not np.isfinite(found["log_crossing"]):
            notes.append(_crossing_notes(found, prefix, what, p))
            continue
        threshold = float(np.exp(found["log_crossing"]))
        changes = int(found["up"]) + int(found["down"])
        if changes > 1:
            notes.append(f"{prefix}{what} change order {changes} times in {_range(p)}; "
                         f"took the steepest crossing, p = {threshold:.6g}.")
        low: float | None = None
        high: float | None = None
        valid = 0
        if bootstrap > 0:
            b1 = _resample(rng, n1, k1, bootstrap)
            b2 = _resample(rng, n2, k2, bootstrap)
            g = _pair_g(_corrected(b1, n1), _corrected(b2, n2), b1, b2)
            crossings = np.exp(_sign_changes(np.log(p), g)["log_crossing"])
            valid = int(np.isfinite(crossings).sum())
            low, high = _percentile_interval(crossings)
            if valid < MIN_VALID_FRACTION * bootstrap:
                notes.append(f"{prefix}{what}: only {valid} of {bootstrap} bootstrap resamples cross; "
                             "the interval is unreliable.")
        else:
            notes.append(f"{prefix}{what}: bootstrap = 0, crossing reported without an interval.")
        records.append({
            **family.identity(), "method": "crossing", "quantity": "failure_rate",
            "distances": [int(d1), int(d2)], "threshold": threshold, "low": low, "high": high,
            "bootstrap": int(bootstrap), "valid_bootstrap": valid,
        })
    return records, notes


# --------------------------------------------------------------------------- finite-size scaling


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
        rate = _corrected(self.k, self.n)
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
) -> tuple[list[dict[str, Any]], list[str]]:
    """Finite-size-scaling fit of the failure-rate curves near their crossing.

    Model: P = A + B x + C x^2 with x = (p - p_th) d^(1/nu), P the failure
    probability of the whole memory experiment, fitted by binomial maximum
    likelihood (L-BFGS-B on the negative log-likelihood, P clipped into
    (1e-12, 1 - 1e-12)) to the points with |p - p_c| <= w p_c. p_c is the
    mean of the crossings of consecutive distances (:func:`crossing_thresholds`)
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
    records : list of dict
        At most one record.
    notes : list of str
        Why there is no record, or what to be wary of in it.
    """
    prefix = f"{family.describe()}: "
    points = _points(family)
    distances = family.distances
    crossings = []
    for d1, d2 in zip(distances[:-1], distances[1:]):
        p, n1, k1, n2, k2 = _shared(points, d1, d2)
        if p.size >= 3:
            log_cross = _pair_crossing(p, n1, k1, n2, k2)["log_crossing"]
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
    record = {
        **family.identity(), "method": "finite_size_scaling", "quantity": "failure_rate",
        "distances": sorted(int(x) for x in inside["distance"].unique()),
        "threshold": t * pc,
        "low": None if t_int is None else t_int[0] * pc, "high": None if t_int is None else t_int[1] * pc,
        "nu": math.exp(s),
        "nu_low": None if s_int is None else math.exp(s_int[0]),
        "nu_high": None if s_int is None else math.exp(s_int[1]),
        "A": a, "B": b / pc, "C": c / pc ** 2,
        "window": [low_edge, high_edge], "points": n_points,
        "deviance": deviance, "dof": dof, "gof_p_value": gof, "interval": interval,
    }
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
    t_int, s_int = _percentile_interval(ts), _percentile_interval(ss)
    if t_int[0] is None or t_int[1] is None or s_int[0] is None or s_int[1] is None:
        return None, None
    return (t_int[0], t_int[1]), (s_int[0], s_int[1])


# --------------------------------------------------------------------------- pseudo-thresholds


def _pseudo_g(p: FloatArray, n: IntArray, k: npt.NDArray[Any], rounds: IntArray) -> FloatArray:
    """log eps - log p, eps the per-round rate of the continuity-corrected failure rate.

    NaN (left out) at a point with no failures whose corrected rate is not
    below p: too few shots to tell whether the encoded qubit beats p there.
    """
    g = np.log(_per_round(_corrected(k, n), rounds)) - np.log(p)
    return np.asarray(np.where((k == 0) & (g >= 0), np.nan, g), dtype=np.float64)


def pseudo_thresholds(
    family: Family, *, bootstrap: int = 200, rng: np.random.Generator
) -> tuple[list[dict[str, Any]], list[str]]:
    """Pseudo-threshold per distance: the p at which the per-round logical error rate equals p.

    The per-round rate is eps = (1 - (1 - 2 P)^(1/rounds)) / 2 of the
    continuity-corrected failure rate P = (k + 1/2) / (n + 1); a point with
    no failures counts only if that corrected eps is below p (otherwise its
    shots are too few to place it on either side of the line). The
    pseudo-threshold is where log eps - log p changes sign from negative
    (encoded qubit better than p) to non-negative, by linear interpolation
    in log p between adjacent sampled values; the interval is the 2.5 / 97.5
    percentile range over ``bootstrap`` parametric resamples of the counts.
    With one round this is the usual "logical = physical" pseudo-threshold.

    Parameters
    ----------
    family : Family
        The curves.
    bootstrap : int
        Number of resamples (0: no interval).
    rng : numpy.random.Generator
        Source of the resamples.

    Returns
    -------
    records : list of dict
        One per distance whose per-round rate crosses the line eps = p.
    notes : list of str
        Why a distance has no record (too few values of p; better or worse
        than p everywhere sampled).
    """
    prefix = f"{family.describe()}: "
    points = _points(family)
    records: list[dict[str, Any]] = []
    notes: list[str] = []
    for d in family.distances:
        p, n, k, rounds = _arrays(points, d)
        if p.size < 2:
            notes.append(f"{prefix}pseudo-threshold at d={d} needs >= 2 values of p; have {p.size}.")
            continue
        found = _sign_changes(np.log(p), _pseudo_g(p, n, k, rounds)[None, :])
        log_cross = float(found["log_crossing"][0])
        span = _range(p)
        if not math.isfinite(log_cross):
            if int(found["kept"][0]) < 2:
                notes.append(f"{prefix}d={d}: fewer than 2 values of p with failures or enough shots to compare "
                             f"the per-round logical error with p in {span}; no pseudo-threshold.")
            elif bool(found["negative"][0]):
                notes.append(f"{prefix}d={d}: per-round logical error below p everywhere sampled {span} "
                             "(encoded qubit better): pseudo-threshold above the range.")
            elif bool(found["nonnegative"][0]):
                notes.append(f"{prefix}d={d}: per-round logical error above p everywhere sampled {span} "
                             "(encoded qubit worse): pseudo-threshold below the range.")
            else:
                notes.append(f"{prefix}d={d}: per-round logical error crosses p only downwards in {span}; "
                             "no pseudo-threshold.")
            continue
        value = math.exp(log_cross)
        changes = int(found["up"][0]) + int(found["down"][0])
        if changes > 1:
            notes.append(f"{prefix}d={d}: per-round logical error crosses p {changes} times in {span}; "
                         f"took the steepest crossing, p = {value:.6g}.")
        low: float | None = None
        high: float | None = None
        valid = 0
        if bootstrap > 0:
            draws = _resample(rng, n, k, bootstrap)
            crossings = np.exp(_sign_changes(np.log(p), _pseudo_g(p, n, draws, rounds))["log_crossing"])
            valid = int(np.isfinite(crossings).sum())
            low, high = _percentile_interval(crossings)
            if valid < MIN_VALID_FRACTION * bootstrap:
                notes.append(f"{prefix}d={d}: only {valid} of {bootstrap} bootstrap resamples cross eps = p; "
                             "the pseudo-threshold interval is unreliable.")
        records.append({
            **family.identity(), "distance": int(d), "pseudo_threshold": value, "low": low, "high": high,
            "definition": PSEUDO_DEFINITION, "quantity": "per_round_rate",
            "bootstrap": int(bootstrap), "valid_bootstrap": valid,
        })
    return records, notes


# --------------------------------------------------------------------------- choice


def best_threshold(records: list[dict[str, Any]]) -> dict[str, Any] | None:
    """The finite-size-scaling record if any, else the crossing of the largest distance pair, else None."""
    for record in records:
        if record.get("method") == "finite_size_scaling":
            return record
    crossings = [r for r in records if r.get("method") == "crossing"]
    if not crossings:
        return None
    return max(crossings, key=lambda r: tuple(r["distances"]))


__all__ = ["PSEUDO_DEFINITION", "best_threshold", "crossing_thresholds", "fss_threshold", "pseudo_thresholds"]
