"""Our circuits against stim's own generated memory circuits.

stim's ``Circuit.generated`` builds rotated-surface and repetition memory
experiments independently of codebench. With the same noise placement (data
depolarization at the start of every round, flips before every measurement,
nothing else) the two constructions must agree on detector count, graphlike
distance, the error mechanisms of the detector error model (as a multiset,
since qubit and detector labels differ) and the MWPM logical failure rate.

Noise placement, read from stim's circuit text (stim 1.16):
- surface_code:rotated_memory_{z,x}: DEPOLARIZE1(p) on the data qubits after
  the reset (round 0) and at the start of every later round; X_ERROR(p)
  before each MR of the measure qubits; X_ERROR(p) / Z_ERROR(p) before the
  final M / MX of the data qubits. codebench's phenomenological model with
  data_errors="depolarize" places exactly these channels (its M + R pair is
  stim's MR, with a noiseless reset).
- repetition_code:memory: the same placement (DEPOLARIZE1 on data at the
  start of every round, X_ERROR before every measurement including the final
  data readout). It matches exactly, so that comparison is included. stim's
  observable is the last data qubit and ours the first; with a Z-basis
  repetition memory these are equivalent logical representatives.
"""

from __future__ import annotations

import collections
import math

import numpy as np
import pymatching
import pytest
import stim
from scipy.stats import norm

from codebench.api import run_sweep
from codebench.build import noisy_circuit
from codebench.records import Point

ALPHA = 0.001  # two-sided 99.9%


def stim_circuit(task: str, d: int, rounds: int, p: float) -> stim.Circuit:
    return stim.Circuit.generated(
        task,
        distance=d,
        rounds=rounds,
        before_round_data_depolarization=p,
        before_measure_flip_probability=p,
    )


def our_point(code: str, d: int, rounds: int, basis: str, p: float) -> Point:
    return Point(
        code=code, distance=d, rounds=rounds, basis=basis, noise="phenomenological", p=p,
        decoder="mwpm", noise_options=(("data_errors", "depolarize"),),
    )


def mwpm_failures(circuit: stim.Circuit, shots: int, seed: int) -> int:
    """The same decoding loop for both circuits: stim sampler + pymatching."""
    dem = circuit.detector_error_model(decompose_errors=True)
    matching = pymatching.Matching.from_detector_error_model(dem)
    det, obs = circuit.compile_detector_sampler(seed=seed).sample(shots, separate_observables=True)
    pred = matching.decode_batch(det)
    return int(np.count_nonzero(np.any(pred != obs, axis=1)))


def two_proportion_pvalue(k1: int, n1: int, k2: int, n2: int) -> float:
    # Pooled two-proportion z test (common practice; e.g. Agresti,
    # "Categorical Data Analysis", Wiley (2002), Sec. 3.1).
    pooled = (k1 + k2) / (n1 + n2)
    se = math.sqrt(pooled * (1 - pooled) * (1 / n1 + 1 / n2))
    if se == 0:
        return 1.0
    z = (k1 / n1 - k2 / n2) / se
    return float(2 * norm.sf(abs(z)))


def error_multiset(circuit: stim.Circuit) -> collections.Counter:
    """(probability, #detectors, #observables) of every DEM error, ignoring labels."""
    out: collections.Counter = collections.Counter()
    for inst in circuit.detector_error_model(decompose_errors=False).flattened():
        if inst.type != "error":
            continue
        targets = inst.targets_copy()
        dets = sum(1 for t in targets if t.is_relative_detector_id())
        obs = sum(1 for t in targets if t.is_logical_observable_id())
        out[(round(inst.args_copy()[0], 12), dets, obs)] += 1
    return out


def test_two_proportion_test_sanity() -> None:
    assert two_proportion_pvalue(100, 1000, 100, 1000) == pytest.approx(1.0)
    # 10% vs 15% on 2000 shots each: z about 4.8, clearly different.
    assert two_proportion_pvalue(200, 2000, 300, 2000) < 1e-4


SURFACE_STRUCTURE = [(b, d, r) for b in ("Z", "X") for d, r in ((3, 1), (3, 3), (5, 5), (7, 3))]


