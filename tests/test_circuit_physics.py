"""Physics of the memory circuits: determinism, distance, code algebra, gate sets.

Every check here compares the circuits against something outside the
package: stim's own error analysis (determinism of detectors, circuit
distance), stabilizer-code algebra done in the test with a small GF(2)
elimination, or brute-force enumeration.
"""

from __future__ import annotations

import dataclasses
import itertools
from pathlib import Path

import pytest
import stim

from codebench.circuits import build_memory
from codebench.codes import get_code_family
from codebench.layout import Basis, Layout
from codebench.noise import get_noise_model
from codebench.noise.base import NoiseModel

DISTANCES = {"repetition": (2, 3, 4, 5), "rotated_surface": (3, 5, 7)}
CASES = [(code, d) for code, ds in DISTANCES.items() for d in ds]
BASES = ("Z", "X")

# Every noise model, with each of its option values, at a nonzero rate.
MODEL_VARIANTS = [
    ("code_capacity", {"data_errors": "flip"}),
    ("code_capacity", {"data_errors": "depolarize"}),
    ("phenomenological", {"data_errors": "flip"}),
    ("phenomenological", {"data_errors": "depolarize"}),
    ("circuit_depolarizing", {}),
    ("si1000", {}),
]

NOISE_CHANNELS = {"DEPOLARIZE1", "DEPOLARIZE2", "X_ERROR", "Z_ERROR", "Y_ERROR", "PAULI_CHANNEL_1", "PAULI_CHANNEL_2"}
ANNOTATIONS = {"DETECTOR", "OBSERVABLE_INCLUDE", "TICK", "QUBIT_COORDS", "SHIFT_COORDS"}
GATE_KIND = {
    "R": "reset", "RX": "reset",
    "H": "gate1",
    "CX": "gate2", "CZ": "gate2",
    "M": "measure", "MX": "measure",
}

# Arguments of stim's search for undetectable logical errors that also
# explore non-graphlike (hyper)errors such as hook errors.
SEARCH_ARGS = dict(
    dont_explore_detection_event_sets_with_size_above=4,
    dont_explore_edges_with_degree_above=4,
    dont_explore_edges_increasing_symptom_degree=False,
    canonicalize_circuit_errors=True,
)



def layout_circuit(model: NoiseModel, lay: Layout, rounds: int, basis: Basis) -> stim.Circuit:
    """The memory experiment of a given layout (also a deliberately broken one) decorated by ``model``."""
    return model.decorate(build_memory(lay, rounds, basis, model.circuit_gate_set()))

def layout(code: str, d: int, basis: str) -> Layout:
    return get_code_family(code).layout(d, basis)


def noisy(code: str, d: int, basis: str, noise: str, p: float, rounds: int | None = None, **options: str) -> stim.Circuit:
    r = d if rounds is None else rounds
    return layout_circuit(get_noise_model(noise)(p, **options), layout(code, d, basis), r, basis)


def rounds_for(d: int) -> list[int]:
    return sorted({1, 2, 3, d})


# ---------------------------------------------------------------------------
# GF(2) helpers (integer bit masks: bit i = data qubit i).


def to_mask(qubits, index: dict[int, int]) -> int:
    m = 0
    for q in qubits:
        m |= 1 << index[q]
    return m


def echelon(rows: list[int]) -> list[int]:
    """A reduced basis of the GF(2) row space of ``rows`` (pivot = highest bit)."""
    basis: list[int] = []
    for r in rows:
        for b in basis:
            r = min(r, r ^ b)
        if r:
            basis.append(r)
            basis.sort(reverse=True)
    return basis


def gf2_rank(rows: list[int]) -> int:
    return len(echelon(rows))


def in_rowspace(v: int, basis: list[int]) -> bool:
    for b in basis:
        v = min(v, v ^ b)
    return v == 0


def popcount(v: int) -> int:
    return bin(v).count("1")


def test_gf2_helpers_on_a_known_matrix() -> None:
    # Hand-checked example (common practice): the three weight-2 parities of
    # a 3-bit repetition code have rank 2 over GF(2); 0b111 is not in their span.
    rows = [0b011, 0b110, 0b101]
    assert gf2_rank(rows) == 2
    assert in_rowspace(0b101, echelon(rows))
    assert not in_rowspace(0b111, echelon(rows))
    assert gf2_rank([0b1000, 0b0100, 0b0010, 0b0001]) == 4


