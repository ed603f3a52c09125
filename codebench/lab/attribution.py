"""Which part of the device the departures point at: a fault source per qubit, pair and kind.

The model's noise is split into sources: per qubit its decoherence while idle (``idle``), its one-qubit
gate error (``gate1``), its readout flips (``readout``) and its reset flips (``reset``); per pair of
qubits its two-qubit gate error (``gate2``). Each source alone gives a detector error model (stim, on
the model circuit keeping only that source's channels), hence its contribution c_e to the probability
of every edge e of the model's graph (its expected two-point value). For the edges' departures
r_e = (data estimate - model's expected value), with weights w_e = 1 / (standard error)^2, the departure explained by scaling one source
by (1 + k) is least squares in k alone:

    k = sum_e w_e r_e c_e / sum_e w_e c_e^2,    z = sum_e w_e r_e c_e / sqrt(sum_e w_e c_e^2),

z being the improvement of the fit in standard errors (a matched filter; common practice for linear
least squares). Sources are ranked by forward selection (common practice for regression): the first
is the single source that, made worse by the factor 1 + k, explains the most of what the data show;
its fitted part is taken off the departures, and the next is the best explanation of what is left,
and so on (k and z as fitted when a source is chosen). Linear in the probabilities: a guide for small
rates, not a calibration.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import stim

from codebench.lab.graph import EdgeEstimates, model_graph

_NOISE = {"DEPOLARIZE1": "gate1", "DEPOLARIZE2": "gate2", "PAULI_CHANNEL_1": "idle"}
_FLIPS = ("X_ERROR", "Z_ERROR")
_MEASURES = ("M", "MX", "MY", "MR", "MRX")


@dataclass(frozen=True)
class Source:
    """One fault source of the model, its fitted extra factor k and the z of the fit."""

    kind: str
    qubits: tuple[str, ...]
    k: float
    z: float

    @property
    def label(self) -> str:
        return f"{'-'.join(self.qubits)} {self.kind}"

    @property
    def factor(self) -> float:
        """How much worse than the model this source alone would have to be: 1 + k."""
        return 1.0 + self.k


def _kinds(instructions: list[stim.CircuitInstruction]) -> list[str | None]:
    """The source kind of each instruction (``None`` for what is not noise).

    A flip is a readout flip when the next instruction that is not noise measures, else a reset flip.
    """
    kinds: list[str | None] = [None] * len(instructions)
    measures_next = False
    for n in range(len(instructions) - 1, -1, -1):
        name = instructions[n].name
        if name in _NOISE:
            kinds[n] = _NOISE[name]
        elif name in _FLIPS:
            kinds[n] = "readout" if measures_next else "reset"
        else:
            measures_next = name in _MEASURES
    return kinds


def _groups(instruction: stim.CircuitInstruction) -> list[tuple[int, ...]]:
    targets = [t.value for t in instruction.targets_copy()]
    size = 2 if instruction.name == "DEPOLARIZE2" else 1
    return [tuple(targets[i:i + size]) for i in range(0, len(targets), size)]


def sources_of(circuit: stim.Circuit) -> dict[tuple[str, tuple[int, ...]], stim.Circuit]:
    """One circuit per fault source: the model circuit with only that source's noise."""
    instructions = list(circuit.flattened())
    kinds = _kinds(instructions)
    keys: list[tuple[str, tuple[int, ...]]] = []
    for op, kind in zip(instructions, kinds):
        if kind is not None:
            keys.extend((kind, tuple(sorted(group))) for group in _groups(op))
    out: dict[tuple[str, tuple[int, ...]], stim.Circuit] = {}
    for key in dict.fromkeys(keys):
        lines = []
        for op, kind in zip(instructions, kinds):
            if kind is None:
                lines.append(str(op))
                continue
            if kind != key[0]:
                continue
            kept = [group for group in _groups(op) if tuple(sorted(group)) == key[1]]
            if kept:
                args = ", ".join(repr(a) for a in op.gate_args_copy())
                lines.append(f"{op.name}({args}) {' '.join(str(q) for group in kept for q in group)}")
        out[key] = stim.Circuit("\n".join(lines))
    return out


def rank_sources(circuit: stim.Circuit, estimates: EdgeEstimates, names: dict[int, str]) -> list[Source]:
    """Every fault source of ``circuit``, ranked by how well it alone explains the edges' departures."""
    graph = estimates.graph
    index = {edge: n for n, edge in enumerate(graph.edges)}
    residual = estimates.probabilities - graph.expected
    with np.errstate(divide="ignore", invalid="ignore"):
        weight = np.where(np.isfinite(estimates.errors) & (estimates.errors > 0), 1 / estimates.errors ** 2, 0.0)
    usable = np.isfinite(residual) & (weight > 0)
    residual = np.where(usable, residual, 0.0)
    weight = np.where(usable, weight, 0.0)
    groups: list[tuple[list[str], tuple[int, ...], np.ndarray]] = []
    for (kind, qubits), partial in sources_of(circuit).items():
        part = model_graph(partial.detector_error_model(decompose_errors=True, ignore_decomposition_failures=True),
                           partial.detector_error_model())
        contribution = np.zeros(len(graph.edges))
        for edge, p in zip(part.edges, part.expected):
            if edge in index:
                contribution[index[edge]] = p
        if float(np.sum(weight * contribution ** 2)) > 0:
            _add(groups, kind, qubits, contribution, weight)
    return _forward_selection(groups, residual, weight, names)


def _forward_selection(groups: list[tuple[list[str], tuple[int, ...], np.ndarray]], residual: np.ndarray,
                       weight: np.ndarray, names: dict[int, str]) -> list[Source]:
    """Rank sources greedily: the best single explanation, then the best of the rest for what it leaves."""
    left = list(range(len(groups)))
    residual = residual.copy()
    ranked = []
    while left:
        scores = []
        for n in left:
            contribution = groups[n][2]
            norm = float(np.sum(weight * contribution ** 2))
            dot = float(np.sum(weight * residual * contribution))
            scores.append((dot / math.sqrt(norm), dot / norm, n))
        z, k, n = max(scores)
        kinds, qubits, contribution = groups[n]
        ranked.append(Source("/".join(kinds), tuple(names.get(q, str(q)) for q in qubits), k, z))
        if z > 0:
            residual = residual - k * contribution
        left.remove(n)
    return ranked


#: Sources on the same qubits whose (weighted, normalised) contributions agree this well cannot be told
#: apart by detection events; they are fitted and listed as one (kinds joined by "/", largest first).
ALIKE = 0.99


def _add(groups: list[tuple[list[str], tuple[int, ...], np.ndarray]], kind: str, qubits: tuple[int, ...],
         contribution: np.ndarray, weight: np.ndarray) -> None:
    def shape(c: np.ndarray) -> np.ndarray:
        scaled = np.sqrt(weight) * c
        return np.asarray(scaled / np.linalg.norm(scaled))

    for n, (kinds, held, total) in enumerate(groups):
        if held == qubits and float(shape(total) @ shape(contribution)) >= ALIKE:
            order = kinds + [kind] if np.sum(contribution) <= np.sum(total) else [kind] + kinds
            groups[n] = (order, held, total + contribution)
            return
    groups.append(([kind], qubits, contribution))
