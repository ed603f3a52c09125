"""Code-capacity failure rates through the whole tool against exact results.

The Monte Carlo counts come from ``run_sweep`` (sampling, MWPM decoding and
storage all included); the references are a textbook closed form for the
repetition code and an exhaustive enumeration, done here, for the d = 3
rotated surface code. Seeds are fixed, so the tests are deterministic; each
comparison would fail by chance with probability about 0.1% for a seed.
"""

from __future__ import annotations

import itertools
import math

import numpy as np
import pandas as pd
import pytest
from scipy.stats import binomtest

from codebench.api import run_sweep
from codebench.codes import get_code_family

ALPHA = 0.001  # two-sided: 99.9% intervals
NEVER = 10**9  # failure_target large enough that the shot budget decides


def sweep(tmp_path, name: str, studies: list[dict], shots: int, seed: int) -> pd.DataFrame:
    config = {
        "name": name,
        "seed": seed,
        "stopping": {"failure_target": NEVER, "shot_budget": shots},
        "study": studies,
    }
    frame = run_sweep(config, out=tmp_path / name, workers=1, progress=False)
    assert (frame["shots"] == shots).all()
    return frame


def row(frame: pd.DataFrame, **match) -> pd.Series:
    sel = frame
    for key, value in match.items():
        sel = sel[np.isclose(sel[key], value)] if isinstance(value, float) else sel[sel[key] == value]
    assert len(sel) == 1, match
    return sel.iloc[0]


# ---------------------------------------------------------------------------
# Repetition code.
# Source: P_fail = sum_{k=(d+1)/2}^{d} C(d,k) p^k (1-p)^(d-k), majority vote
# = MWPM for odd d with independent flips and perfect checks (common textbook
# result, e.g. Nielsen & Chuang, "Quantum Computation and Quantum
# Information", Cambridge (2000), ch. 10).