# ---------------------------------------------------------------------------
# 1. Noiseless circuits are deterministic.
# Source: common practice (a detector is, by definition, a parity of
# measurements that is deterministic in the absence of noise; so is the
# logical observable of a memory experiment).


def _assert_deterministic(circuit: stim.Circuit, what: str) -> None:
    # stim's error analysis raises if any detector or observable is not
    # deterministic under noiseless execution (allow_gauge_detectors=False).
    dem = circuit.detector_error_model(allow_gauge_detectors=False)
    assert dem.num_errors == 0, f"{what}: noiseless circuit has {dem.num_errors} error mechanisms"
    assert circuit.num_detectors > 0, what
    assert circuit.num_observables == 1, what
    sampler = circuit.compile_detector_sampler(seed=5)
    det, obs = sampler.sample(200, separate_observables=True)
    assert not det.any(), f"{what}: {int(det.any(axis=1).sum())} of 200 shots have detection events"
    assert not obs.any(), f"{what}: {int(obs.any(axis=1).sum())} of 200 shots flip the observable"


@pytest.mark.parametrize("basis", BASES)
@pytest.mark.parametrize("code,d", CASES)
def test_noiseless_circuits_have_no_detection_events(code: str, d: int, basis: str) -> None:
    lay = layout(code, d, basis)
    for rounds in rounds_for(d):
        for gate_set in ("cx", "cz"):
            ideal = build_memory(lay, rounds, basis, gate_set).to_stim()
            _assert_deterministic(ideal, f"{code} d={d} {basis} r={rounds} ideal {gate_set}")
        for noise, options in MODEL_VARIANTS:
            circuit = layout_circuit(get_noise_model(noise)(0.0, **options), lay, rounds, basis)
            _assert_deterministic(circuit, f"{code} d={d} {basis} r={rounds} {noise} {options} p=0")


@pytest.mark.parametrize("basis", BASES)
@pytest.mark.parametrize("code,d", CASES)
def test_detector_count(code: str, d: int, basis: str) -> None:
    # Common practice for a memory experiment: round 0 has a detector for
    # each check of the memory basis, every later round one per check, and
    # the final data readout closes each check of the memory basis once more.
    lay = layout(code, d, basis)
    n_all = len(lay.checks)
    n_basis = len(lay.checks_of(basis))
    for rounds in rounds_for(d):
        c = noisy(code, d, basis, "circuit_depolarizing", 0.001, rounds)
        assert c.num_detectors == 2 * n_basis + (rounds - 1) * n_all


# ---------------------------------------------------------------------------
# 2. Circuit distance equals the code distance.
# Source: stim's shortest_graphlike_error / search_for_undetectable_logical_errors
# (Gidney, Quantum 5, 497 (2021)); the rotated-surface gate order is chosen so
# hook errors do not lower the distance (Tomita & Svore, PRA 90, 062320 (2014), Fig. 2).


GRAPHLIKE_CASES = [(code, d) for code, ds in {"repetition": (2, 3, 4, 5), "rotated_surface": (3, 5, 7)}.items() for d in ds]


@pytest.mark.parametrize("noise,options", MODEL_VARIANTS, ids=[f"{n}-{o.get('data_errors', '')}" for n, o in MODEL_VARIANTS])
@pytest.mark.parametrize("basis", BASES)
@pytest.mark.parametrize("code,d", GRAPHLIKE_CASES)
def test_graphlike_distance_equals_code_distance(code: str, d: int, basis: str, noise: str, options: dict[str, str]) -> None:
    c = noisy(code, d, basis, noise, 0.001, **options)
    assert len(c.shortest_graphlike_error()) == d


@pytest.mark.parametrize("noise", ["circuit_depolarizing", "si1000"])
@pytest.mark.parametrize("basis", BASES)
@pytest.mark.parametrize("d", [3, 5])
def test_undetectable_logical_search_finds_distance(d: int, basis: str, noise: str) -> None:
    # This search also explores hyperedges (not only graphlike errors), so a
    # hook error that spreads to two data qubits along the logical would show.
    c = noisy("rotated_surface", d, basis, noise, 0.001)
    assert len(c.search_for_undetectable_logical_errors(**SEARCH_ARGS)) == d


