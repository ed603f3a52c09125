"""Per-distance estimates (direct, raised-noise power law, stratified), the Lambda fit and the target distances.

Every estimate is an :class:`Estimate`: the per-round rate with its 95%
interval, the method, and flags for anything that limits it. A distance
whose interval cannot be defended has ``rate = None`` (an upper bound at
most) rather than a number.

* **direct**: k failures in n shots at the device's own noise; Wilson interval
  (Wilson, JASA 22, 209 (1927)) mapped through the per-round conversion.
* **extrapolated**: ln eps = a + b ln s fitted over raised noise scales s and
  taken to s = 1. Counting noise alone understates its error: the local slope
  of ln eps in ln s drifts from (d + 1) / 2 towards threshold. The interval is
  therefore the envelope of the free-exponent fit and the fit with the
  exponent held at (d + 1) / 2, each with its 95% counting interval. Refused
  (no number) with fewer than two scales of ``MIN_SCALE_FAILURES`` failures;
  flagged when the exponent is outside ``EXPONENT_BAND`` x (d + 1) / 2 or the
  highest scale fails more than ``NEAR_THRESHOLD`` of its shots.
* **stratified**: :func:`codebench.forecast.rare_events.stratified_estimate`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Mapping, Sequence

import numpy as np

from codebench.analysis.projections import MAX_DISTANCE, distances_for_target
from codebench.analysis.suppression import (
    fit_lambda,
    lambda_pair,
    per_round_with_variance,
    weighted_fit,
)
from codebench.codes import CODE_FAMILIES
from codebench.forecast.details import (
    DirectDetails,
    ExtrapolatedDetails,
    MethodDetails,
    PowerLawFit,
    RaisedPoint,
    SpectrumPoint,
    SpectrumSummary,
    StratifiedDetails,
)
from codebench.forecast.rare_events import StratifiedEstimate
from codebench.forecast.result import (
    DistanceForecast,
    LambdaStep,
    LambdaSummary,
    TargetForecast,
)
from codebench.forecast.sampling import Sample
from codebench.stats import Z95, per_round, wilson_interval

__all__ = ["Estimate", "direct_estimate", "extrapolated_estimate", "lambda_summary", "stratified_row", "targets"]

#: Failures a raised scale needs to enter the power-law fit.
MIN_SCALE_FAILURES = 20
#: Accepted fitted exponent, as a fraction of (d + 1) / 2.
EXPONENT_BAND = (0.75, 1.25)
#: Per-shot failure probability above which a raised scale counts as near threshold.
NEAR_THRESHOLD = 0.2
#: Chi-square p-value of the Lambda fit below which a constant Lambda is not supported.
LAMBDA_CONSISTENCY = 0.01
#: Below this Lambda (its lower end) the device is near threshold, where Lambda drifts with d: targets are
#: then projected only up to ``NEAR_THRESHOLD_REACH`` times the largest forecast distance.
NEAR_THRESHOLD_LAMBDA = 1.5
NEAR_THRESHOLD_REACH = 2


@dataclass(frozen=True)
class Estimate:
    """One distance's per-round rate, its 95% interval and how it was obtained.

    ``fit_log_var`` is var(ln eps) when the method computed it itself (direct,
    extrapolated); otherwise :attr:`log_var` takes it from the interval.
    """

    method: str
    kind: str
    rate: float | None
    low: float | None
    high: float | None
    shots: int
    failures: int
    flags: tuple[str, ...] = ()
    details: MethodDetails | None = None
    fit_log_var: float | None = None

    @property
    def log_rate(self) -> float | None:
        return None if self.rate is None or self.rate <= 0 else math.log(self.rate)

    @property
    def log_var(self) -> float | None:
        """var(ln eps) for the Lambda fit: from the interval's width on the log scale."""
        if self.fit_log_var is not None:
            return float(self.fit_log_var)
        if self.rate is None or not self.low or not self.high or self.low <= 0:
            return None
        return ((math.log(self.high) - math.log(self.low)) / (2 * Z95)) ** 2

    def flagged(self, *flags: str) -> Estimate:
        """This estimate with ``flags`` added."""
        return replace(self, flags=self.flags + flags)


def direct_estimate(sample: Sample) -> Estimate:
    k, n, r = sample.failures, sample.shots, sample.rounds
    low_total, high_total = wilson_interval(k, n) if n else (0.0, 1.0)
    base = DirectDetails((1.0,))
    if k == 0 or k / n >= 0.5:
        why = "no failures: upper bound only" if k == 0 else "failure probability >= 1/2: saturated"
        return Estimate(f"direct ({why})", "direct", None, per_round(low_total, r) if k else 0.0,
                        per_round(high_total, r), n, k, (why,), base)
    eps, var = per_round_with_variance([k], [n], [r])
    return Estimate("direct", "direct", float(eps[0]), per_round(low_total, r), per_round(high_total, r), n, k,
                    (), base, float(var[0]))


