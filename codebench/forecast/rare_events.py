"""Rare-event estimation by fault count: P_L = sum_w P(W = w) f(w).

W is the number of mechanisms of the detector error model that fire in a
shot, f(w) the probability that the decoder fails given exactly w faults.

* :func:`poisson_binomial` gives P(W = w) exactly (W is a sum of independent
  Bernoulli variables with the mechanisms' probabilities), with a bound on the
  tail beyond the last w computed.
* f(w) is estimated by decoding shots with exactly w faults
  (:mod:`codebench.engine.fault_sampling`), stratum by stratum.
* Where the strata that dominate the sum are too rare to sample (the lowest w
  at large d and low noise), f(w) comes from a fitted failure spectrum
  (:func:`fit_spectrum`), and the number is marked as extrapolated in w.

Failure-spectrum model (ours; the idea of fitting an ansatz to the sampled
f(w) is that of Beverland, Carroll, Cross, Yoder, arXiv:2511.15177 (2025)).
A decoder that corrects every set of fewer than k0 faults (k0 = (d + 1) / 2
for odd circuit distance d, lowered if a failure is seen at fewer faults) fails
with w faults only if the set contains a *failing core*: a subset of k >= k0
faults that the decoder gets wrong on its own. With w much smaller than the
number of mechanisms, the expected number of failing cores in a w-set grows
like a_k C(w, k) for each k, so

    f(w) = f_max (1 - exp(-sum_{k=k0}^{k0+K-1} b_k C(w, k) / C(w_ref, k))),   b_k >= 0,

with f_max = 1 - 2^(-observables) (a random logical class), w_ref the largest
sampled w, and f(w) = 0 below k0. At low w the leading term dominates, so the
extrapolation to the rare strata follows the slope k0 that the code's distance
sets, not a power fitted where higher-order cores dominate (which would fall
too fast, an optimistic error). The model is fitted by binomial maximum
likelihood to every sampled stratum, zero-failure strata included.

Intervals. A parametric bootstrap (counts redrawn from the observed
fractions, or from the fitted model where a stratum saw no failure) refits
the spectrum and recomputes P_L; the 2.5% and 97.5% quantiles are taken for
each of K = 1, 2, 3 terms, and the interval is the envelope over the variants
whose AIC is within 4 of the best (model uncertainty, not only counting noise);
the point estimate is the best variant's. The probability of the truncated
tail (W beyond the last w summed) is added to the upper end. Strata with at
least ``EMPIRICAL_FAILURES`` failures use their observed fraction (and its
binomial spread in the bootstrap) instead of the model.

Scaling. Multiplying every odds r_i = p_i / (1 - p_i) by one factor leaves the
law of the fault sets given w unchanged, so the table of (w, shots, failures)
holds exactly for every such noise level; P(W = w) is recomputed exactly for
each. Multiplying the probabilities p_i (the device's ``scale``) changes the
odds by s (1 - p_i) / (1 - s p_i), within a factor 1 + |s - 1| max p_i of one
common factor: :func:`odds_spread` measures it, and a table is reused only
below ``REUSE_TOLERANCE``. What-ifs that change one kind of error (such as
``gate_2q_error`` alone) change the mix of mechanisms and need a new table.
A decoder compiled at another noise level weighs the edges differently; the
table keeps the weights it was sampled with.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Mapping

import numpy as np
import numpy.typing as npt

__all__ = [
    "EMPIRICAL_FAILURES", "REUSE_TOLERANCE", "SpectrumFit", "SpectrumVariant", "StratifiedEstimate", "chernoff_tail",
    "fit_spectrum", "odds_spread", "poisson_binomial", "spectrum", "stratified_estimate", "upper_bound_without_failures",
]

FloatArray = npt.NDArray[np.float64]

#: A stratum with at least this many failures uses its observed fraction instead of the model.
EMPIRICAL_FAILURES = 20
#: Largest spread (max / min - 1) of the odds ratios between two models for one f(w) table to serve both.
REUSE_TOLERANCE = 0.01
#: Spectrum variants: (core terms K, bent by a fitted power of w?).
VARIANTS = ((1, False), (2, False), (1, True))
#: Exponents c of the bend (w / w_ref)^c tried (profile likelihood).
TILTS = tuple(float(c) for c in np.arange(-3.0, 3.01, 0.5))
#: The spectrum is fitted to the lowest strata holding this many failures (at least three strata with
#: failures): the strata near the rare w it extrapolates to, not the saturated ones far above.
LOCAL_FAILURES = 300
#: Bootstrap replicates per model variant.
BOOTSTRAP = 200
#: Variants whose AIC is within this of the best enter the interval.
AIC_WINDOW = 4.0


def _log_binomial_pmf(m: int, p: float, k: npt.NDArray[np.int64]) -> FloatArray:
    lg = np.vectorize(math.lgamma, otypes=[np.float64])
    return np.asarray(math.lgamma(m + 1) - lg(k + 1.0) - lg(m - k + 1.0) + k * math.log(p)
                      + (m - k) * math.log1p(-p), dtype=np.float64)


def chernoff_tail(mean: float, at_least: int) -> float:
    """Upper bound on P(W >= a) for a sum of independent Bernoullis of mean mu < a: e^-mu (e mu / a)^a.

    (Chernoff bound, e.g. Mitzenmacher & Upfal, Probability and Computing (2005), Thm 4.4, from memory.)

    >>> round(chernoff_tail(1.0, 5), 6)
    0.017471
    """
    if at_least <= mean:
        return 1.0
    if mean <= 0:
        return 0.0
    return float(min(1.0, math.exp(-mean + at_least * (1.0 + math.log(mean / at_least)))))


def poisson_binomial(probabilities: npt.ArrayLike, w_max: int) -> tuple[FloatArray, float]:
    """P(W = w) for w = 0..w_max, W the number of independent events with these probabilities, and a tail bound.

    Exact: mechanisms with the same probability form a binomial factor, and
    the factors are convolved, truncated at w_max (entries up to w_max only
    ever receive terms from entries up to w_max, so truncation is exact).
    The second value bounds P(W > w_max): the smaller of 1 - sum and the
    Chernoff bound.

    >>> pmf, tail = poisson_binomial([0.5, 0.5], 2)
    >>> [round(v, 12) for v in pmf.tolist()], tail
    ([0.25, 0.5, 0.25], 0.0)
    """
    p = np.asarray(probabilities, dtype=np.float64)
    if p.size and (np.any(p < 0) or np.any(p > 1)):
        raise ValueError("probabilities must lie in [0, 1].")
    pmf = np.zeros(w_max + 1, dtype=np.float64)
    pmf[0] = 1.0
    values, counts = np.unique(p, return_counts=True)
    shift = 0
    for value, count in zip(values.tolist(), counts.tolist()):
        if value == 0.0:
            continue
        if value == 1.0:
            shift += count
            continue
        k = np.arange(min(count, w_max) + 1, dtype=np.int64)
        factor = np.exp(_log_binomial_pmf(count, value, k))
        pmf = np.convolve(pmf, factor)[: w_max + 1]
    if shift:
        pmf = np.concatenate([np.zeros(shift), pmf])[: w_max + 1]
    mean = float(p.sum())
    possible = int(np.count_nonzero(p))
    tail = 0.0 if w_max >= possible else min(max(0.0, 1.0 - float(pmf.sum())), chernoff_tail(mean, w_max + 1))
    return pmf, tail


def odds_spread(base: npt.ArrayLike, other: npt.ArrayLike) -> float:
    """max / min - 1 of the ratios of the two models' odds r_i (0 when one factor scales them all).

    >>> odds_spread([0.01, 0.02], [0.02, 0.04]) < 0.011
    True
    """
    a = np.asarray(base, dtype=np.float64)
    b = np.asarray(other, dtype=np.float64)
    if a.shape != b.shape or np.any(a <= 0) or np.any(b <= 0):
        return math.inf
    ratio = (b / (1 - b)) / (a / (1 - a))
    return float(ratio.max() / ratio.min() - 1.0)


# ---------------------------------------------------------------------------
# the failure spectrum


def log_symmetric(probabilities: npt.ArrayLike, w_max: int) -> FloatArray:
    """ln e_w(r) for w = 0..w_max (up to a term A + B w), r_i = p_i / (1 - p_i): the elementary symmetric
    polynomials of the odds.

    e_w(r) is proportional to P(W = w) under any tilt r -> c r (the tilt changes it by c^w), so it is
    computed as the Poisson-binomial of the tilted probabilities c r_i / (1 + c r_i), with c chosen so
    that their mean is w_max / 2: every w of interest then stays far from underflow.

    >>> le = log_symmetric([0.1, 0.1, 0.1], 3)
    >>> [round(float(np.exp(le[w] - le[0])) / 0.1111111111**w, 6) for w in range(4)]
    [1.0, 3.0, 3.0, 1.0]
    """
    p = np.asarray(probabilities, dtype=np.float64)
    odds = p / (1.0 - p)
    target = min(max(1.0, w_max / 2.0), 0.5 * odds.size)
    lo, hi = -60.0, 60.0
    for _ in range(200):
        mid = (lo + hi) / 2
        tilted = np.exp(mid) * odds
        if float(np.sum(tilted / (1 + tilted))) < target:
            lo = mid
        else:
            hi = mid
    log_c = (lo + hi) / 2
    tilted = np.exp(log_c) * odds
    pmf, _ = poisson_binomial(tilted / (1 + tilted), w_max)
    return np.asarray(np.log(np.maximum(pmf, 1e-300)) - log_c * np.arange(w_max + 1), dtype=np.float64)


def _basis(w: npt.NDArray[np.int64], k0: int, terms: int, w_ref: int, log_e: FloatArray | None) -> FloatArray:
    """The spectrum's terms for k = k0 .. k0 + terms - 1 (rows: w), each 1 at w_ref.

    With the odds' ln e_w: e_(w-k)(r) / e_w(r), the first-order chance that a given k-set of faults is
    among w faults drawn from the conditional law (exact for small k-sets; unequal odds make it grow
    more slowly than C(w, k) once the likely mechanisms are mostly in). Without: C(w, k) (equal odds).
    """
    out = np.zeros((w.size, terms), dtype=np.float64)
    lg = np.vectorize(math.lgamma, otypes=[np.float64])
    wf = w.astype(np.float64)
    for j in range(terms):
        k = k0 + j
        ok = w >= k
        if not w_ref >= k:
            continue
        if log_e is not None:
            log_c = log_e[w[ok] - k] - log_e[w[ok]]
            log_ref = float(log_e[w_ref - k] - log_e[w_ref])
        else:
            log_c = lg(wf[ok] + 1) - lg(wf[ok] - k + 1) - math.lgamma(k + 1)
            log_ref = math.lgamma(w_ref + 1) - math.lgamma(w_ref - k + 1) - math.lgamma(k + 1)
        out[ok, j] = np.exp(log_c - log_ref)
    return out


def spectrum(w: npt.ArrayLike, coefficients: npt.ArrayLike, k0: int, w_ref: int, f_max: float,
             log_e: FloatArray | None = None, tilt: float = 0.0) -> FloatArray:
    """f(w) of the failure-spectrum model (module docstring).

    >>> round(float(spectrum([3], [1.0], 3, 3, 0.5)[0]), 6)
    0.31606
    """
    ws = np.asarray(w, dtype=np.int64)
    b = np.asarray(coefficients, dtype=np.float64)
    hazard = (_basis(ws, k0, b.size, w_ref, log_e) * _tilt(ws, w_ref, tilt)[:, None]) @ b
    return np.asarray(f_max * -np.expm1(-hazard), dtype=np.float64)


def _tilt(w: npt.NDArray[np.int64], w_ref: int, tilt: float) -> FloatArray:
    """(w / w_ref)^tilt: a free bend of the spectrum away from the core model (1 when tilt = 0)."""
    return np.asarray(np.power(np.maximum(w, 1) / float(w_ref), tilt), dtype=np.float64)


@dataclass(frozen=True)
class SpectrumFit:
    """A fitted failure spectrum: coefficients b_k, its onset k0, and the fit's quality."""

    coefficients: FloatArray
    k0: int
    w_ref: int
    f_max: float
    log_likelihood: float
    log_e: FloatArray | None = None
    tilt: float | None = None

    @property
    def parameters(self) -> int:
        return int(self.coefficients.size) + (0 if self.tilt is None else 1)

    @property
    def aic(self) -> float:
        return 2.0 * self.parameters - 2.0 * self.log_likelihood

    def __call__(self, w: npt.ArrayLike) -> FloatArray:
        return spectrum(w, self.coefficients, self.k0, self.w_ref, self.f_max, self.log_e, self.tilt or 0.0)