@pytest.mark.slow
@pytest.mark.parametrize("noise", ["circuit_depolarizing", "si1000"])
@pytest.mark.parametrize("basis", BASES)
def test_undetectable_logical_search_finds_distance_d7(basis: str, noise: str) -> None:
    # As above at d = 7 (about a minute per case).
    c = noisy("rotated_surface", 7, basis, noise, 0.001)
    assert len(c.search_for_undetectable_logical_errors(**SEARCH_ARGS)) == 7


def _swapped_gate_order(lay: Layout) -> Layout:
    """The layout with the X-check and Z-check gate orders exchanged.

    This puts the last two data qubits of each check (where a measure-qubit
    fault spreads to two data errors) along the logical of the same type.
    """
    at = {xy: q for q, xy in lay.coords.items()}
    z_order = ((-1, -1), (-1, 1), (1, -1), (1, 1))  # N order
    x_order = ((-1, -1), (1, -1), (-1, 1), (1, 1))  # Z order
    checks = []
    for c in lay.checks:
        x, y = lay.coords[c.measure]
        order = x_order if c.basis == "Z" else z_order
        sched = tuple(at.get((x + dx, y + dy)) for dx, dy in order)
        checks.append(dataclasses.replace(c, schedule=sched))
    bad = dataclasses.replace(lay, checks=tuple(checks))
    bad.validate()
    return bad


@pytest.mark.parametrize("noise", ["circuit_depolarizing", "si1000"])
@pytest.mark.parametrize("d", [3, 5])
def test_distance_checks_catch_a_bad_hook_order(d: int, noise: str) -> None:
    # Negative control: with the gate orders exchanged, hook errors run along
    # the logicals and the circuit distance drops (Tomita & Svore, PRA 90,
    # 062320 (2014), Fig. 2). The distance checks above must be able to see it.
    bad = _swapped_gate_order(layout("rotated_surface", d, "Z"))
    for basis in BASES:
        c = layout_circuit(get_noise_model(noise)(0.001), bad, d, basis)
        c.detector_error_model(decompose_errors=True)  # still a valid (deterministic) circuit
        assert len(c.shortest_graphlike_error()) < d
        assert len(c.search_for_undetectable_logical_errors(**SEARCH_ARGS)) < d


# ---------------------------------------------------------------------------
# 3. Code invariants of the rotated surface code [[d^2, 1, d]].
# Source: stabilizer formalism (Gottesman, PhD thesis, Caltech (1997),
# quant-ph/9705052): stabilizers commute (X-type and Z-type overlap evenly),
# logicals commute with every stabilizer and anticommute with each other,
# k = n - rank(stabilizers); rotated surface code parameters [[d^2, 1, d]]
# (Bombin & Martin-Delgado, PRA 76, 012305 (2007); Horsman, Fowler, Devitt,
# Van Meter, New J. Phys. 14, 123011 (2012)).


def _check_masks(lay: Layout) -> tuple[dict[int, int], list[int], list[int], int, int]:
    index = {q: i for i, q in enumerate(lay.data_qubits)}
    hx = [to_mask(c.support, index) for c in lay.checks_of("X")]
    hz = [to_mask(c.support, index) for c in lay.checks_of("Z")]
    return index, hx, hz, to_mask(lay.logical_x, index), to_mask(lay.logical_z, index)


@pytest.mark.parametrize("basis", BASES)
@pytest.mark.parametrize("d", [3, 5, 7])
def test_rotated_surface_code_algebra(d: int, basis: str) -> None:
    lay = layout("rotated_surface", d, basis)
    index, hx, hz, lx, lz = _check_masks(lay)
    n = d * d
    assert len(lay.data_qubits) == n
    assert len(lay.measure_qubits) == n - 1
    assert len(lay.checks) == n - 1
    assert len(hx) == len(hz) == (n - 1) // 2
    assert sorted({popcount(m) for m in hx + hz}) == [2, 4]
    # Stabilizers commute: every X check overlaps every Z check evenly.
    for a in hx:
        for b in hz:
            assert popcount(a & b) % 2 == 0
    # Logical Z (a Z-type operator) commutes with the X checks, logical X with the Z checks.
    assert all(popcount(lz & a) % 2 == 0 for a in hx)
    assert all(popcount(lx & b) % 2 == 0 for b in hz)
    # The logicals anticommute and each has weight d.
    assert popcount(lx & lz) % 2 == 1
    assert popcount(lx) == popcount(lz) == d
    # Full rank: the checks are independent, so k = n - (n - 1) = 1.
    assert gf2_rank(hx) == (n - 1) // 2
    assert gf2_rank(hz) == (n - 1) // 2
    # The logicals are not themselves stabilizers.
    assert not in_rowspace(lx, echelon(hx))
    assert not in_rowspace(lz, echelon(hz))


