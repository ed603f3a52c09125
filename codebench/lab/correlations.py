"""Detection-event statistics of measured shots: fractions, their model prediction, two-point estimates.

**Detection fraction.** Detector i fires in a fraction <x_i> of the shots. The model predicts it from
its detector error model: independent mechanisms k with probabilities p_k flip detector i; the parity
of independent Bernoulli variables is 1 with probability (1 - prod_k (1 - 2 p_k)) / 2 (common practice:
E[(-1)^(sum of the variables)] = prod_k (1 - 2 p_k)).

**Two-point estimate of an edge ("p_ij").** Suppose detectors i and j are flipped by three independent
sources: a (flips i only), b (j only) and c (both: the edge between i and j). Write s = 1 - 2x for the
+-1 form of a detection event. Then s_i = (1 - 2a)(1 - 2c), s_j = (1 - 2b)(1 - 2c) and s_i s_j =
(1 - 2a)(1 - 2b) (c appears twice and cancels). With A = 1 - 2p_a etc. and independence,
E[s_i] = A C, E[s_j] = B C, E[s_i s_j] = A B, so C^2 = E[s_i] E[s_j] / E[s_i s_j], and

    p_ij = p_c = 1/2 - 1/2 sqrt( (1 - 2<x_i>)(1 - 2<x_j>) / (1 - 2<x_i> - 2<x_j> + 4<x_i x_j>) ),

using E[s_i] = 1 - 2<x_i> and E[s_i s_j] = 1 - 2<x_i> - 2<x_j> + 4<x_i x_j>. Since the numerator equals
the denominator minus 4(<x_i x_j> - <x_i><x_j>), this is the form 1/2 - 1/2 sqrt(1 - 4(<x_i x_j> -
<x_i><x_j>) / (1 - 2<x_i> - 2<x_j> + 4<x_i x_j>)) used for the repetition- and surface-code
experiments of Google Quantum AI, Nature 595, 383 (2021), Supplementary Information, and by Spitz,
Tarasinski, Beenakker, O'Brien, Adv. Quantum Technol. 1, 1800012 (2018) (both from memory; the
derivation above is ours). It is exact for a graphlike model whose only source common to i and j is
the edge; a hyperedge touching both (a Y error) adds to it.

**Boundary edge.** Detector i alone: s_i = (1 - 2b_i) prod_j (1 - 2c_ij) over its edges, so
1 - 2 p_boundary = (1 - 2<x_i>) / prod_j (1 - 2 p_ij) (the same argument).

Statistical error: the estimates on ``BLOCKS`` consecutive blocks of shots scatter around the whole
estimate; the standard error is their standard deviation / sqrt(BLOCKS) (batch means, common practice).
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import stim

#: Blocks of shots whose estimates give the standard errors (batch means).
BLOCKS = 10
#: Shots per chunk when pair counts are accumulated (bounds memory: chunk x detectors floats).
CHUNK = 1 << 15


def predicted_fractions(dem: stim.DetectorErrorModel) -> np.ndarray:
    """The model's detection fraction of each detector: (1 - prod_k (1 - 2 p_k)) / 2 over its mechanisms."""
    product = np.ones(dem.num_detectors)
    for instruction in dem.flattened():
        if instruction.type != "error":
            continue
        p = instruction.args_copy()[0]
        # A detector named twice in one mechanism (in two components) is flipped twice: not at all.
        counts: dict[int, int] = {}
        for t in instruction.targets_copy():
            if t.is_relative_detector_id():
                counts[t.val] = counts.get(t.val, 0) + 1
        for d, times in counts.items():
            if times % 2:
                product[d] *= 1 - 2 * p
    return np.asarray((1 - product) / 2)


def model_pair_products(dem: stim.DetectorErrorModel) -> dict[tuple[int, int], float]:
    """prod_k (1 - 2 p_k) over the mechanisms k that flip both i and j, for every pair (i < j) some flips;
    under the key (i, -1), over the mechanisms that flip detector i alone."""
    products: dict[tuple[int, int], float] = {}
    for instruction in dem.flattened():
        if instruction.type != "error":
            continue
        factor = 1 - 2 * instruction.args_copy()[0]
        counts: dict[int, int] = {}
        for t in instruction.targets_copy():
            if t.is_relative_detector_id():
                counts[t.val] = counts.get(t.val, 0) + 1
        flipped = sorted(d for d, times in counts.items() if times % 2)
        if len(flipped) == 1:
            products[(flipped[0], -1)] = products.get((flipped[0], -1), 1.0) * factor
        for n, a in enumerate(flipped):
            for b in flipped[n + 1:]:
                products[(a, b)] = products.get((a, b), 1.0) * factor
    return products