def fit_spectrum(w: npt.ArrayLike, shots: npt.ArrayLike, failures: npt.ArrayLike, k0: int, terms: int,
                 f_max: float, start: FloatArray | None = None, log_e: FloatArray | None = None,
                 tilt: float | None = None) -> SpectrumFit:
    """Binomial maximum-likelihood fit of the spectrum with ``terms`` coefficients b_k >= 0.

    Projected Newton iterations with a backtracking line search (the
    likelihood is smooth in b and the problem has at most a few parameters;
    a general optimiser costs ten times more, and the bootstrap refits often).
    """
    ws = np.asarray(w, dtype=np.int64)
    w_ref = int(ws.max())
    full = _basis(ws, k0, terms, w_ref, log_e) * _tilt(ws, w_ref, tilt or 0.0)[:, None]
    live = full.any(axis=1)  # below the onset f = 0: no information (and no failure, by choice of k0)
    design = full[live]
    n = np.asarray(shots, dtype=np.float64)[live]
    k = np.asarray(failures, dtype=np.float64)[live]
    m = n - k

    def negative(b: FloatArray) -> float:
        f = np.clip(f_max * -np.expm1(-(design @ b)), 1e-300, 1 - 1e-15)
        return -float(np.sum(k * np.log(f) + m * np.log1p(-f)))

    if start is None:
        frac = np.clip(k / np.maximum(n, 1), 0, f_max * 0.999)
        top = float(-np.log1p(-frac.max() / f_max)) if frac.size else 1.0
        start = np.full(terms, max(top, 1e-6) / terms)
    b = np.maximum(np.asarray(start, dtype=np.float64), 0.0)
    value = negative(b)
    for _ in range(200):
        u = f_max * np.exp(-(design @ b))
        f = np.clip(f_max - u, 1e-300, 1 - 1e-15)
        gradient = -(design.T @ ((k / f - m / (1.0 - f)) * u))
        # Fisher scoring: the expected information n (df/dh)^2 / (f (1 - f)) is never negative.
        information = design.T @ (design * (n * u**2 / (f * (1.0 - f)))[:, None])
        free = ~((b <= 0.0) & (gradient > 0.0))
        if not np.any(free):
            break
        step = np.zeros_like(b)
        sub = information[np.ix_(free, free)]
        sub = sub + 1e-12 * np.trace(sub) * np.eye(sub.shape[0])
        step[free] = np.linalg.lstsq(sub, gradient[free], rcond=None)[0]
        scale = 1.0
        improved = False
        for _ in range(40):
            trial = np.maximum(b - scale * step, 0.0)
            trial_value = negative(trial)
            if trial_value <= value:
                improved = True
                break
            scale *= 0.5
        if not improved:
            break
        change = value - trial_value
        b, value = trial, trial_value
        if change < 1e-9 * max(1.0, abs(value)):
            break
    return SpectrumFit(b, k0, w_ref, f_max, -value, log_e, tilt)