def _min_nontrivial_weight(checks_same: list[int], checks_other: list[int], n: int, max_weight: int) -> int | None:
    """Smallest weight <= max_weight of a pattern in ker(checks_other) outside rowspace(checks_same)."""
    basis = echelon(checks_same)
    for w in range(1, max_weight + 1):
        for support in itertools.combinations(range(n), w):
            e = 0
            for i in support:
                e |= 1 << i
            if any(popcount(e & c) % 2 for c in checks_other):
                continue  # detected
            if not in_rowspace(e, basis):
                return w
    return None


@pytest.mark.parametrize("basis", BASES)
def test_rotated_surface_d3_minimum_logical_weight_by_enumeration(basis: str) -> None:
    # Exhaustive over all 2^9 patterns of X errors (and of Z errors).
    lay = layout("rotated_surface", 3, basis)
    _, hx, hz, lx, lz = _check_masks(lay)
    bx, bz = echelon(hx), echelon(hz)
    min_x = min_z = 10
    for e in range(1, 1 << 9):
        if not any(popcount(e & c) % 2 for c in hz) and not in_rowspace(e, bx):
            min_x = min(min_x, popcount(e))
            # A nontrivial undetected X pattern must flip logical Z.
            assert popcount(e & lz) % 2 == 1
        if not any(popcount(e & c) % 2 for c in hx) and not in_rowspace(e, bz):
            min_z = min(min_z, popcount(e))
            assert popcount(e & lx) % 2 == 1
    assert min_x == 3
    assert min_z == 3


def test_rotated_surface_d5_has_no_logical_below_weight_5() -> None:
    # All patterns of weight <= 5 on 25 qubits (~68k): the lightest undetected
    # nontrivial X or Z pattern has weight exactly d = 5.
    lay = layout("rotated_surface", 5, "Z")
    _, hx, hz, _, _ = _check_masks(lay)
    assert _min_nontrivial_weight(hx, hz, 25, 5) == 5
    assert _min_nontrivial_weight(hz, hx, 25, 5) == 5


@pytest.mark.parametrize("basis", BASES)
@pytest.mark.parametrize("d", [2, 3, 4, 5])
def test_repetition_code_algebra(d: int, basis: str) -> None:
    # Repetition code [[d, 1]] against one error type (common practice):
    # d - 1 independent weight-2 checks, one protected logical of weight 1,
    # its conjugate of weight d that commutes with every check.
    lay = layout("repetition", d, basis)
    index = {q: i for i, q in enumerate(lay.data_qubits)}
    checks = [to_mask(c.support, index) for c in lay.checks]
    assert all(c.basis == basis for c in lay.checks)
    assert len(lay.data_qubits) == d
    assert len(checks) == d - 1
    assert gf2_rank(checks) == d - 1
    assert all(popcount(c) == 2 for c in checks)
    conj = to_mask(lay.logical("X" if basis == "Z" else "Z"), index)
    prot = to_mask(lay.logical(basis), index)
    assert popcount(conj) == d
    assert all(popcount(conj & c) % 2 == 0 for c in checks)
    assert popcount(conj & prot) % 2 == 1
    # The only undetected nontrivial error is the all-ones pattern (weight d).
    undetected = [e for e in range(1, 1 << d) if not any(popcount(e & c) % 2 for c in checks)]
    assert undetected == [(1 << d) - 1]


# ---------------------------------------------------------------------------
# 4. Gate sets and noise placement.


def _ops(circuit: stim.Circuit) -> list[stim.CircuitInstruction]:
    return list(circuit.flattened())


def _segments(circuit: stim.Circuit) -> list[list[stim.CircuitInstruction]]:
    segs: list[list[stim.CircuitInstruction]] = [[]]
    for inst in _ops(circuit):
        if inst.name == "TICK":
            segs.append([])
        else:
            segs[-1].append(inst)
    return segs


def _qubits(inst: stim.CircuitInstruction) -> list[int]:
    return [t.value for t in inst.targets_copy() if t.is_qubit_target]


