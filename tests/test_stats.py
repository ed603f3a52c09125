"""Binomial intervals and the per-round conversion against published values."""

from __future__ import annotations

import math
from decimal import Decimal, getcontext
from fractions import Fraction

import pytest
from scipy.stats import norm

from codebench.stats import Z95, per_round, total_from_per_round, wilson_interval

# ---------------------------------------------------------------------------
# Wilson score interval.
# Source: Wilson, JASA 22, 209 (1927); worked values for k = 7, n = 50 at 95%
# and the k = 0, n = 1000 upper limit as listed in the project's check values
# (confirmed there).


def test_wilson_k7_n50_published_values() -> None:
    low, high = wilson_interval(7, 50)
    assert low == pytest.approx(0.0695083343, abs=1e-9)
    assert high == pytest.approx(0.2618619371, abs=1e-9)


def test_wilson_k0_n1000_published_upper_limit() -> None:
    low, high = wilson_interval(0, 1000)
    assert low == pytest.approx(0.0, abs=1e-15)
    assert high == pytest.approx(0.0038267585, abs=1e-9)


def test_z95_is_the_normal_quantile() -> None:
    # Two-sided 95% normal quantile, 1.959963984540054 (standard tables; common practice).
    assert Z95 == pytest.approx(float(norm.ppf(0.975)), abs=1e-12)


@pytest.mark.parametrize("confidence", [0.95, 0.9, 0.99, 0.999])
@pytest.mark.parametrize("k,n", [(1, 10), (7, 50), (50, 100), (3, 10_000), (999, 1000)])
def test_wilson_bounds_solve_the_score_equation(k: int, n: int, confidence: float) -> None:
    # Wilson (1927): the interval is the set of pi with |phat - pi| <= z sqrt(pi (1 - pi) / n),
    # so both ends are roots of (phat - pi)^2 = z^2 pi (1 - pi) / n, one below phat and one above.
    z = float(norm.ppf(0.5 + confidence / 2))
    phat = k / n
    low, high = wilson_interval(k, n, confidence)
    assert 0.0 <= low < phat < high <= 1.0
    for pi in (low, high):
        assert (phat - pi) ** 2 == pytest.approx(z * z * pi * (1 - pi) / n, rel=1e-9)


def test_wilson_interval_orders() -> None:
    # Common practice: wider at higher confidence, narrower with more shots,
    # both ends increase with k.
    a = wilson_interval(7, 50, 0.9)
    b = wilson_interval(7, 50, 0.95)
    c = wilson_interval(7, 50, 0.99)
    assert c[0] < b[0] < a[0] and a[1] < b[1] < c[1]
    big = wilson_interval(70, 500)
    assert big[1] - big[0] < b[1] - b[0]
    ends = [wilson_interval(k, 50) for k in range(51)]
    assert all(x[0] < y[0] for x, y in zip(ends[1:], ends[2:]))
    assert all(x[1] < y[1] for x, y in zip(ends, ends[1:-1]))
    assert ends[50][1] == pytest.approx(1.0, abs=1e-15)
    # Symmetry: k failures vs n - k failures mirror each other.
    lo, hi = wilson_interval(13, 40)
    lo2, hi2 = wilson_interval(27, 40)
    assert lo == pytest.approx(1 - hi2, abs=1e-15) and hi == pytest.approx(1 - lo2, abs=1e-15)


def test_wilson_without_shots() -> None:
    # No information: the whole unit interval (common practice).
    assert wilson_interval(0, 0) == (0.0, 1.0)


# ---------------------------------------------------------------------------
# Per-round conversion: eps = (1 - (1 - 2 P_L)^(1/r)) / 2 and its inverse
# P_L(r) = (1 - (1 - 2 eps)^r) / 2 (Acharya et al., Nature 614, 676 (2023);
# Acharya et al., Nature 638, 920 (2025)). Worked values as listed in the project's check values.


def test_per_round_published_values() -> None:
    assert per_round(0.2, 25) == pytest.approx(0.0101128426449, abs=1e-12)
    assert per_round(0.1, 10) == pytest.approx(0.0110336157285, abs=1e-12)


def test_total_from_per_round_published_value() -> None:
    # The worked value is given to 10 significant digits, so 1e-10 absolute;
    # the exact rational value is checked to 1e-12 relative below.
    assert total_from_per_round(0.001, 100) == pytest.approx(0.0907165977, abs=1e-10)


def _exact_total(eps: float, r: int) -> float:
    """(1 - (1 - 2 eps)^r) / 2 in exact rational arithmetic."""
    e = Fraction(eps)
    return float((1 - (1 - 2 * e) ** r) / 2)


def _precise_per_round(total: float, r: int) -> float:
    """(1 - (1 - 2 P)^(1/r)) / 2 with 50 significant digits."""
    getcontext().prec = 50
    base = 1 - 2 * Decimal(total)
    return float((1 - base ** (Decimal(1) / Decimal(r))) / 2)


@pytest.mark.parametrize("eps,r", [(0.001, 100), (0.01, 3), (0.2, 7), (1e-6, 1000), (0.3, 2), (0.0123, 1)])
def test_total_from_per_round_exact(eps: float, r: int) -> None:
    assert total_from_per_round(eps, r) == pytest.approx(_exact_total(eps, r), rel=1e-12)


@pytest.mark.parametrize("total,r", [(0.2, 25), (0.1, 10), (0.45, 3), (1e-5, 50), (0.03, 1), (0.4999, 2)])
def test_per_round_high_precision(total: float, r: int) -> None:
    assert per_round(total, r) == pytest.approx(_precise_per_round(total, r), rel=1e-12)