def fit_tilted(w: npt.ArrayLike, shots: npt.ArrayLike, failures: npt.ArrayLike, k0: int, f_max: float,
               log_e: FloatArray | None = None) -> SpectrumFit:
    """One core term bent by (w / w_ref)^c, c profiled over ``TILTS`` (two parameters)."""
    fits = [fit_spectrum(w, shots, failures, k0, 1, f_max, log_e=log_e, tilt=c) for c in TILTS]
    return max(fits, key=lambda f: f.log_likelihood)


# ---------------------------------------------------------------------------
# the estimate


def upper_bound_without_failures(pmf: FloatArray, tail: float, strata: Mapping[int, tuple[int, int]]) -> float:
    """A 95% upper bound on P_L when no stratum saw a failure.

    Assumes f(w) does not decrease with w (more faults never help a decoder on
    average): f(w) <= the Wilson upper limit of the nearest sampled stratum at
    or above w; above the largest sampled w, f <= 1. Plus the tail bound.
    """
    from codebench.stats import wilson_interval

    sampled = sorted(w for w, (n, _) in strata.items() if n > 0)
    bound = np.ones(pmf.size)
    for w in range(pmf.size):
        above = [v for v in sampled if v >= w]
        if above:
            bound[w] = min(wilson_interval(strata[v][1], strata[v][0])[1] for v in above)
    return float(np.dot(pmf, bound)) + tail


