"""Binomial intervals and the per-round conversion.

Three intervals, selectable by name (:data:`INTERVALS`): ``wilson`` (the
default: good coverage at few failures, never outside [0, 1]), ``jeffreys``
(the equal-tailed Bayesian interval under a Beta(1/2, 1/2) prior) and
``clopper_pearson`` (exact, conservative). See Brown, Cai, DasGupta,
Stat. Sci. 16, 101 (2001) for their coverage.
"""

from __future__ import annotations

import math
from typing import Any, Callable, Literal


def _scipy_stats() -> Any:
    """scipy.stats, imported on first use: it costs about half a second, and workers and most
    commands never need it (the Wilson interval is closed-form)."""
    from scipy import stats

    return stats


IntervalMethod = Literal["wilson", "jeffreys", "clopper_pearson"]

Z95 = 1.959963984540054  # two-sided 95% normal quantile


def wilson_interval(k: int, n: int, confidence: float = 0.95) -> tuple[float, float]:
    """Wilson score interval for ``k`` successes in ``n`` trials (Wilson, JASA 22, 209 (1927)).

    >>> [round(x, 10) for x in wilson_interval(7, 50)]
    [0.0695083343, 0.2618619371]
    """
    if n <= 0:
        return 0.0, 1.0
    z = Z95 if confidence == 0.95 else float(_scipy_stats().norm.ppf(0.5 + confidence / 2))
    phat = k / n
    denom = 1 + z * z / n
    centre = (phat + z * z / (2 * n)) / denom
    half = z * math.sqrt(phat * (1 - phat) / n + z * z / (4 * n * n)) / denom
    # The exact ends at k = 0 and k = n (rounding would leave them a hair inside).
    low = 0.0 if k == 0 else max(0.0, centre - half)
    high = 1.0 if k == n else min(1.0, centre + half)
    return low, high


def jeffreys_interval(k: int, n: int, confidence: float = 0.95) -> tuple[float, float]:
    """Jeffreys interval: Beta(k + 1/2, n - k + 1/2) quantiles, with the usual end fixes.

    The lower end is 0 at k = 0 and the upper end 1 at k = n (Brown, Cai,
    DasGupta, Stat. Sci. 16, 101 (2001), Sec. 4.1.2).

    >>> [round(x, 7) for x in jeffreys_interval(7, 50)]
    [0.0648717, 0.255325]
    """
    if n <= 0:
        return 0.0, 1.0
    alpha = 1 - confidence
    beta = _scipy_stats().beta
    low = 0.0 if k == 0 else float(beta.ppf(alpha / 2, k + 0.5, n - k + 0.5))
    high = 1.0 if k == n else float(beta.ppf(1 - alpha / 2, k + 0.5, n - k + 0.5))
    return low, high


def clopper_pearson_interval(k: int, n: int, confidence: float = 0.95) -> tuple[float, float]:
    """Clopper-Pearson exact interval (Clopper & Pearson, Biometrika 26, 404 (1934)).

    >>> [round(x, 10) for x in clopper_pearson_interval(7, 50)]
    [0.0581917003, 0.2673960025]
    """
    if n <= 0:
        return 0.0, 1.0
    alpha = 1 - confidence
    beta = _scipy_stats().beta
    low = 0.0 if k == 0 else float(beta.ppf(alpha / 2, k, n - k + 1))
    high = 1.0 if k == n else float(beta.ppf(1 - alpha / 2, k + 1, n - k))
    return low, high


INTERVALS: dict[str, Callable[[int, int, float], tuple[float, float]]] = {
    "wilson": wilson_interval,
    "jeffreys": jeffreys_interval,
    "clopper_pearson": clopper_pearson_interval,
}


def binomial_interval(k: int, n: int, method: str = "wilson", confidence: float = 0.95) -> tuple[float, float]:
    """Two-sided interval for a binomial proportion by ``method`` (one of :data:`INTERVALS`)."""
    if method not in INTERVALS:
        raise ValueError(f"interval method must be one of {', '.join(INTERVALS)}; got {method!r}")
    return INTERVALS[method](k, n, confidence)