@pytest.mark.parametrize("basis", BASES)
@pytest.mark.parametrize("code,d", [("repetition", 3), ("repetition", 4), ("rotated_surface", 3), ("rotated_surface", 5)])
def test_si1000_uses_only_cz_h_and_z_basis_reset_measure(code: str, d: int, basis: str) -> None:
    # SI1000 is defined on CZ, single-qubit Cliffords and Z-basis reset and
    # measurement (Gidney, Newman, Fowler, Broughton, Quantum 5, 605 (2021), Table 2).
    names = {inst.name for inst in _ops(noisy(code, d, basis, "si1000", 0.001))}
    allowed = {"CZ", "H", "R", "M", "DEPOLARIZE1", "DEPOLARIZE2", "X_ERROR"} | ANNOTATIONS
    assert names <= allowed, names - allowed
    assert {"CZ", "H", "R", "M"} <= names


@pytest.mark.parametrize("basis", BASES)
@pytest.mark.parametrize("code,d", [("repetition", 3), ("repetition", 4), ("rotated_surface", 3), ("rotated_surface", 5)])
def test_circuit_depolarizing_uses_cx(code: str, d: int, basis: str) -> None:
    # Standard circuit noise is stated for a CNOT-based circuit (Fowler
    # et al., PRA 86, 032324 (2012)).
    names = {inst.name for inst in _ops(noisy(code, d, basis, "circuit_depolarizing", 0.001))}
    allowed = {"CX", "R", "RX", "M", "MX", "H", "DEPOLARIZE1", "DEPOLARIZE2", "X_ERROR", "Z_ERROR"} | ANNOTATIONS
    assert names <= allowed, names - allowed
    assert "CX" in names and "CZ" not in names
    assert ("MX" in names) == (basis == "X" or code == "rotated_surface")


def _per_layer_noise(circuit: stim.Circuit):
    """For each TICK-separated layer: gate kind, ops on qubits, and noise on each qubit (with position)."""
    layers = []
    for seg in _segments(circuit):
        gates = [inst for inst in seg if inst.name in GATE_KIND]
        if not gates:
            continue
        kinds = {GATE_KIND[inst.name] for inst in gates}
        gate_of: dict[int, str] = {}
        for inst in gates:
            for q in _qubits(inst):
                assert q not in gate_of, f"qubit {q} used twice in one layer"
                gate_of[q] = inst.name
        first_gate = min(i for i, inst in enumerate(seg) if inst.name in GATE_KIND)
        last_gate = max(i for i, inst in enumerate(seg) if inst.name in GATE_KIND)
        noise: dict[int, list[tuple[str, float, str]]] = {}
        for i, inst in enumerate(seg):
            if inst.name in NOISE_CHANNELS:
                where = "before" if i < first_gate else ("after" if i > last_gate else "between")
                for q in _qubits(inst):
                    noise.setdefault(q, []).append((inst.name, inst.gate_args_copy()[0], where))
        layers.append((kinds, gate_of, noise))
    return layers


@pytest.mark.parametrize("noise", ["circuit_depolarizing", "si1000", "phenomenological", "code_capacity"])
@pytest.mark.parametrize("basis", BASES)
@pytest.mark.parametrize("code,d", [("repetition", 3), ("rotated_surface", 3), ("rotated_surface", 5)])
def test_layers_hold_one_operation_kind_and_use_each_qubit_once(code: str, d: int, basis: str, noise: str) -> None:
    # Common practice: a TICK separates layers of simultaneous operations, so a
    # layer never acts twice on one qubit; codebench keeps one kind per layer.
    layers = _per_layer_noise(noisy(code, d, basis, noise, 0.001))
    assert len(layers) > 3
    for kinds, _, _ in layers:
        assert len(kinds) == 1, kinds


