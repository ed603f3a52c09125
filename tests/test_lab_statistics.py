"""Detection-event statistics of the lab analysis against outside references.

- The two-point estimate p_ij (derived in ``codebench/lab/correlations.py``; the form used by Google
  Quantum AI, Nature 595, 383 (2021), Supplementary Information, and by Spitz, Tarasinski, Beenakker,
  O'Brien, Adv. Quantum Technol. 1, 1800012 (2018), both from memory) recovers the shared source
  exactly on the three-source model, by brute-force enumeration of its 8 outcomes.
- The predicted detection fraction (1 - prod_k (1 - 2 p_k)) / 2 (common practice, parity of independent
  flips) matches stim's own sampler of the model circuit within 99.9% binomial intervals.
- On shots stim samples from a graphlike model (a repetition code, every mechanism flipping at most two
  detectors), p_ij of every graph edge matches the model's edge probability within statistical error,
  and the boundary estimates match the boundary edges.
"""

from __future__ import annotations

import itertools

import numpy as np
import pytest

from codebench.build import noisy_circuit
from codebench.lab.correlations import pair_probability, predicted_fractions
from codebench.lab.graph import BOUNDARY, estimate_edges, model_graph
from codebench.records import Point
from codebench.stats import binomial_interval


@pytest.mark.parametrize("pa,pb,pc", [(0.1, 0.2, 0.05), (0.01, 0.03, 0.002), (0.3, 0.05, 0.2)])
def test_pair_estimate_is_exact_on_three_sources(pa: float, pb: float, pc: float) -> None:
    xi = xj = xij = 0.0
    for a, b, c in itertools.product((0, 1), repeat=3):
        weight = (pa if a else 1 - pa) * (pb if b else 1 - pb) * (pc if c else 1 - pc)
        xi += weight * (a ^ c)
        xj += weight * (b ^ c)
        xij += weight * ((a ^ c) & (b ^ c))
    estimate = pair_probability(np.array(xi), np.array(xj), np.array(xij))
    assert float(estimate) == pytest.approx(pc, abs=1e-12)


def test_predicted_fractions_match_stim_sampler() -> None:
    point = Point("rotated_surface", 3, 3, "Z", "si1000", 0.004, "mwpm")
    circuit = noisy_circuit(point)
    shots = 200_000
    dets = circuit.compile_detector_sampler(seed=11).sample(shots)
    predicted = predicted_fractions(circuit.detector_error_model())
    for k, fired in enumerate(np.count_nonzero(dets, axis=0)):
        low, high = binomial_interval(int(fired), shots, confidence=0.999)
        assert low <= predicted[k] <= high, (k, fired / shots, predicted[k])


def test_pair_estimates_match_a_graphlike_model() -> None:
    point = Point("repetition", 5, 5, "Z", "circuit_depolarizing", 0.02, "mwpm")
    circuit = noisy_circuit(point)
    full = circuit.detector_error_model()
    graph = model_graph(circuit.detector_error_model(decompose_errors=True), full)
    # Graphlike: each edge's value is its mechanisms' combined probability (stim's model, not decomposed).
    dets = circuit.compile_detector_sampler(seed=5).sample(200_000)
    estimates = estimate_edges(graph, dets)
    z_inner = [(p - m) / e for (i, j), p, m, e in zip(graph.edges, estimates.probabilities, graph.expected,
                                                      estimates.errors) if j != BOUNDARY]
    # Standard errors from 10 batch means scatter like Student's t with 9 degrees of freedom: 5 is beyond its
    # 99.99% point; the mean square checks that the errors are the right size overall.
    assert len(z_inner) > 20 and max(abs(z) for z in z_inner) < 5
    assert 0.3 < float(np.mean(np.square(z_inner))) < 2.0
    boundary = [(p - m) / e for (i, j), p, m, e in zip(graph.edges, estimates.probabilities, graph.expected,
                                                       estimates.errors) if j == BOUNDARY]
    assert boundary and max(abs(z) for z in boundary) < 5
