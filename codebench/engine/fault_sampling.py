"""Shots with exactly ``w`` faults: conditional Bernoulli sampling from a detector error model.

A detector error model is a list of independent mechanisms i that fire with
probability p_i; each flips a set of detectors and observables. Given that
exactly w of them fire, the set S that fired has

    P(S | W = w) = prod_{i in S} r_i / e_w(r),   r_i = p_i / (1 - p_i),

with e_w the elementary symmetric polynomial of degree w (the conditional
Bernoulli law; Chen, Dempster, Liu, Biometrika 81, 457 (1994), from memory).

Sampling method (exact, our derivation): draw w mechanisms one after the
other *with replacement*, each with probability r_i / R (R = sum r_i), and
keep the draw only if the w mechanisms are distinct. An ordered draw
(i_1, ..., i_w) has probability prod r_(i_j) / R^w; a set S of w distinct
mechanisms arises from w! orders, so P(S, distinct) = w! prod_{i in S} r_i / R^w,
which is proportional to prod r_i: conditioned on being distinct, S has exactly
the law above. The acceptance probability is w! e_w(r) / R^w, close to 1 when
no few mechanisms dominate R (for a surface code of thousands of mechanisms and
w up to about 60 it stays above 0.5). ``tests/test_rare_events.py`` checks the
sampled sets against the exact conditional law by a chi-square test.

Multiplying every r_i by the same factor leaves this law unchanged, so one
table of failure fractions per w serves every such scaling of the noise
(:mod:`codebench.forecast.rare_events`).

The detection events of a shot are the XOR of its mechanisms' detector rows,
kept bit-packed (little-endian bits, as stim writes them) so the decoder gets
exactly what the engine's stim sampler would give it.
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass

import numpy as np
import numpy.typing as npt
import stim

__all__ = ["FaultTable", "sample_fault_sets", "fault_shots", "fault_batch_seed"]

#: Redraws of rejected (repeated-mechanism) shots before giving up.
MAX_REDRAWS = 200


@dataclass(frozen=True)
class FaultTable:
    """The mechanisms of a detector error model as bit-packed rows.

    ``detectors[i]`` / ``observables[i]``: the detectors and observables that
    mechanism i flips (XOR over its decomposed parts), packed little-endian.
    """

    probabilities: npt.NDArray[np.float64]
    detectors: npt.NDArray[np.uint8]
    observables: npt.NDArray[np.uint8]
    num_detectors: int
    num_observables: int

    @classmethod
    def from_dem(cls, dem: stim.DetectorErrorModel) -> FaultTable:
        """One row per ``error`` instruction of the flattened model.

        >>> dem = stim.DetectorErrorModel("error(0.1) D0 D1\\nerror(0.2) D1 ^ D2 L0")
        >>> table = FaultTable.from_dem(dem)
        >>> table.detectors.tolist(), table.observables.tolist()
        ([[3], [6]], [[0], [1]])
        """
        probs: list[float] = []
        rows: list[tuple[set[int], set[int]]] = []
        for instruction in dem.flattened():
            if instruction.type != "error":
                continue
            dets: set[int] = set()
            obs: set[int] = set()
            for target in instruction.targets_copy():
                if target.is_relative_detector_id():
                    dets ^= {target.val}
                elif target.is_logical_observable_id():
                    obs ^= {target.val}
            probs.append(float(instruction.args_copy()[0]))
            rows.append((dets, obs))
        n_det, n_obs = dem.num_detectors, dem.num_observables
        det_bits = np.zeros((len(rows), max(1, n_det)), dtype=np.bool_)
        obs_bits = np.zeros((len(rows), max(1, n_obs)), dtype=np.bool_)
        for i, (dets, obs) in enumerate(rows):
            det_bits[i, list(dets)] = True
            obs_bits[i, list(obs)] = True
        det_bits, obs_bits = det_bits[:, :n_det], obs_bits[:, :n_obs]
        return cls(np.asarray(probs, dtype=np.float64), np.packbits(det_bits, axis=1, bitorder="little"),
                   np.packbits(obs_bits, axis=1, bitorder="little"), n_det, n_obs)

    @property
    def odds(self) -> npt.NDArray[np.float64]:
        p = self.probabilities
        return np.asarray(p / (1.0 - p), dtype=np.float64)

    def structure_digest(self) -> str:
        """Digest of which detectors and observables each mechanism flips (not of the probabilities)."""
        digest = hashlib.sha256()
        digest.update(self.detectors.tobytes())
        digest.update(self.observables.tobytes())
        digest.update(f"{self.num_detectors}:{self.num_observables}".encode())
        return digest.hexdigest()[:16]


def sample_fault_sets(odds: npt.NDArray[np.float64], faults: int, shots: int,
                      rng: np.random.Generator) -> npt.NDArray[np.int64]:
    """``shots`` sets of exactly ``faults`` distinct mechanisms, each from the conditional Bernoulli law.

    Returns an int64 array of shape ``(shots, faults)`` (indices, each row sorted).

    >>> rows = sample_fault_sets(np.array([1.0, 1.0, 1.0]), 2, 4, np.random.default_rng(0))
    >>> rows.shape, bool(np.all(rows[:, 0] < rows[:, 1]))
    ((4, 2), True)
    """
    n = odds.size
    if not 0 <= faults <= n:
        raise ValueError(f"faults must be in [0, {n}]; got {faults}.")
    if faults == 0:
        return np.zeros((shots, 0), dtype=np.int64)
    cumulative = np.cumsum(odds)
    total = float(cumulative[-1])
    out = np.empty((shots, faults), dtype=np.int64)
    missing = np.arange(shots)
    for _ in range(MAX_REDRAWS):
        draws = np.searchsorted(cumulative, rng.random((missing.size, faults)) * total, side="right")
        draws = np.minimum(draws, n - 1)
        draws.sort(axis=1)
        distinct = np.all(draws[:, 1:] != draws[:, :-1], axis=1) if faults > 1 else np.ones(missing.size, bool)
        out[missing[distinct]] = draws[distinct]
        missing = missing[~distinct]
        if missing.size == 0:
            return out
    # A few mechanisms dominate the odds (small models, such as short repetition codes): draw the rest
    # exactly by sequential inclusion instead.
    out[missing] = _sequential_sets(odds, faults, missing.size, rng)
    return out


def _sequential_sets(odds: npt.NDArray[np.float64], faults: int, shots: int,
                     rng: np.random.Generator) -> npt.NDArray[np.int64]:
    """Exact conditional Bernoulli sets by sequential inclusion (Chen, Dempster, Liu, Biometrika 81, 457
    (1994), from memory): mechanism i joins, with m still to choose, with probability
    r_i e_(m-1)(r_(i+1..)) / e_m(r_(i..)), from the elementary symmetric polynomials of the suffixes.
    O(mechanisms x faults) per call, for the small models where rejection fails."""
    n = odds.size
    r = odds / odds.mean()  # scaled: the law given w does not change, and the polynomials stay finite
    suffix = np.zeros((n + 1, faults + 1))
    suffix[n, 0] = 1.0
    for i in range(n - 1, -1, -1):
        suffix[i, 0] = 1.0
        suffix[i, 1:] = suffix[i + 1, 1:] + r[i] * suffix[i + 1, :-1]
    remaining = np.full(shots, faults, dtype=np.int64)
    chosen = np.zeros((shots, faults), dtype=np.int64)
    filled = np.zeros(shots, dtype=np.int64)
    for i in range(n):
        active = remaining > 0
        if not np.any(active):
            break
        m = remaining[active]
        p = r[i] * suffix[i + 1, m - 1] / suffix[i, m]
        take = rng.random(m.size) < p
        rows = np.flatnonzero(active)[take]
        chosen[rows, filled[rows]] = i
        filled[rows] += 1
        remaining[rows] -= 1
    return chosen


def fault_shots(table: FaultTable, fault_sets: npt.NDArray[np.int64]) -> tuple[np.ndarray, np.ndarray]:
    """Bit-packed detection events and observable flips of each fault set (XOR of the mechanisms' rows)."""
    shots = fault_sets.shape[0]
    detectors = np.zeros((shots, table.detectors.shape[1]), dtype=np.uint8)
    observables = np.zeros((shots, table.observables.shape[1]), dtype=np.uint8)
    for column in range(fault_sets.shape[1]):
        np.bitwise_xor(detectors, table.detectors[fault_sets[:, column]], out=detectors)
        np.bitwise_xor(observables, table.observables[fault_sets[:, column]], out=observables)
    return detectors, observables


def fault_batch_seed(sweep_seed: int, point_key: str, faults: int, batch_index: int, shots: int) -> int:
    """Seed of one exactly-w batch, from the seed, the point, w, the batch and its size."""
    text = f"faults:{sweep_seed}:{point_key}:{faults}:{batch_index}:{shots}"
    return int.from_bytes(hashlib.sha256(text.encode()).digest()[:8], "little") >> 1