def model_pair_probabilities(dem: stim.DetectorErrorModel, pairs: np.ndarray) -> np.ndarray:
    """What the two-point estimate gives on the model's own shots: (1 - prod_k (1 - 2 p_k)) / 2 over the
    mechanisms flipping both detectors (the derivation of the module docstring with c = all of them).

    This is the edge probability for a graphlike model, and includes the hyperedges (e.g. Y errors) that
    flip both detectors otherwise.
    """
    products = model_pair_products(dem)
    return np.array([(1 - products.get((int(min(i, j)), int(max(i, j))), 1.0)) / 2 for i, j in pairs])


def pair_probability(xi: np.ndarray, xj: np.ndarray, xij: np.ndarray) -> np.ndarray:
    """The two-point estimate p_ij from <x_i>, <x_j> and <x_i x_j> (NaN where it is not defined).

    Checked on the three-source model of the module docstring: a = 0.1, b = 0.2, c = 0.05 give
    <x_i> = 0.14, <x_j> = 0.23 and <x_i x_j> = P(c, not a) + P(a, b, not c) = 0.05 * 0.9 * 0.8 +
    0.1 * 0.2 * 0.95 = 0.055:

    >>> float(np.round(pair_probability(np.array(0.14), np.array(0.23), np.array(0.055)), 12))
    0.05
    """
    numerator = (1 - 2 * xi) * (1 - 2 * xj)
    denominator = 1 - 2 * xi - 2 * xj + 4 * xij
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where(denominator > 0, numerator / np.where(denominator > 0, denominator, 1), np.nan)
        return np.asarray(0.5 - 0.5 * np.sqrt(np.where(ratio >= 0, ratio, np.nan)))


def boundary_probability(xi: float, edge_probabilities: Sequence[float]) -> float:
    """p of detector i's boundary edge: 1 - 2p = (1 - 2<x_i>) / prod_j (1 - 2 p_ij) (NaN if undefined).

    A boundary source of 0.1 and one edge of 0.2 make <x_i> = 0.1 * 0.8 + 0.9 * 0.2 = 0.26:

    >>> round(boundary_probability(0.26, [0.2]), 12)
    0.1
    """
    denominator = float(np.prod([1 - 2 * p for p in edge_probabilities]))
    if denominator <= 0:
        return float("nan")
    return 0.5 - 0.5 * (1 - 2 * xi) / denominator


def fractions(events: np.ndarray) -> np.ndarray:
    """<x_i>: the fraction of shots in which each detector fired."""
    return np.asarray(events.mean(axis=0, dtype=np.float64))


def pair_fractions(events: np.ndarray, pairs: np.ndarray) -> np.ndarray:
    """<x_i x_j> for each row (i, j) of ``pairs``."""
    total = np.zeros(len(pairs))
    for start in range(0, len(events), CHUNK):
        chunk = events[start:start + CHUNK]
        total += np.count_nonzero(chunk[:, pairs[:, 0]] & chunk[:, pairs[:, 1]], axis=0)
    return total / max(1, len(events))


def pair_estimates(events: np.ndarray, pairs: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """p_ij for each row (i, j) of ``pairs`` and its standard error (batch means over ``BLOCKS`` blocks)."""
    def estimate(block: np.ndarray) -> np.ndarray:
        x = fractions(block)
        return pair_probability(x[pairs[:, 0]], x[pairs[:, 1]], pair_fractions(block, pairs))

    whole = estimate(events)
    blocks = [estimate(block) for block in np.array_split(events, BLOCKS) if len(block)]
    with np.errstate(invalid="ignore"):
        spread = np.std(np.array(blocks), axis=0, ddof=1) / np.sqrt(len(blocks)) if len(blocks) > 1 else \
            np.full(len(pairs), np.nan)
    return whole, np.asarray(spread)


def pair_matrix(events: np.ndarray) -> np.ndarray:
    """p_ij of every pair of detectors (symmetric, NaN on the diagonal): for the matrix figure."""
    d = events.shape[1]
    counts = np.zeros((d, d))
    for start in range(0, len(events), CHUNK):
        chunk = events[start:start + CHUNK].astype(np.float32)
        counts += chunk.T @ chunk
    x = fractions(events)
    matrix = pair_probability(x[:, None], x[None, :], counts / max(1, len(events)))
    np.fill_diagonal(matrix, np.nan)
    return matrix
