"""Rare-event estimation by fault count (codebench.forecast.rare_events, codebench.engine.fault_sampling).

References used below:

* Poisson-binomial distribution: the number of successes of independent
  Bernoulli trials with unequal probabilities; checked here by brute-force
  enumeration of every subset of a small model (exact; common practice).
* Conditional Bernoulli law: given exactly w successes, a set S has probability
  prod_{i in S} r_i / e_w(r) with r_i = p_i / (1 - p_i) (Chen, Dempster, Liu,
  Biometrika 81, 457 (1994), from memory; it follows from the definition of a
  conditional probability, which is what the test computes).
* Chernoff bound for sums of independent Bernoulli variables,
  P(W >= a) <= e^-mu (e mu / a)^a for a > mu (Mitzenmacher & Upfal,
  Probability and Computing (2005), Thm 4.4, from memory).
* stim's detector-error-model sampler (a reference library) records which
  mechanisms fired; our XOR of the mechanisms' rows must give its detection
  events and observable flips exactly.
* Pearson's chi-square goodness-of-fit test (scipy.stats.chisquare).
* Stratified against direct sampling: both estimate the same P_L; they must
  agree within their combined 95% intervals (common practice).
"""

from __future__ import annotations

import itertools
import math
from pathlib import Path

import numpy as np
import pytest
import stim
from scipy.stats import chisquare

from codebench.config import parse_sweep
from codebench.engine.fault_sampling import FaultTable, fault_shots, sample_fault_sets
from codebench.engine.local import InProcessExecutor
from codebench.engine.worker import compile_point, count_failures
from codebench.forecast.rare_events import (
    chernoff_tail,
    fit_spectrum,
    odds_spread,
    poisson_binomial,
    stratified_estimate,
    upper_bound_without_failures,
)
from codebench.forecast.strata import sample_point
from codebench.stats import wilson_interval

ROOT = Path(__file__).resolve().parents[1]
DEVICES = ROOT / "configs" / "devices"
PROBS = [0.02, 0.15, 0.3, 0.05, 0.5, 0.11, 0.27, 0.08]


def test_poisson_binomial_against_enumeration() -> None:
    """P(W = w) equals the sum over every subset of size w (brute force over 2^8 subsets; exact)."""
    exact = np.zeros(len(PROBS) + 1)
    for fired in itertools.product([0, 1], repeat=len(PROBS)):
        exact[sum(fired)] += math.prod(p if f else 1 - p for p, f in zip(PROBS, fired))
    pmf, tail = poisson_binomial(PROBS, len(PROBS))
    np.testing.assert_allclose(pmf, exact, rtol=1e-12, atol=1e-15)
    assert tail == pytest.approx(0.0, abs=1e-12)
    truncated, tail3 = poisson_binomial(PROBS, 3)
    np.testing.assert_allclose(truncated, exact[:4], rtol=1e-12)
    assert tail3 >= exact[4:].sum() - 1e-12  # a bound on what was cut off


def test_poisson_binomial_with_repeated_probabilities() -> None:
    """Many equal probabilities: the binomial (exact formula, common practice)."""
    pmf, _ = poisson_binomial([0.01] * 500, 6)
    binomial = [math.comb(500, k) * 0.01**k * 0.99 ** (500 - k) for k in range(7)]
    np.testing.assert_allclose(pmf, binomial, rtol=1e-10)


def test_chernoff_tail_bounds_the_exact_tail() -> None:
    """The Chernoff bound is never below the exact tail (Mitzenmacher & Upfal 2005, Thm 4.4)."""
    probs = [0.01] * 300
    pmf, _ = poisson_binomial(probs, 300)
    mean = 3.0
    for a in (5, 8, 12, 20):
        assert chernoff_tail(mean, a) >= pmf[a:].sum()


@pytest.mark.parametrize("faults", [2, 3])
def test_exactly_w_sets_follow_the_conditional_law(faults: int) -> None:
    """Sampled w-sets against prod r_i / e_w(r) (conditional Bernoulli law): chi-square, fixed seed."""
    odds = np.array([p / (1 - p) for p in PROBS[:6]])
    subsets = list(itertools.combinations(range(6), faults))
    weights = np.array([math.prod(odds[list(s)]) for s in subsets])
    expected_p = weights / weights.sum()
    shots = 120_000
    rows = sample_fault_sets(odds, faults, shots, np.random.default_rng(11))
    assert np.all(rows[:, 1:] > rows[:, :-1])  # distinct and sorted
    index = {s: i for i, s in enumerate(subsets)}
    counts = np.bincount([index[tuple(r)] for r in rows.tolist()], minlength=len(subsets))
    result = chisquare(counts, expected_p * shots)
    assert result.pvalue > 1e-3, result
    # The law does not change when every odds is multiplied by one factor.
    scaled = sample_fault_sets(odds * 7.5, faults, shots, np.random.default_rng(12))
    counts = np.bincount([index[tuple(r)] for r in scaled.tolist()], minlength=len(subsets))
    assert chisquare(counts, expected_p * shots).pvalue > 1e-3