def extrapolated_estimate(samples: Sequence[Sample], distance: int) -> Estimate:
    """The power law in the noise scale, with the model-error envelope and flags (module docstring)."""
    nominal = (distance + 1) / 2.0
    scales = [s.scale for s in samples]
    span = f"{min(scales):g}-{max(scales):g}" if scales else "none"
    points = tuple(RaisedPoint(s.scale, s.shots, s.failures,
                               per_round(s.rate, s.rounds) if s.shots else None,
                               per_round(wilson_interval(s.failures, s.shots)[0], s.rounds) if s.shots else None,
                               per_round(wilson_interval(s.failures, s.shots)[1], s.rounds) if s.shots else None)
                   for s in samples)
    details = ExtrapolatedDetails(tuple(scales), points)
    shots, failures = sum(s.shots for s in samples), sum(s.failures for s in samples)
    flags = [f"only {s.failures} failures at scale {s.scale:g} (fewer than {MIN_SCALE_FAILURES}): left out"
             for s in samples if s.failures < MIN_SCALE_FAILURES]
    usable = [s for s in samples if s.failures >= MIN_SCALE_FAILURES and s.rate < 0.5]
    method = f"extrapolated (power law over scales {span})"
    if len(usable) < 2:
        flags.append(f"fewer than 2 scales with {MIN_SCALE_FAILURES} failures: no estimate")
        return Estimate(method, "extrapolated", None, None, None, shots, failures, tuple(flags), details)
    eps, var = per_round_with_variance([s.failures for s in usable], [s.shots for s in usable],
                                       [s.rounds for s in usable])
    x = np.log(np.array([s.scale for s in usable], dtype=np.float64))
    y = np.log(eps)
    free = weighted_fit(np.column_stack([np.ones_like(x), x]), y, var)
    a, var_a = float(free.beta[0]), float(free.cov[0, 0])
    b, se_b = float(free.beta[1]), math.sqrt(max(float(free.cov[1, 1]), 0.0))
    held = weighted_fit(np.ones((x.size, 1)), y - nominal * x, var)
    a_nom, var_nom = float(held.beta[0]), float(held.cov[0, 0])
    low = min(a - Z95 * math.sqrt(var_a), a_nom - Z95 * math.sqrt(var_nom))
    high = max(a + Z95 * math.sqrt(var_a), a_nom + Z95 * math.sqrt(var_nom))
    if not EXPONENT_BAND[0] * nominal <= b <= EXPONENT_BAND[1] * nominal:
        flags.append(f"fitted exponent {b:.2f} +- {Z95 * se_b:.2f} is far from (d+1)/2 = {nominal:g}: the raised "
                     "scales are not in the low-noise regime; the interval spans both exponents")
    top = max(usable, key=lambda s: s.scale)
    if top.rate > NEAR_THRESHOLD:
        flags.append(f"scale {top.scale:g} fails {top.rate:.2g} of its shots: close to threshold")
    fit = PowerLawFit(b, se_b, nominal, free.chi2, free.dof, float(free.inflation),
                      "envelope of the free-exponent and (d+1)/2-exponent fits, 95% each")
    return Estimate(method, "extrapolated", math.exp(a), math.exp(low), math.exp(high), shots, failures,
                    tuple(flags), replace(details, fit=fit), ((high - low) / (2 * Z95)) ** 2)


def stratified_row(estimate: StratifiedEstimate | None, table: Mapping[int, tuple[int, int]], rounds: int,
                   mean_faults: float, upper_only: float | None = None, *, mechanisms: int,
                   reused_from: str | None = None) -> Estimate:
    """The stratified estimate of one distance as a per-round :class:`Estimate`.

    ``mechanisms`` is the size of the point's detector error model and
    ``reused_from`` the device whose f(w) table was reused (None: drawn anew).
    """
    shots = sum(n for n, _ in table.values())
    failures = sum(k for _, k in table.values())
    spectrum = tuple(SpectrumPoint(w, n, k) for w, (n, k) in sorted(table.items()))
    sampled = (min(table), max(table)) if table else None
    if estimate is None:
        high = None if upper_only is None else per_round(upper_only, rounds)
        return Estimate("stratified (no failures: upper bound only)", "stratified", None, 0.0, high, shots,
                        failures, ("no failure in any sampled stratum: upper bound only",),
                        StratifiedDetails(sampled, mean_faults, spectrum, None, None, mechanisms, reused_from))
    flags = []
    method = "stratified"
    if estimate.extrapolated:
        method = (f"stratified, extrapolated in w (sampled w = {estimate.w_sampled[0]}..{estimate.w_sampled[1]}, "
                  f"sum dominated by w = {estimate.w_dominant[0]}..{estimate.w_dominant[1]})")
        flags.append(f"{estimate.model_share:.0%} of the estimate comes from the fitted failure spectrum at w that "
                     "were not sampled to 20 failures")
    summary = SpectrumSummary(estimate.w_dominant, estimate.model_share, estimate.onset, estimate.terms,
                              estimate.tail, tuple(estimate.variants),
                              (estimate.rate, estimate.low, estimate.high))
    details = StratifiedDetails(sampled, mean_faults, spectrum, estimate.extrapolated, summary, mechanisms,
                                reused_from)
    return Estimate(method, "stratified", per_round(estimate.rate, rounds), per_round(estimate.low, rounds),
                    per_round(estimate.high, rounds), shots, failures, tuple(flags), details)


