"""The model's matching graph, its edges re-weighted from measured detection events, and who each edge is.

The graph is the model's detector error model decomposed into graphlike parts (stim's
``decompose_errors``): every part flips one detector (a boundary edge) or two (an edge), and some
observables. An edge's model probability combines every part on it as independent sources
(p <- p (1 - q) + q (1 - p)). :func:`reweighted_model` writes the same graph with each probability
replaced by the data's two-point estimate (edges) or boundary estimate (boundary edges; see
:mod:`codebench.lab.correlations`), with the model's detector coordinates and observables. Where an
estimate is not defined, or below ``floor`` (half a shot's worth), the floor is used: the data say
the edge is at most that likely.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import stim

from codebench.lab.correlations import (
    boundary_probability,
    fractions,
    model_pair_products,
    pair_estimates,
)

BOUNDARY = -1


@dataclass(frozen=True)
class Graph:
    """Edges (i, j), j = BOUNDARY for a boundary edge, with model probabilities and observable masks."""

    num_detectors: int
    num_observables: int
    edges: list[tuple[int, int]]
    probabilities: np.ndarray
    observables: list[int]
    coords: dict[int, list[float]]
    #: What the data's estimate of each edge should be if the model were right: the two-point value of
    #: every mechanism flipping both ends (hyperedges included) for an edge, of every mechanism flipping its
    #: detector alone for a boundary edge (the model not decomposed; a decomposition may split a two-detector
    #: mechanism into two boundary parts).
    expected: np.ndarray

    @property
    def pairs(self) -> np.ndarray:
        inner = [(i, j) for i, j in self.edges if j != BOUNDARY]
        return np.array(inner, dtype=np.int64).reshape(-1, 2)


def model_graph(dem: stim.DetectorErrorModel, full: stim.DetectorErrorModel | None = None) -> Graph:
    """The graph of a decomposed detector error model; ``full``, the same model not decomposed, gives the
    edges' expected two-point values (else they are the edge probabilities)."""
    probability: dict[tuple[int, int], float] = {}
    observable: dict[tuple[int, int], int] = {}
    for instruction in dem.flattened():
        if instruction.type != "error":
            continue
        p = instruction.args_copy()[0]
        detectors: list[int] = []
        mask = 0
        for target in [*instruction.targets_copy(), stim.target_separator()]:
            if target.is_separator():
                if detectors:
                    ends = sorted(detectors)
                    key = (ends[0], ends[1]) if len(ends) == 2 else (ends[0], BOUNDARY)
                    if len(ends) <= 2:
                        q = probability.get(key, 0.0)
                        probability[key] = q * (1 - p) + p * (1 - q)
                        observable.setdefault(key, mask)
                detectors, mask = [], 0
            elif target.is_relative_detector_id():
                detectors.append(target.val)
            elif target.is_logical_observable_id():
                mask ^= 1 << target.val
    edges = sorted(probability)
    probabilities = np.array([probability[e] for e in edges])
    expected = probabilities.copy()
    if full is not None:
        products = model_pair_products(full)
        for n, edge in enumerate(edges):
            expected[n] = (1 - products.get(edge, 1.0)) / 2
    return Graph(dem.num_detectors, dem.num_observables, edges, probabilities, [observable[e] for e in edges],
                 {k: list(v) for k, v in dem.get_detector_coordinates().items()}, expected)


@dataclass(frozen=True)
class EdgeEstimates:
    """The data's probability of every edge of a graph (same order), with standard errors where defined."""

    graph: Graph
    probabilities: np.ndarray
    errors: np.ndarray
    shots: int


def estimate_edges(graph: Graph, events: np.ndarray) -> EdgeEstimates:
    """Two-point estimates of the graph's edges and boundary estimates of its boundary edges."""
    pairs = graph.pairs
    inner, inner_error = pair_estimates(events, pairs) if len(pairs) else (np.zeros(0), np.zeros(0))
    estimate = {(int(i), int(j)): (float(p), float(e)) for (i, j), p, e in zip(pairs, inner, inner_error)}
    x = fractions(events)
    touching: dict[int, list[float]] = {}
    for (i, j), (p, _) in estimate.items():
        if np.isfinite(p):
            touching.setdefault(i, []).append(p)
            touching.setdefault(j, []).append(p)
    probabilities, errors = [], []
    for i, j in graph.edges:
        if j == BOUNDARY:
            p = boundary_probability(float(x[i]), touching.get(i, []))
            # Its error is dominated by that of <x_i> (binomial), propagated through 1 - 2p.
            e = float(np.sqrt(x[i] * (1 - x[i]) / max(1, len(events))))
        else:
            p, e = estimate[(i, j)]
        probabilities.append(p)
        errors.append(e)
    return EdgeEstimates(graph, np.array(probabilities), np.array(errors), len(events))


def reweighted_model(estimates: EdgeEstimates) -> stim.DetectorErrorModel:
    """The graph as a detector error model with the data's probabilities (see the module docstring)."""
    graph = estimates.graph
    floor = 0.5 / max(1, estimates.shots)
    lines = []
    for (i, j), p, mask in zip(graph.edges, estimates.probabilities, graph.observables):
        value = float(p) if np.isfinite(p) and p > floor else floor
        value = min(value, 0.499)
        targets = [f"D{i}"] + ([f"D{j}"] if j != BOUNDARY else [])
        targets += [f"L{k}" for k in range(graph.num_observables) if mask >> k & 1]
        lines.append(f"error({value!r}) {' '.join(targets)}")
    for k in range(graph.num_detectors):
        coords = graph.coords.get(k, [])
        lines.append(f"detector({', '.join(repr(float(c)) for c in coords)}) D{k}" if coords else f"detector D{k}")
    lines.extend(f"logical_observable L{k}" for k in range(graph.num_observables))
    return stim.DetectorErrorModel("\n".join(lines))