@dataclass(frozen=True)
class SpectrumVariant:
    """One spectrum model tried by :func:`stratified_estimate`: its onset, terms and bend (None: not bent),
    AIC, P_L with the 95% interval of its refits, whether it was admitted into the envelope, and the strata
    it was fitted to."""

    onset: int
    terms: int
    bend: float | None
    aic: float
    rate: float
    low: float
    high: float
    admitted: bool
    fitted_w: tuple[int, int]

    def to_json(self) -> dict[str, Any]:
        return {"onset": self.onset, "terms": self.terms, "bend": self.bend, "aic": self.aic, "rate": self.rate,
                "low": self.low, "high": self.high, "admitted": self.admitted, "fitted_w": list(self.fitted_w)}


@dataclass
class StratifiedEstimate:
    """P_L per experiment with its 95% interval, and how it was obtained."""

    rate: float
    low: float
    high: float
    extrapolated: bool
    w_sampled: tuple[int, int]
    w_dominant: tuple[int, int]
    model_share: float
    onset: int
    terms: int
    tail: float
    variants: list[SpectrumVariant] = field(default_factory=list)


def _local_strata(ws: npt.NDArray[np.int64], failures: FloatArray) -> npt.NDArray[np.bool_]:
    """The lowest strata (w ascending) up to LOCAL_FAILURES failures and three strata with failures."""
    order = np.argsort(ws)
    chosen = np.zeros(ws.size, dtype=np.bool_)
    total, with_failures = 0.0, 0
    for i in order:
        chosen[i] = True
        total += failures[i]
        with_failures += int(failures[i] > 0)
        if total >= LOCAL_FAILURES and with_failures >= 3:
            break
    return chosen


