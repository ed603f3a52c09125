"""Where measured shots depart from the model: detectors, qubits, rounds, edges.

- Per detector: the measured detection fraction with its 95% Wilson interval against the model's
  prediction (1 - prod_k (1 - 2 p_k)) / 2, and z = (measured - predicted) / sqrt(predicted (1 -
  predicted) / shots) (binomial standard error under the model; common practice).
- Per qubit, from detection fractions: the detectors sitting on a qubit (its measure qubit), pooled
  over rounds (and per round, pooled over qubits): excess = sum of (measured - predicted) / number of its detectors, z = sum of the excesses
  / sqrt(sum of the variances). A readout that is worse than the model says shows here first.
- Per edge of the model's graph: the data's estimate (two-point or boundary; see
  :mod:`codebench.lab.correlations`) with its standard error, against the model's probability.
- Per fault source (a qubit's idle decoherence, gates, readout, reset; a pair's two-qubit gate): how
  much of the edges' departure that source alone explains (:mod:`codebench.lab.attribution`). A data
  qubit noisier than the model says, which has no detector of its own, shows here.
- The pairs of detectors that are not an edge of the model but correlate most (two-point estimate
  over its standard error), where the experiment has at most ``MATRIX_LIMIT`` detectors.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable

import numpy as np
import stim

from codebench.lab.attribution import Source, rank_sources
from codebench.lab.correlations import (
    model_pair_probabilities,
    pair_estimates,
    pair_matrix,
    predicted_fractions,
)
from codebench.lab.decoding import Decoded, data_weighted, model_weighted
from codebench.lab.experiment import Experiment
from codebench.lab.graph import BOUNDARY, EdgeEstimates, estimate_edges, model_graph
from codebench.qasm.description import Description
from codebench.stats import binomial_interval

#: Largest detector count for which every pair is estimated (the matrix figure, unexpected pairs).
MATRIX_LIMIT = 600
#: Rows of the ranked lists that are printed.
SHOWN = 10


@dataclass(frozen=True)
class DetectorRow:
    index: int
    qubit: str
    round: int
    coords: tuple[float, ...]
    fired: int
    shots: int
    low: float
    high: float
    predicted: float

    @property
    def fraction(self) -> float:
        return self.fired / self.shots

    @property
    def z(self) -> float:
        sigma = math.sqrt(max(self.predicted * (1 - self.predicted), 1e-300) / self.shots)
        return (self.fraction - self.predicted) / sigma


@dataclass(frozen=True)
class QubitRow:
    qubit: str
    role: str
    excess: float
    z: float
    items: int


@dataclass(frozen=True)
class EdgeRow:
    first: int
    second: int | None
    model: float
    expected: float
    data: float
    error: float

    @property
    def z(self) -> float:
        """The departure of the data's estimate from its value under the model, in standard errors."""
        if not (math.isfinite(self.data) and math.isfinite(self.error)) or self.error <= 0:
            return float("nan")
        return (self.data - self.expected) / self.error


@dataclass(frozen=True)
class PairRow:
    first: int
    second: int
    expected: float
    data: float
    error: float

    @property
    def z(self) -> float:
        return (self.data - self.expected) / self.error if self.error > 0 else float("nan")


@dataclass
class Departures:
    experiment: Experiment
    shots: int
    detectors: list[DetectorRow]
    by_fraction: list[QubitRow]
    by_round: list[QubitRow]
    edges: list[EdgeRow]
    sources: list[Source]
    pairs: list[PairRow]
    matrix: np.ndarray | None
    estimates: EdgeEstimates
    model_decoded: Decoded | None = None
    data_decoded: Decoded | None = None

    @property
    def worst_detectors(self) -> list[DetectorRow]:
        return sorted(self.detectors, key=lambda r: -r.z)


