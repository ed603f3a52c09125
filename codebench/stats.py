"""Binomial intervals and the per-round conversion."""

from __future__ import annotations

import math

from scipy import stats as _st

Z95 = 1.959963984540054  # two-sided 95% normal quantile


def wilson_interval(k: int, n: int, confidence: float = 0.95) -> tuple[float, float]:
    """Wilson score interval for ``k`` successes in ``n`` trials (Wilson, JASA 22, 209 (1927)).

    >>> [round(x, 10) for x in wilson_interval(7, 50)]
    [0.0695083343, 0.2618619371]
    """
    if n <= 0:
        return 0.0, 1.0
    z = Z95 if confidence == 0.95 else float(_st.norm.ppf(0.5 + confidence / 2))
    phat = k / n
    denom = 1 + z * z / n
    centre = (phat + z * z / (2 * n)) / denom
    half = z * math.sqrt(phat * (1 - phat) / n + z * z / (4 * n * n)) / denom
    return max(0.0, centre - half), min(1.0, centre + half)


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