def lambda_summary(rows: Sequence[DistanceForecast]) -> tuple[LambdaSummary | None, list[LambdaStep]]:
    """The Lambda fit (shared with :mod:`codebench.analysis`) and the consecutive-pair Lambdas."""
    usable = [(r.distance, r.log_rate, r.log_rate_variance) for r in rows
              if r.log_rate is not None and r.log_rate_variance is not None and r.log_rate_variance > 0]
    pairs = []
    for (d1, log1, var1), (d2, log2, var2) in zip(usable, usable[1:]):
        lam, low, high = lambda_pair(d1, d2, log1, log2, var1, var2)
        pairs.append(LambdaStep((d1, d2), lam, low, high))
    if len({d for d, _, _ in usable}) < 2:
        return None, pairs
    fit = fit_lambda([d for d, _, _ in usable], [log for _, log, _ in usable], [var for _, _, var in usable])
    consistency = None
    if fit.dof > 0:
        from scipy.stats import chi2

        consistency = float(chi2.sf(fit.chi2, fit.dof))
    return LambdaSummary(fit.lam, fit.low, fit.high, fit.C, tuple(tuple(row) for row in fit.log_cov),
                         tuple(fit.distances), fit.chi2, fit.dof, fit.inflation, consistency), pairs


def constant_lambda_problem(fit: LambdaSummary | None) -> str | None:
    """Why a constant Lambda cannot carry a projection, or ``None`` when it can."""
    if fit is None:
        return "no Lambda fit (fewer than two distances with an estimate)"
    if fit.lam_low <= 1:
        return (f"the Lambda interval [{fit.lam_low:.3g}, {fit.lam_high:.3g}] reaches 1: the device is "
                "at or near threshold for this code and decoder")
    p = fit.consistency_p
    if p is not None and p < LAMBDA_CONSISTENCY:
        return (f"the distances disagree with one constant Lambda (chi2 = {fit.chi2:.3g} on {fit.dof} "
                f"degree(s) of freedom, p = {p:.2g}): Lambda still changes with d")
    return None


def targets(code: str, fit: LambdaSummary | None, wanted: Sequence[float], largest: int) -> list[TargetForecast]:
    """Distance and qubits per target rate from the Lambda fit, or the reason there is none."""
    family = CODE_FAMILIES[code]
    allowed = np.array([d for d in range(1, MAX_DISTANCE + 1) if family.distance_problem(d) is None], dtype=np.int64)
    problem = constant_lambda_problem(fit)
    out = []
    for target in wanted:
        record = TargetForecast(float(target), not_projected=problem)
        if fit is not None and problem is None:
            central, low, high = distances_for_target(
                allowed, math.log(fit.C), math.log(fit.lam), math.log(target),
                np.asarray(fit.log_cov, dtype=np.float64), fit.lam_low, fit.lam_high)
            if fit.lam_low < NEAR_THRESHOLD_LAMBDA and (central is None or central > NEAR_THRESHOLD_REACH * largest):
                out.append(replace(record, not_projected=(
                    f"near threshold (Lambda {fit.lam:.3g} [{fit.lam_low:.3g}, {fit.lam_high:.3g}], its interval "
                    f"reaching below {NEAR_THRESHOLD_LAMBDA:g}), Lambda drifts with d, and this target would need d > "
                    f"{NEAR_THRESHOLD_REACH * largest}: a constant Lambda is not supported that far; forecast "
                    "larger distances instead")))
                continue
            record = replace(
                record, distance=central, distance_low=low, distance_high=high,
                qubits=None if central is None else family.qubit_count(central),
                qubits_low=None if low is None else family.qubit_count(low),
                qubits_high=None if high is None else family.qubit_count(high),
                reachable=central is not None,
                extrapolation=None if central is None else bool(central > largest),
            )
        out.append(record)
    return out