def repetition_exact(d: int, p: float) -> float:
    return sum(math.comb(d, k) * p**k * (1 - p) ** (d - k) for k in range((d + 1) // 2, d + 1))


def test_repetition_formula_matches_hand_values() -> None:
    # d = 3: 3 p^2 (1 - p) + p^3 (the same textbook result, expanded by hand).
    p = 0.05
    assert repetition_exact(3, p) == pytest.approx(3 * p * p * (1 - p) + p**3, rel=1e-14)
    assert repetition_exact(3, 0.05) == pytest.approx(0.00725, rel=1e-12)
    assert repetition_exact(5, 0.5) == pytest.approx(0.5, rel=1e-14)


REPETITION_CASES = [
    # (basis, d, p, rounds)
    ("Z", 3, 0.05, 1),
    ("Z", 5, 0.1, 1),
    ("Z", 7, 0.2, 1),
    ("Z", 9, 0.3, 1),
    ("X", 7, 0.2, 1),  # X basis: Z flips detected by X X checks
    ("Z", 5, 0.1, 3),  # code capacity: extra perfect rounds change nothing
]


def test_repetition_code_capacity_matches_binomial_tail(tmp_path) -> None:
    studies = [
        {
            "code": "repetition", "distances": [d], "rounds": rounds, "basis": basis,
            "noise": "code_capacity", "p": [p], "decoders": ["mwpm"], "label": f"s{i}",
        }
        for i, (basis, d, p, rounds) in enumerate(REPETITION_CASES)
    ]
    frame = sweep(tmp_path, "rep", studies, shots=40_000, seed=20240611)
    for i, (basis, d, p, rounds) in enumerate(REPETITION_CASES):
        r = row(frame, study=f"s{i}")
        assert (r["distance"], r["basis"], r["rounds"]) == (d, basis, rounds)
        expected = repetition_exact(d, p)
        test = binomtest(int(r["failures"]), int(r["shots"]), expected)
        assert test.pvalue >= ALPHA, (basis, d, p, rounds, int(r["failures"]), int(r["shots"]), expected)


# ---------------------------------------------------------------------------
# Rotated surface code, d = 3: exhaustive enumeration of all 2^9 data errors.
# Source: exact enumeration with minimum-weight decoding per syndrome (the
# definition of a minimum-weight decoder, e.g. Dennis, Kitaev, Landahl,
# Preskill, J. Math. Phys. 43, 4452 (2002), Sec. IV); done in this file.
#
# For a memory in basis B the code-capacity errors are the flips the memory
# protects against (X flips for Z, Z flips for X); the syndrome comes from
# the checks of type B and the logical fails when error + correction has odd
# overlap with the logical of type B.
#
# Ties: for each syndrome we collect the logical classes of all minimum-weight
# corrections. If two classes tie, P_best takes the better one and P_worst
# the worse. Result for this layout (asserted below): there are NO ties
# between logical classes for d = 3 in either basis, so P_best == P_worst and
# MWPM must hit the exact value (16 syndromes; several have 2 or 3
# minimum-weight corrections, but those always lie in the same class).


def enumeration(basis: str) -> tuple[np.ndarray, np.ndarray, dict[int, set[int]]]:
    """Weights and logical classes of all 2^9 errors, and the tie sets per syndrome."""
    lay = get_code_family("rotated_surface").layout(3, basis)
    index = {q: i for i, q in enumerate(lay.data_qubits)}
    checks = lay.checks_of(basis)
    h = np.zeros((len(checks), 9), dtype=np.int64)
    for r, c in enumerate(checks):
        for q in c.support:
            h[r, index[q]] = 1
    logical = np.zeros(9, dtype=np.int64)
    for q in lay.logical(basis):
        logical[index[q]] = 1
    errors = np.array(list(itertools.product((0, 1), repeat=9)), dtype=np.int64)
    syndrome = ((errors @ h.T) % 2) @ (1 << np.arange(len(checks)))
    cls = (errors @ logical) % 2
    weight = errors.sum(axis=1)
    classes: dict[int, set[int]] = {}
    for s in np.unique(syndrome):
        m = syndrome == s
        wmin = weight[m].min()
        classes[int(s)] = set(cls[m & (weight == wmin)].tolist())
    return weight, np.stack([syndrome, cls]), classes


def exact_bounds(basis: str, p: float) -> tuple[float, float]:
    """(P_best, P_worst) of minimum-weight decoding at flip probability p."""
    weight, (syndrome, cls), classes = enumeration(basis)
    prob = p**weight * (1 - p) ** (9 - weight)
    best = worst = 0.0
    for s, choices in classes.items():
        m = syndrome == s
        fail = [float(prob[m & (cls != c)].sum()) for c in choices]
        best += min(fail)
        worst += max(fail)
    return best, worst


@pytest.mark.parametrize("basis", ["Z", "X"])
def test_enumeration_sanity(basis: str) -> None:
    weight, (syndrome, cls), classes = enumeration(basis)
    # 4 independent checks: all 16 syndromes occur, each from 2^9 / 16 errors.
    assert len(classes) == 16
    assert np.all(np.bincount(syndrome) == 32)
    # No ties between logical classes (see the comment above).
    assert all(len(c) == 1 for c in classes.values())
    best, worst = exact_bounds(basis, 0.1)
    assert best == worst
    # Leading order at small p: the weight-2 errors that fail. Distance 3 means
    # no weight-1 error fails, so P_fail / p^2 tends to a constant.
    small = exact_bounds(basis, 1e-4)[0]
    assert 1.0 < small / 1e-8 < 36.0  # at most C(9,2) = 36 failing weight-2 errors
    # p = 1/2: every error equally likely, the decoder is right half the time.
    assert exact_bounds(basis, 0.5)[0] == pytest.approx(0.5, abs=1e-12)


@pytest.mark.parametrize("basis", ["Z", "X"])
def test_rotated_surface_d3_code_capacity_matches_enumeration(tmp_path, basis: str) -> None:
    rates = [0.02, 0.05, 0.1]
    study = {
        "code": "rotated_surface", "distances": [3], "rounds": 1, "basis": basis,
        "noise": "code_capacity", "p": rates, "decoders": ["mwpm"],
    }
    frame = sweep(tmp_path, f"rs3{basis}", [study], shots=100_000, seed=77)
    for p in rates:
        r = row(frame, p=p)
        k, n = int(r["failures"]), int(r["shots"])
        best, worst = exact_bounds(basis, p)
        ci = binomtest(k, n).proportion_ci(confidence_level=1 - ALPHA, method="exact")
        # [P_best, P_worst] widened by the 99.9% Clopper-Pearson interval of the count.
        assert ci.low <= worst and best <= ci.high, (basis, p, k, n, best, worst)


def test_rotated_surface_d3_depolarizing_code_capacity(tmp_path) -> None:
    # DEPOLARIZE1(p) applies X, Y, Z each with p/3 (stim's definition), so a
    # Z-basis memory sees an X component with probability 2p/3 independently
    # per qubit: failure equals the flip model at 2p/3 (common practice).
    p = 0.15
    study = {
        "code": "rotated_surface", "distances": [3], "rounds": 1, "basis": "Z",
        "noise": "code_capacity", "noise_options": {"data_errors": "depolarize"},
        "p": [p], "decoders": ["mwpm"],
    }
    frame = sweep(tmp_path, "rs3dep", [study], shots=100_000, seed=91)
    r = frame.iloc[0]
    best, worst = exact_bounds("Z", 2 * p / 3)
    ci = binomtest(int(r["failures"]), int(r["shots"])).proportion_ci(confidence_level=1 - ALPHA)
    assert ci.low <= worst and best <= ci.high