def analyse(experiment: Experiment, dets: np.ndarray, obs: np.ndarray | None = None) -> Departures:
    """Every departure of the shots from the model; with ``obs``, also model- vs data-weighted decoding."""
    shots = len(dets)
    description = experiment.description
    predicted = predicted_fractions(experiment.model(False))
    fired = np.count_nonzero(dets, axis=0)
    rows = []
    for k, (_, coords) in enumerate(description.detectors):
        low, high = binomial_interval(int(fired[k]), shots)
        rows.append(DetectorRow(k, description.detector_qubit(k), description.detector_round(k), coords,
                                int(fired[k]), shots, low, high, float(predicted[k])))
    graph = model_graph(experiment.model(True), experiment.model(False))
    estimates = estimate_edges(graph, dets)
    # Qubit i of the description is the i-th qubit of the circuit (codebench numbers them in that order).
    by_index = {q.index: q.name for q in description.qubits}
    names = {q: by_index[n] for n, q in enumerate(sorted(experiment.circuit.get_final_qubit_coordinates()))}
    edges = [EdgeRow(i, None if j == BOUNDARY else j, float(p_model), float(p_expected), float(p_data), float(err))
             for (i, j), p_model, p_expected, p_data, err in zip(graph.edges, graph.probabilities, graph.expected,
                                                                 estimates.probabilities, estimates.errors)]
    matrix, pairs = _unexpected_pairs(dets, experiment.model(False), set(graph.edges))
    result = Departures(experiment, shots, rows, _by_fraction(rows, description),
                        _pooled(rows, lambda r: f"round {r.round}", lambda _: "round"), edges,
                        rank_sources(experiment.circuit, estimates, names), pairs, matrix, estimates)
    if obs is not None:
        result.model_decoded = model_weighted(experiment, dets, obs)
        result.data_decoded = data_weighted(experiment, dets, obs)
    return result


def _by_fraction(rows: list[DetectorRow], description: Description) -> list[QubitRow]:
    """Qubits ranked by the pooled departure of their detectors."""
    roles = {q.name: q.role for q in description.qubits}
    return _pooled(rows, lambda r: r.qubit, lambda name: roles.get(name, ""))


def _pooled(rows: list[DetectorRow], key: Callable[[DetectorRow], str], role: Callable[[str], str]) -> list[QubitRow]:
    """Detectors pooled by ``key``: mean excess per detector, z of the summed excess; ranked by z."""
    groups: dict[str, list[DetectorRow]] = {}
    for row in rows:
        groups.setdefault(key(row), []).append(row)
    out = []
    for name, members in groups.items():
        excess = sum(r.fraction - r.predicted for r in members)
        variance = sum(r.predicted * (1 - r.predicted) / r.shots for r in members)
        out.append(QubitRow(name, role(name), excess / len(members),
                            excess / math.sqrt(variance) if variance > 0 else float("nan"), len(members)))
    return sorted(out, key=lambda r: -r.z if math.isfinite(r.z) else math.inf)


def _unexpected_pairs(dets: np.ndarray, dem: stim.DetectorErrorModel,
                      edges: set[tuple[int, int]]) -> tuple[np.ndarray | None, list[PairRow]]:
    """The detector pairs that are no edge of the graph and correlate most beyond the model's value."""
    d = dets.shape[1]
    if d > MATRIX_LIMIT or d < 2:
        return None, []
    matrix = pair_matrix(dets)
    first, second = np.triu_indices(d, k=1)
    keep = [n for n, (a, b) in enumerate(zip(first.tolist(), second.tolist())) if (a, b) not in edges]
    candidates = np.stack([first[keep], second[keep]], axis=1)
    expected = model_pair_probabilities(dem, candidates)
    excess = np.nan_to_num(matrix[candidates[:, 0], candidates[:, 1]] - expected, nan=-1.0)
    order = np.argsort(-excess)[: 4 * SHOWN]
    chosen = candidates[order]
    estimate, error = pair_estimates(dets, chosen)
    pairs = [PairRow(int(a), int(b), float(m), float(p), float(e))
             for (a, b), m, p, e in zip(chosen, expected[order], estimate, error)]
    return matrix, sorted(pairs, key=lambda r: -r.z if math.isfinite(r.z) else math.inf)