def test_fault_rows_reproduce_stims_sampler() -> None:
    """XOR of the fired mechanisms' rows equals stim's own detection events and observables (reference library)."""
    circuit = stim.Circuit.generated("surface_code:rotated_memory_z", distance=3, rounds=3,
                                     after_clifford_depolarization=0.01, before_measure_flip_probability=0.01)
    dem = circuit.detector_error_model(decompose_errors=True)
    table = FaultTable.from_dem(dem)
    sampler = dem.compile_sampler(seed=3)
    dets, obs, errors = sampler.sample(4000, bit_packed=True, return_errors=True)
    fired = np.unpackbits(errors, axis=1, bitorder="little")[:, : table.probabilities.size].astype(bool)
    ours_d = np.zeros_like(dets)
    ours_o = np.zeros_like(obs)
    for w in np.unique(fired.sum(axis=1)):
        rows = np.flatnonzero(fired.sum(axis=1) == w)
        sets = np.array([np.flatnonzero(fired[r]) for r in rows], dtype=np.int64).reshape(rows.size, int(w))
        ours_d[rows], ours_o[rows] = fault_shots(table, sets)
    np.testing.assert_array_equal(ours_d, dets)
    np.testing.assert_array_equal(ours_o, obs)


def test_odds_spread_measures_common_scaling() -> None:
    """Scaling p by s changes odds by s (1 - p) / (1 - s p): a spread of about |s - 1| max p (exact algebra)."""
    p = np.array([1e-4, 1e-3, 5e-3])
    assert odds_spread(p, p * 2) == pytest.approx((1 - 5e-3) / (1 - 1e-2) / ((1 - 1e-4) / (1 - 2e-4)) - 1, rel=1e-9)
    assert odds_spread(p, p) == pytest.approx(0.0, abs=1e-15)


def test_spectrum_fit_recovers_a_known_spectrum() -> None:
    """Counts drawn from a one-term spectrum are fitted back within the binomial noise (self-consistency)."""
    rng = np.random.default_rng(5)
    ws = np.arange(4, 31, 2)
    truth = 0.5 * -np.expm1(-0.3 * np.array([math.comb(int(w), 4) for w in ws]) / math.comb(30, 4))
    shots = np.full(ws.size, 200_000)
    failures = rng.binomial(shots, truth)
    fit = fit_spectrum(ws, shots, failures, 4, 1, 0.5)
    np.testing.assert_allclose(fit(ws), truth, rtol=0.08)


def test_stratified_sum_equals_the_exact_sum_when_every_stratum_is_empirical() -> None:
    """With f(w) observed everywhere, P_L = sum_w P(W = w) f(w) exactly (the definition)."""
    pmf, tail = poisson_binomial([0.05] * 40, 12)
    strata = {w: (10_000, int(10_000 * min(0.5, 0.002 * w**2))) for w in range(1, 13)}
    estimate = stratified_estimate(pmf, tail, strata, 3, 1)
    exact = sum(pmf[w] * strata[w][1] / strata[w][0] for w in strata)
    assert estimate.rate == pytest.approx(exact, rel=1e-12)
    assert estimate.low <= estimate.rate <= estimate.high
    assert not estimate.extrapolated


def test_upper_bound_without_failures() -> None:
    """No failure seen: the bound is at least the Wilson upper limit weighted by P(W = w) (monotone f)."""
    pmf, tail = poisson_binomial([0.01] * 100, 20)
    strata = {w: (5000, 0) for w in range(1, 9)}
    bound = upper_bound_without_failures(pmf, tail, strata)
    wilson_high = wilson_interval(0, 5000)[1]
    assert bound >= pmf[1:9].sum() * wilson_high
    assert bound <= 1.0


# --- stratified against direct -------------------------------------------------------------------


def _point(study: dict[str, object], seed: int = 7) -> object:
    return parse_sweep({"name": "t", "seed": seed, "study": [study]}, source="test").points[0]