@pytest.mark.parametrize("basis", BASES)
@pytest.mark.parametrize("code,d", [("repetition", 3), ("rotated_surface", 3), ("rotated_surface", 5)])
def test_circuit_depolarizing_noise_placement(code: str, d: int, basis: str) -> None:
    # Standard depolarizing circuit noise (Fowler et al.,
    # PRA 86, 032324 (2012), Sec. "error model"): every qubit of every
    # layer gets exactly one channel of strength p: DEPOLARIZE2 after a
    # two-qubit gate, DEPOLARIZE1 after a one-qubit gate or when idle, a flip
    # after a reset and before a measurement in the basis of the operation.
    p = 0.0037
    c = noisy(code, d, basis, "circuit_depolarizing", p)
    all_qubits = set(layout(code, d, basis).qubits)
    flip = {"R": "X_ERROR", "M": "X_ERROR", "RX": "Z_ERROR", "MX": "Z_ERROR"}
    for _, gate_of, noise in _per_layer_noise(c):
        assert set(noise) == all_qubits
        for q in all_qubits:
            assert len(noise[q]) == 1, (q, noise[q])
            name, prob, where = noise[q][0]
            assert prob == pytest.approx(p, rel=1e-12)
            gate = gate_of.get(q)
            if gate is None or gate == "H":
                assert (name, where) == ("DEPOLARIZE1", "after")
            elif gate == "CX":
                assert (name, where) == ("DEPOLARIZE2", "after")
            elif gate in ("R", "RX"):
                assert (name, where) == (flip[gate], "after")
            else:
                assert (name, where) == (flip[gate], "before")


@pytest.mark.parametrize("basis", BASES)
@pytest.mark.parametrize("code,d", [("repetition", 3), ("rotated_surface", 3), ("rotated_surface", 5)])
def test_si1000_noise_placement(code: str, d: int, basis: str) -> None:
    # SI1000 (Gidney, Newman, Fowler, Broughton, Quantum 5, 605 (2021),
    # Table 2; values from memory, matching the package docstring): CZ then
    # DEPOLARIZE2(p); one-qubit gate then DEPOLARIZE1(p/10); idle in a gate
    # layer DEPOLARIZE1(p/10); reset then X_ERROR(2p); X_ERROR(5p) then
    # measurement; idle during a reset or measurement layer DEPOLARIZE1(2p).
    p = 0.0037
    c = noisy(code, d, basis, "si1000", p)
    all_qubits = set(layout(code, d, basis).qubits)
    for kinds, gate_of, noise in _per_layer_noise(c):
        (kind,) = kinds
        assert set(noise) == all_qubits
        for q in all_qubits:
            assert len(noise[q]) == 1, (q, noise[q])
            name, prob, where = noise[q][0]
            gate = gate_of.get(q)
            if gate is None:
                expected = ("DEPOLARIZE1", 2 * p if kind in ("reset", "measure") else p / 10, "after")
            elif gate == "H":
                expected = ("DEPOLARIZE1", p / 10, "after")
            elif gate == "CZ":
                expected = ("DEPOLARIZE2", p, "after")
            elif gate == "R":
                expected = ("X_ERROR", 2 * p, "after")
            else:
                assert gate == "M"
                expected = ("X_ERROR", 5 * p, "before")
            assert (name, where) == (expected[0], expected[2])
            assert prob == pytest.approx(expected[1], rel=1e-12)


# ---------------------------------------------------------------------------
# 5. Coordinates.


@pytest.mark.parametrize("noise", ["circuit_depolarizing", "si1000", "phenomenological", "code_capacity"])
@pytest.mark.parametrize("basis", BASES)
@pytest.mark.parametrize("code,d", [("repetition", 3), ("repetition", 4), ("rotated_surface", 3), ("rotated_surface", 5)])
def test_detector_and_qubit_coordinates(code: str, d: int, basis: str, noise: str) -> None:
    # Common practice (as in stim's generated circuits): detectors carry
    # (x, y, t) with (x, y) the measure qubit and t the round; every qubit
    # has QUBIT_COORDS; no two detectors share coordinates.
    rounds = 3
    lay = layout(code, d, basis)
    c = noisy(code, d, basis, noise, 0.001, rounds)
    qcoords = c.get_final_qubit_coordinates()
    used = {q for inst in _ops(c) if inst.name not in ANNOTATIONS for q in _qubits(inst)}
    assert used <= set(qcoords)
    assert set(qcoords) == set(lay.qubits)
    for q, xy in qcoords.items():
        assert tuple(xy) == lay.coords[q]
    measure_xy = {lay.coords[q] for q in lay.measure_qubits}
    dcoords = c.get_detector_coordinates()
    assert len(dcoords) == c.num_detectors
    triples = set()
    for coord in dcoords.values():
        assert len(coord) == 3
        x, y, t = coord
        assert (x, y) in measure_xy
        assert t in range(rounds + 1)
        triples.add((x, y, t))
    assert len(triples) == c.num_detectors
    # Each round's detectors sit at the measure qubits of the checks it compares.
    basis_xy = {lay.coords[ch.measure] for ch in lay.checks_of(basis)}
    for t in range(rounds + 1):
        at_t = {(x, y) for x, y, tt in triples if tt == t}
        assert at_t == (basis_xy if t in (0, rounds) else measure_xy)