def per_round(total: float, rounds: int) -> float:
    """Per-round logical error from the failure probability of ``rounds`` rounds.

    eps = (1 - (1 - 2 P)^(1/r)) / 2, the inverse of P(r) = (1 - (1 - 2 eps)^r) / 2
    (independent flips of the observable each round). P >= 1/2 maps to 1/2.

    >>> round(per_round(0.2, 25), 13)
    0.0101128426449
    """
    if rounds < 1:
        raise ValueError(f"rounds must be >= 1; got {rounds}")
    if total >= 0.5:
        return 0.5
    return float(-math.expm1(math.log1p(-2 * total) / rounds) / 2)


def total_from_per_round(eps: float, rounds: int) -> float:
    """Failure probability after ``rounds`` rounds at per-round rate ``eps``.

    >>> round(total_from_per_round(0.001, 100), 10)
    0.0907165977
    """
    if rounds < 1:
        raise ValueError(f"rounds must be >= 1; got {rounds}")
    if eps >= 0.5:
        return 0.5
    return float(-math.expm1(rounds * math.log1p(-2 * eps)) / 2)


def paired_difference_interval(both: int, first_only: int, second_only: int, neither: int,
                               correlated: bool = True) -> tuple[float, float, float]:
    """Difference of two failure rates measured on the same shots, with its 95% interval.

    The shots form a 2x2 table: ``both`` failed under both decoders, ``first_only`` /
    ``second_only`` under one, ``neither``. The difference is (first_only - second_only) / n;
    the interval is Newcombe's hybrid score interval for paired proportions (method 10 of
    Newcombe, Statistics in Medicine 17, 2635 (1998)): the Wilson intervals of the two marginal
    rates combined with the correlation phi of the table. Shots where both decoders agree narrow
    it; that is the gain of decoding the same shots. ``correlated=False`` sets phi = 0: the
    interval the same two rates would have if measured on independent shots of the same size
    (Newcombe, Statistics in Medicine 17, 873 (1998), method 10), for comparison.

    >>> [round(x, 4) for x in paired_difference_interval(3, 10, 2, 985)]
    [0.008, 0.0011, 0.0165]
    >>> [round(x, 4) for x in paired_difference_interval(3, 10, 2, 985, correlated=False)]
    [0.008, -0.0006, 0.0176]
    """
    n = both + first_only + second_only + neither
    if n <= 0:
        return math.nan, -1.0, 1.0
    p1, p2 = (both + first_only) / n, (both + second_only) / n
    low1, high1 = wilson_interval(both + first_only, n)
    low2, high2 = wilson_interval(both + second_only, n)
    phi = 0.0
    margins = float(both + first_only) * (second_only + neither) * (both + second_only) * (first_only + neither)
    if correlated and margins > 0:
        phi = (float(both) * neither - float(first_only) * second_only) / math.sqrt(margins)
    difference = p1 - p2
    below = (p1 - low1) ** 2 - 2 * phi * (p1 - low1) * (high2 - p2) + (high2 - p2) ** 2
    above = (high1 - p1) ** 2 - 2 * phi * (high1 - p1) * (p2 - low2) + (p2 - low2) ** 2
    return difference, difference - math.sqrt(max(0.0, below)), difference + math.sqrt(max(0.0, above))


def exact_mcnemar_p(first_only: int, second_only: int) -> float:
    """Two-sided p-value of the exact McNemar test (McNemar, Psychometrika 12, 153 (1947)).

    Under "both decoders fail equally often", each discordant shot is the first decoder's failure
    with probability 1/2: a binomial test on the discordant shots alone.

    >>> round(exact_mcnemar_p(10, 2), 6)
    0.038574
    """
    discordant = first_only + second_only
    if discordant == 0:
        return 1.0
    return float(_scipy_stats().binomtest(first_only, discordant, 0.5).pvalue)