def _direct(point: object, shots: int, seed: int) -> tuple[int, int]:
    compiled = compile_point(point.params())  # type: ignore[attr-defined]
    sampler = compiled.circuit.compile_detector_sampler(seed=seed)
    failures = 0
    for _ in range(shots // 50_000):
        dets, obs = sampler.sample(50_000, separate_observables=True, bit_packed=True)
        failures += count_failures(compiled.decoder.decode_batch(dets, bit_packed=True), obs)
    return shots, failures


def _log_agree(rate: float, low: float, high: float, k: int, n: int) -> None:
    """Combined-interval agreement on the log scale (common practice)."""
    d_low, d_high = wilson_interval(k, n)
    se_a = (math.log(high) - math.log(low)) / (2 * 1.959963984540054)
    se_b = (math.log(d_high) - math.log(d_low)) / (2 * 1.959963984540054)
    z = abs(math.log(rate) - math.log(k / n)) / math.hypot(se_a, se_b)
    assert z <= 2.58, (rate, low, high, k / n, z)  # 99%: several comparisons run in one test module


CASES = [
    ("si1000 d=3", {"code": "rotated_surface", "distances": [3], "rounds": "d", "basis": ["Z"],
                    "noise": "si1000", "p": [0.002], "decoders": ["mwpm"]}, 500_000),
    ("si1000 d=5", {"code": "rotated_surface", "distances": [5], "rounds": "d", "basis": ["Z"],
                    "noise": "si1000", "p": [0.002], "decoders": ["mwpm"]}, 500_000),
    ("device d=3", {"code": "rotated_surface", "distances": [3], "rounds": "d", "basis": ["Z"],
                    "noise": "device", "device": str(DEVICES / "larkspur_improved.toml"), "scale": [1.0],
                    "decoders": ["mwpm"]}, 500_000),
    ("device d=5", {"code": "rotated_surface", "distances": [5], "rounds": "d", "basis": ["Z"],
                    "noise": "device", "device": str(DEVICES / "larkspur_improved.toml"), "scale": [1.0],
                    "decoders": ["mwpm"]}, 1_500_000),
]
SLOW_CASES = [
    ("si1000 d=7", {"code": "rotated_surface", "distances": [7], "rounds": "d", "basis": ["Z"],
                    "noise": "si1000", "p": [0.002], "decoders": ["mwpm"]}, 2_000_000),
    ("device d=7", {"code": "rotated_surface", "distances": [7], "rounds": "d", "basis": ["Z"],
                    "noise": "device", "device": str(DEVICES / "larkspur_improved.toml"), "scale": [1.0],
                    "decoders": ["mwpm"]}, 10_000_000),
]


def _compare(study: dict[str, object], shots: int) -> None:
    point = _point(study)
    result = sample_point(point, 7, InProcessExecutor(), 2e8, lambda _: None)  # type: ignore[arg-type]
    assert result.estimate is not None
    n, k = _direct(point, shots, seed=99)
    assert k >= 100
    _log_agree(result.estimate.rate, result.estimate.low, result.estimate.high, k, n)


@pytest.mark.parametrize("label, study, shots", CASES, ids=[c[0] for c in CASES])
def test_stratified_agrees_with_direct(label: str, study: dict[str, object], shots: int) -> None:
    """Stratified and direct estimates of the same point agree (common practice: same quantity, two methods)."""
    _compare(study, shots)


@pytest.mark.slow
@pytest.mark.parametrize("label, study, shots", SLOW_CASES, ids=[c[0] for c in SLOW_CASES])
def test_stratified_agrees_with_direct_d7(label: str, study: dict[str, object], shots: int) -> None:
    """As above at d = 7 (minutes of direct sampling)."""
    _compare(study, shots)


@pytest.mark.parametrize("faults", [2, 3])
def test_sequential_sets_follow_the_conditional_law(faults: int) -> None:
    """The exact fallback for small models (sequential inclusion; Chen, Dempster, Liu, Biometrika 81, 457
    (1994), from memory) against prod r_i / e_w(r): chi-square, fixed seed."""
    from codebench.engine.fault_sampling import _sequential_sets

    odds = np.array([p / (1 - p) for p in PROBS[:6]])
    subsets = list(itertools.combinations(range(6), faults))
    weights = np.array([math.prod(odds[list(s)]) for s in subsets])
    rows = _sequential_sets(odds, faults, 60_000, np.random.default_rng(3))
    index = {s: i for i, s in enumerate(subsets)}
    counts = np.bincount([index[tuple(r)] for r in rows.tolist()], minlength=len(subsets))
    assert chisquare(counts, weights / weights.sum() * 60_000).pvalue > 1e-3


def test_repetition_code_forecast_is_stratified_without_error() -> None:
    """A repetition code's small model (a few dominant mechanisms) falls back to the exact sequential draw."""
    from codebench.forecast import forecast

    result = forecast(DEVICES / "larkspur_improved.toml", code="repetition", distances=(3, 5), work=3e7,
                      workers=1, method="stratified")
    assert all(r.per_round_rate is not None or r.high is not None for r in result.distances)