def test_total_equals_repeated_independent_flips() -> None:
    # The observable flips independently with probability eps each round, so
    # P_{k+1} = P_k (1 - eps) + (1 - P_k) eps (XOR of independent flips; common practice).
    eps, rounds = 0.0137, 40
    p = 0.0
    for k in range(1, rounds + 1):
        p = p * (1 - eps) + (1 - p) * eps
        assert total_from_per_round(eps, k) == pytest.approx(p, rel=1e-12)


@pytest.mark.parametrize("r", [1, 2, 5, 25, 100, 1000])
@pytest.mark.parametrize("total", [1e-12, 1e-6, 0.001, 0.05, 0.2, 0.35, 0.49])
def test_round_trip(total: float, r: int) -> None:
    eps = per_round(total, r)
    assert total_from_per_round(eps, r) == pytest.approx(total, rel=1e-10)
    assert per_round(total_from_per_round(eps, r), r) == pytest.approx(eps, rel=1e-10)


def test_one_round_is_the_identity() -> None:
    for x in (0.0, 1e-9, 0.01, 0.3, 0.49):
        assert per_round(x, 1) == pytest.approx(x, rel=1e-14, abs=1e-300)
        assert total_from_per_round(x, 1) == pytest.approx(x, rel=1e-14, abs=1e-300)


def test_small_rate_limit_keeps_precision() -> None:
    # First order in P: eps = P / r + O(P^2) (Taylor expansion; common practice).
    # A naive (1 - (1 - 2P)^(1/r)) / 2 in floating point loses all digits here.
    assert per_round(1e-15, 7) == pytest.approx(1e-15 / 7, rel=1e-12)
    assert total_from_per_round(1e-16, 9) == pytest.approx(9e-16, rel=1e-12)


def test_monotonicity() -> None:
    totals = [1e-9, 1e-4, 0.01, 0.1, 0.2, 0.3, 0.4, 0.49]
    for r in (2, 10, 100):
        values = [per_round(t, r) for t in totals]
        assert all(a < b for a, b in zip(values, values[1:]))
        assert all(v < t for v, t in zip(values, totals))  # more rounds, smaller per-round rate
    for t in (0.01, 0.3):
        by_rounds = [per_round(t, r) for r in (1, 2, 3, 10, 100)]
        assert all(a > b for a, b in zip(by_rounds, by_rounds[1:]))
    eps_grid = [1e-6, 1e-3, 0.01, 0.1, 0.3, 0.45]
    for r in (1, 3, 30):
        tot = [total_from_per_round(e, r) for e in eps_grid]
        assert all(a < b for a, b in zip(tot, tot[1:]))
    by_r = [total_from_per_round(0.01, r) for r in (1, 2, 5, 50, 500)]
    assert all(a < b for a, b in zip(by_r, by_r[1:]))
    assert all(v < 0.5 for v in by_r)


def test_saturation_and_bad_rounds() -> None:
    # P >= 1/2 carries no information: the per-round rate is 1/2 (common practice).
    assert per_round(0.5, 10) == 0.5
    assert per_round(0.7, 10) == 0.5
    assert total_from_per_round(0.5, 3) == 0.5
    assert total_from_per_round(1e-3, 10**6) == pytest.approx(0.5, abs=1e-12)
    with pytest.raises(ValueError):
        per_round(0.1, 0)
    assert math.isclose(per_round(0.0, 10), 0.0, abs_tol=0.0)


# ---------------------------------------------------------------------------
# The selectable intervals of codebench.stats (k = 7, n = 50, 95% two-sided).


def test_clopper_pearson_reference_values() -> None:
    # Clopper & Pearson, Biometrika 26, 404 (1934); the scipy.stats.binomtest documentation example.
    from codebench.stats import binomial_interval

    low, high = binomial_interval(7, 50, "clopper_pearson")
    assert low == pytest.approx(0.0581917003, abs=1e-9)
    assert high == pytest.approx(0.2673960025, abs=1e-9)
    # k = 0, n = 1000: upper limit 0.0036820839 (same source, exact formula 1 - 0.025^(1/n)).
    assert binomial_interval(0, 1000, "clopper_pearson")[1] == pytest.approx(0.0036820839, abs=1e-9)


def test_jeffreys_reference_values() -> None:
    # Beta(k + 1/2, n - k + 1/2) quantiles (Brown, Cai, DasGupta, Stat. Sci. 16, 101 (2001)).
    from codebench.stats import binomial_interval

    low, high = binomial_interval(7, 50, "jeffreys")
    assert low == pytest.approx(0.0648717, abs=1e-7)
    assert high == pytest.approx(0.2553250, abs=1e-7)


def test_unknown_interval_method_is_refused() -> None:
    from codebench.stats import binomial_interval

    with pytest.raises(ValueError, match="wilson"):
        binomial_interval(1, 10, "wald")


@pytest.mark.parametrize("method", ["wilson", "jeffreys", "clopper_pearson"])
def test_intervals_nest_the_estimate(method: str) -> None:
    # Common practice: an interval for k/n contains k/n and stays inside [0, 1].
    from codebench.stats import binomial_interval

    for k, n in [(0, 10), (1, 10), (5, 10), (10, 10), (3, 100000)]:
        low, high = binomial_interval(k, n, method)
        assert 0.0 <= low <= k / n <= high <= 1.0