def _total(pmf: FloatArray, g: FloatArray) -> float:
    return float(np.dot(pmf, g))


def stratified_estimate(pmf: FloatArray, tail: float, strata: Mapping[int, tuple[int, int]], distance: int,
                        observables: int, seed: int = 0, log_e: FloatArray | None = None) -> StratifiedEstimate:
    """P_L = sum_w P(W = w) f(w) from the sampled ``strata`` ``{w: (shots, failures)}``.

    ``pmf`` is P(W = w) for w = 0..len(pmf) - 1 and ``tail`` bounds the rest.
    The onset k0 is (distance + 1) // 2, or the smallest w with a failure if lower.
    """
    sampled = sorted(w for w, (n, _) in strata.items() if n > 0)
    if not sampled:
        raise ValueError("no sampled stratum")
    ws = np.array(sampled, dtype=np.int64)
    n = np.array([strata[w][0] for w in sampled], dtype=np.float64)
    k = np.array([strata[w][1] for w in sampled], dtype=np.float64)
    f_max = 1.0 - 0.5**max(1, observables)
    failing = ws[k > 0]
    t = max(1, min([(distance + 1) // 2] + ([int(failing.min())] if failing.size else [])))
    all_w = np.arange(pmf.size, dtype=np.int64)
    index = {int(w): i for i, w in enumerate(sampled)}
    empirical = np.array([k[index[w]] >= EMPIRICAL_FAILURES if w in index else False for w in all_w.tolist()])
    observed = np.zeros(pmf.size)
    for w, i in index.items():
        if w < pmf.size:
            observed[w] = k[i] / n[i]
    rng = np.random.default_rng(seed)

    def combine(model_f: FloatArray, observed_f: FloatArray) -> FloatArray:
        return np.asarray(np.where(empirical, observed_f, model_f), dtype=np.float64)

    if not failing.size:
        raise ValueError("no failures in any stratum: the spectrum cannot be fitted")
    local = _local_strata(ws, k)
    lw, ln_, lk = ws[local], n[local], k[local]

    def fit_variant(terms: int, bent: bool, failures: FloatArray, start: FloatArray | None = None) -> SpectrumFit:
        if bent:
            return fit_tilted(lw, ln_, failures, t, f_max, log_e=log_e)
        return fit_spectrum(lw, ln_, failures, t, terms, f_max, start=start, log_e=log_e)

    fits = [fit_variant(terms, bent, lk) for terms, bent in VARIANTS]
    best_aic = min(f.aic for f in fits)
    variants: list[tuple[SpectrumFit, float, float, float, bool]] = []
    for fit in fits:
        point = _total(pmf, combine(fit(all_w), observed))
        if fit.aic > best_aic + AIC_WINDOW:
            variants.append((fit, point, point, point, False))
            continue
        draws = []
        for _ in range(BOOTSTRAP):
            prob = np.where(k > 0, k / n, fit(ws))
            k_star = rng.binomial(n.astype(np.int64), np.clip(prob, 0, 1)).astype(np.float64)
            refit = fit_variant(int(fit.coefficients.size), fit.tilt is not None, k_star[local],
                                start=fit.coefficients + 1e-12)
            obs_star = np.zeros(pmf.size)
            for w, i in index.items():
                if w < pmf.size:
                    obs_star[w] = k_star[i] / n[i]
            draws.append(_total(pmf, combine(refit(all_w), obs_star)))
        low, high = (float(v) for v in np.quantile(draws, [0.025, 0.975]))
        variants.append((fit, point, low, high, True))
    admitted = [v for v in variants if v[4]]
    best = min(admitted, key=lambda v: v[0].aic)
    fit, rate = best[0], best[1]
    low = min(v[2] for v in admitted)
    high = max(v[3] for v in admitted) + tail
    contributions = pmf * combine(fit(all_w), observed)
    model_part = float(np.sum(contributions[~empirical]))
    share = model_part / rate if rate > 0 else 1.0
    order = np.argsort(contributions)[::-1]
    cumulative = np.cumsum(contributions[order])
    keep = order[: int(np.searchsorted(cumulative, 0.95 * cumulative[-1]) + 1)] if cumulative[-1] > 0 else order[:1]
    return StratifiedEstimate(
        rate=rate, low=min(low, rate), high=max(high, rate), extrapolated=share > 0.1,
        w_sampled=(int(ws.min()), int(ws.max())), w_dominant=(int(keep.min()), int(keep.max())),
        model_share=share, onset=fit.k0, terms=int(fit.coefficients.size), tail=tail,
        variants=[SpectrumVariant(v[0].k0, int(v[0].coefficients.size), v[0].tilt, v[0].aic, v[1], v[2], v[3], v[4],
                                  (int(lw.min()), int(lw.max()))) for v in variants])