@pytest.mark.parametrize("code,d", [("repetition", 3), ("rotated_surface", 3)])
def test_layers_are_separated_by_tick(code: str, d: int) -> None:
    # Common practice: each layer of simultaneous operations ends with TICK.
    # Ideal circuit: one TICK between consecutive layers, none at the ends.
    ideal = build_memory(layout(code, d, "Z"), 2, "Z", "cx")
    c = ideal.to_stim()
    assert c.num_ticks == len(ideal.layers) - 1
    segs = _segments(c)
    assert all(any(inst.name in GATE_KIND for inst in seg) for seg in segs)
    # Same layer count after a noise model decorates it.
    assert noisy(code, d, "Z", "circuit_depolarizing", 0.001, 2).num_ticks == c.num_ticks
    # The layer count is what the schedule implies: per round reset, one
    # layer per gate step, measure; then the final data readout.
    steps = get_code_family(code).layout(d, "Z").num_steps
    assert len(ideal.layers) == 2 * (steps + 2) + 1


# --- text rendering equals instruction-by-instruction construction -----------------------------


def _render_by_append(ideal, noise) -> stim.Circuit:  # type: ignore[no-untyped-def]
    """The reference: every instruction added with stim.Circuit.append (stim's own API, no text)."""
    out = stim.Circuit()
    for q in ideal.qubits:
        out.append("QUBIT_COORDS", [q], list(ideal.layout.coords[q]))
    by_layer: dict[int, list] = {}  # type: ignore[type-arg]
    for det in ideal.detectors:
        by_layer.setdefault(det.after_layer, []).append(det)
    measured = 0
    for i, layer in enumerate(ideal.layers):
        if i:
            out.append("TICK")
        before, after = noise(layer, ideal)
        for name, targets, args in before:
            if targets:
                out.append(name, list(targets), list(args))
        for op in layer.ops:
            out.append(op.gate, list(op.targets))
            if layer.kind == "measure":
                measured += len(op.targets)
        for name, targets, args in after:
            if targets:
                out.append(name, list(targets), list(args))
        for det in by_layer.get(i, []):
            out.append("DETECTOR", [stim.target_rec(r - measured) for r in det.records], list(det.coords))
    out.append("OBSERVABLE_INCLUDE", [stim.target_rec(r - measured) for r in ideal.observable], [0])
    return out


DEVICE_FILE = Path(__file__).resolve().parents[1] / "configs" / "devices" / "larkspur_current.toml"


@pytest.mark.parametrize("code,d", [("repetition", 3), ("rotated_surface", 3), ("rotated_surface", 5), ("heavy_hex", 3)])
@pytest.mark.parametrize("basis", BASES)
@pytest.mark.parametrize("noise,options", MODEL_VARIANTS + [("device", {})],
                         ids=[f"{n}-{o.get('data_errors', '')}" for n, o in MODEL_VARIANTS] + ["device"])
def test_text_rendering_equals_append(code: str, d: int, basis: str, noise: str, options: dict[str, str]) -> None:
    """render() writes text and parses it once; the circuit must equal the append-built one exactly
    (same instructions, arguments and targets), so counts for a seed do not change (common practice:
    stim's append and its text parser build the same circuit)."""
    from codebench.circuits import render
    from codebench.noise.calibration import load_device

    family = get_code_family(code)
    if basis not in family.bases:
        pytest.skip(f"{code} has no {basis} memory")
    if noise == "device":
        options = {"device": load_device(DEVICE_FILE).canonical_json()}
    model = get_noise_model(noise)(0.75 if noise == "device" else 0.0123456789, **options)
    ideal = family.ideal_circuit(d, d, basis, model.circuit_gate_set())  # type: ignore[arg-type]
    decorated = model.decorate(ideal)  # (a device model maps the code's qubits here)
    assert decorated == _render_by_append(ideal, model.layer_noise)
    assert render(ideal, model.layer_noise) == decorated