@pytest.mark.parametrize("basis,d,rounds", SURFACE_STRUCTURE)
def test_rotated_surface_structure_matches_stim(basis: str, d: int, rounds: int) -> None:
    p = 0.02
    ref = stim_circuit(f"surface_code:rotated_memory_{basis.lower()}", d, rounds, p)
    ours = noisy_circuit(our_point("rotated_surface", d, rounds, basis, p))
    assert ours.num_detectors == ref.num_detectors
    assert ours.num_observables == ref.num_observables == 1
    assert len(ours.shortest_graphlike_error()) == len(ref.shortest_graphlike_error()) == d
    assert error_multiset(ours) == error_multiset(ref)


REPETITION_STRUCTURE = [(d, r) for d, r in ((2, 2), (3, 1), (3, 3), (5, 5), (6, 4))]


@pytest.mark.parametrize("d,rounds", REPETITION_STRUCTURE)
def test_repetition_structure_matches_stim(d: int, rounds: int) -> None:
    p = 0.04
    ref = stim_circuit("repetition_code:memory", d, rounds, p)
    ours = noisy_circuit(our_point("repetition", d, rounds, "Z", p))
    assert ours.num_detectors == ref.num_detectors
    assert len(ours.shortest_graphlike_error()) == len(ref.shortest_graphlike_error()) == d
    assert error_multiset(ours) == error_multiset(ref)


RATE_CASES = [
    # (code, stim task, basis, d, rounds, p, shots)
    ("rotated_surface", "surface_code:rotated_memory_z", "Z", 3, 3, 0.02, 40_000),
    ("rotated_surface", "surface_code:rotated_memory_x", "X", 3, 3, 0.02, 40_000),
    ("rotated_surface", "surface_code:rotated_memory_z", "Z", 5, 5, 0.03, 40_000),
    ("rotated_surface", "surface_code:rotated_memory_x", "X", 5, 5, 0.03, 40_000),
    ("repetition", "repetition_code:memory", "Z", 5, 5, 0.06, 40_000),
]


SLOW_RATE_CASES = [
    ("rotated_surface", "surface_code:rotated_memory_z", "Z", 7, 7, 0.04, 200_000),
    ("rotated_surface", "surface_code:rotated_memory_x", "X", 7, 7, 0.04, 200_000),
    ("repetition", "repetition_code:memory", "Z", 9, 9, 0.08, 400_000),
]


@pytest.mark.parametrize(
    "code,task,basis,d,rounds,p,shots",
    RATE_CASES + [pytest.param(*case, marks=pytest.mark.slow) for case in SLOW_RATE_CASES],
)
def test_failure_rate_matches_stim(code: str, task: str, basis: str, d: int, rounds: int, p: float, shots: int) -> None:
    ref = stim_circuit(task, d, rounds, p)
    k_ref = mwpm_failures(ref, shots, seed=1001)
    k_ours = mwpm_failures(noisy_circuit(our_point(code, d, rounds, basis, p)), shots, seed=2002)
    # The rates must be large enough for the comparison to mean something.
    assert k_ref > 100
    pval = two_proportion_pvalue(k_ours, shots, k_ref, shots)
    assert pval >= ALPHA, (k_ours, k_ref, shots)


def test_failure_rate_through_run_sweep_matches_stim(tmp_path) -> None:
    # The whole tool (config, engine, workers' sampling and decoding, store).
    d, rounds, p, shots = 5, 5, 0.03, 40_000
    config = {
        "name": "stimref",
        "seed": 424242,
        "stopping": {"failure_target": 10**9, "shot_budget": shots},
        "study": [{
            "code": "rotated_surface", "distances": [d], "rounds": rounds, "basis": ["Z", "X"],
            "noise": "phenomenological", "noise_options": {"data_errors": "depolarize"},
            "p": [p], "decoders": ["mwpm"],
        }],
    }
    frame = run_sweep(config, out=tmp_path / "stimref", workers=1, progress=False)
    assert len(frame) == 2
    for _, r in frame.iterrows():
        assert int(r["shots"]) == shots
        assert int(r["detectors"]) == stim_circuit("surface_code:rotated_memory_z", d, rounds, p).num_detectors
        task = f"surface_code:rotated_memory_{r['basis'].lower()}"
        k_ref = mwpm_failures(stim_circuit(task, d, rounds, p), shots, seed=3003)
        pval = two_proportion_pvalue(int(r["failures"]), shots, k_ref, shots)
        assert pval >= ALPHA, (r["basis"], int(r["failures"]), k_ref, shots)
