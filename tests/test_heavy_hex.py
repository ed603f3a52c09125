"""The heavy-hexagon code family and the flag-conditioned matching decoder.

Outside references, named beside each check:

- [CZYHC] Chamberland, Zhu, Yoder, Hertzberg, Cross, "Topological and subsystem
  codes on low-degree graphs with flag qubits", PRX 10, 011022 (2020),
  arXiv:1907.09528: the code (gauges, stabilizers, logicals, [[d^2, 1, d]] with
  (d-1)^2/2 gauge qubits), its degree-3 hardware graph with flag qubits, and the
  absence of a threshold for the Bacon-Shor-like part.
- [note] The project's heavy-hexagon design note (its definitions are copied
  below, not read at test time): the graph description, the qubit counts
  19, 57, 115 (consistent with the Error Correction Zoo entry for the code),
  the circuit distances with and without flag detectors, and "from our
  trial" logical failure rates under its own noise model.

Everything else is common practice (noiseless circuits give no detection
events; GF(2) linear algebra for stabilizer groups, Gottesman, PhD thesis,
Caltech (1997)).
"""

from __future__ import annotations

import itertools
from pathlib import Path
from typing import Any

import numpy as np
import pytest
import stim

from codebench import run_sweep
from codebench.build import noisy_circuit, qubit_count
from codebench.circuits import FLAG_MARK, IdealCircuit, Layer, NoiseOp
from codebench.codes import CODE_FAMILIES, get_code_family
from codebench.codes.heavy_hex import HeavyHex, structure
from codebench.config import load_sweep
from codebench.decoders import DECODERS, register
from codebench.decoders.flagged import FlagMatching, class_posteriors
from codebench.decoders.matching import Matching
from codebench.noise import get_noise_model
from codebench.noise.base import NoiseModel, flip_for, idle_qubits
from codebench.records import Point

REPO = Path(__file__).parents[1]

# The decoder is registered in codebench.decoders by the lead; until then register it here
# and name it to worker processes by its import path (they do not see this registration).
NATIVE = "flag_matching" in DECODERS
if not NATIVE:
    register(FlagMatching)
FLAG_DECODER = "flag_matching" if NATIVE else "codebench.decoders.flagged:FlagMatching"

FAMILY = get_code_family("heavy_hex")
Cell = tuple[int, int]


# ---------------------------------------------------------------------------
# The code, written down independently from the definitions ([CZYHC]; [note]).
# ---------------------------------------------------------------------------


def reference_code(d: int) -> dict[str, list[frozenset[Cell]]]:
    """Gauges, stabilizers and logicals on data cells (i, j), 1 <= i, j <= d ([CZYHC]; [note])."""
    half = (d - 1) // 2
    square = lambda i, j: frozenset({(i, j), (i, j + 1), (i + 1, j), (i + 1, j + 1)})  # noqa: E731
    z_gauges = [frozenset({(i, j), (i + 1, j)}) for j in range(1, d + 1) for i in range(1, d)]
    x_gauges = [square(i, j) for i in range(1, d) for j in range(1, d) if (i + j) % 2 == 1]
    x_gauges += [frozenset({(1, 2 * m - 1), (1, 2 * m)}) for m in range(1, half + 1)]
    x_gauges += [frozenset({(d, 2 * m), (d, 2 * m + 1)}) for m in range(1, half + 1)]
    z_stabs = [square(i, j) for i in range(1, d) for j in range(1, d) if (i + j) % 2 == 0]
    z_stabs += [frozenset({(2 * m, 1), (2 * m + 1, 1)}) for m in range(1, half + 1)]
    z_stabs += [frozenset({(2 * m - 1, d), (2 * m, d)}) for m in range(1, half + 1)]
    x_stabs = [frozenset((i, c) for i in range(1, d + 1) for c in (j, j + 1)) for j in range(1, d)]
    logical_x = [frozenset((i, 1) for i in range(1, d + 1))]  # X on a whole column
    logical_z = [frozenset((1, j) for j in range(1, d + 1))]  # Z on a whole row
    return {"z_gauges": z_gauges, "x_gauges": x_gauges, "z_stabs": z_stabs, "x_stabs": x_stabs,
            "logical_x": logical_x, "logical_z": logical_z}


def cell_of(d: int) -> dict[int, Cell]:
    """Data qubit -> (i, j), from the documented coordinates: D(i, j) sits at (2j, 2i)."""
    layout = FAMILY.layout(d, "Z")
    return {q: (int(layout.coords[q][1]) // 2, int(layout.coords[q][0]) // 2) for q in layout.data_qubits}


def implemented_code(d: int) -> dict[str, list[frozenset[Cell]]]:
    s = structure(d)
    cell = cell_of(d)
    cells = lambda qs: frozenset(cell[q] for q in qs)  # noqa: E731
    return {
        "z_gauges": [cells((g.upper, g.lower)) for g in s.z_gauges],
        "x_gauges": [cells(g.data) for g in s.x_gauges],
        "z_stabs": [cells(st.support) for st in s.z_stabilizers],
        "x_stabs": [cells(st.support) for st in s.x_stabilizers],
        "logical_x": [cells(s.logical_x)],
        "logical_z": [cells(s.logical_z)],
    }


def to_mask(cells: frozenset[Cell], d: int) -> int:
    return sum(1 << ((i - 1) * d + (j - 1)) for i, j in cells)


def echelon(rows: list[int]) -> dict[int, int]:
    """GF(2) row echelon form keyed by leading bit."""
    basis: dict[int, int] = {}
    for row in rows:
        while row:
            top = row.bit_length() - 1
            if top not in basis:
                basis[top] = row
                break
            row ^= basis[top]
    return basis


def reduce(row: int, basis: dict[int, int]) -> int:
    while row:
        top = row.bit_length() - 1
        if top not in basis:
            return row
        row ^= basis[top]
    return 0


def rank(rows: list[int]) -> int:
    return len(echelon(rows))


def commute(a: int, b: int) -> bool:
    return bin(a & b).count("1") % 2 == 0


def masks(code: dict[str, list[frozenset[Cell]]], key: str, d: int) -> list[int]:
    return [to_mask(c, d) for c in code[key]]


@pytest.mark.parametrize("d", [3, 5, 7])
def test_layout_matches_the_definitions(d: int) -> None:
    # Same gauges, stabilizers and logicals as the definitions ([CZYHC] Sec. on the heavy-hexagon code; [note]).
    ref, got = reference_code(d), implemented_code(d)
    for key in ref:
        assert sorted(map(sorted, got[key])) == sorted(map(sorted, ref[key])), key
    assert len(ref["z_gauges"]) == d * (d - 1)
    assert len(ref["x_gauges"]) == len(ref["z_stabs"]) == (d * d - 1) // 2
    assert len(ref["x_stabs"]) == d - 1


@pytest.mark.parametrize("d", [3, 5])
def test_stabilizers_are_the_centre_of_the_gauge_group(d: int) -> None:
    code = reference_code(d)
    zg, xg = masks(code, "z_gauges", d), masks(code, "x_gauges", d)
    zs, xs = masks(code, "z_stabs", d), masks(code, "x_stabs", d)
    # Stabilizers commute with every gauge (CSS: only Z against X matters).
    assert all(commute(s, g) for s in zs for g in xg)
    assert all(commute(s, g) for s in xs for g in zg)
    # ... and are products of gauges of their own type.
    zg_basis, xg_basis = echelon(zg), echelon(xg)
    assert all(reduce(s, zg_basis) == 0 for s in zs)
    assert all(reduce(s, xg_basis) == 0 for s in xs)
    # Centre, Z part: span(Z gauges) ∩ (commutes with all X gauges). Its dimension is
    # rank(Zg) - rank(Xg Zg^T); it contains the Z stabilizers, so equal dimensions mean equality.
    def inner(rows_a: list[int], rows_b: list[int]) -> list[int]:
        return [sum((0 if commute(a, b) else 1) << k for k, a in enumerate(rows_a)) for b in rows_b]

    assert rank(zg) - rank(inner(xg, zg)) == rank(zs)
    assert rank(xg) - rank(inner(zg, xg)) == rank(xs)
    # Parameters [[d^2, 1, d]] with (d-1)^2/2 gauge qubits ([CZYHC]).
    n = d * d
    gauge_qubits = (rank(zg) + rank(xg) - rank(zs) - rank(xs)) // 2
    assert gauge_qubits == (d - 1) ** 2 // 2
    assert n - rank(zs) - rank(xs) - gauge_qubits == 1


@pytest.mark.parametrize("d", [3, 5])
def test_logicals_anticommute_and_commute_with_stabilizers(d: int) -> None:
    code = reference_code(d)
    (lx,), (lz,) = masks(code, "logical_x", d), masks(code, "logical_z", d)
    assert not commute(lx, lz)
    assert all(commute(lz, s) for s in masks(code, "x_stabs", d))
    assert all(commute(lx, s) for s in masks(code, "z_stabs", d))
    # Bare logicals: they commute with every gauge too, and are not gauge operators.
    assert all(commute(lz, g) for g in masks(code, "x_gauges", d))
    assert all(commute(lx, g) for g in masks(code, "z_gauges", d))
    assert reduce(lx, echelon(masks(code, "x_gauges", d))) != 0
    assert reduce(lz, echelon(masks(code, "z_gauges", d))) != 0
    # The implemented layout carries the same logicals.
    layout = FAMILY.layout(d, "Z")
    cell = cell_of(d)
    assert to_mask(frozenset(cell[q] for q in layout.logical_x), d) == lx
    assert to_mask(frozenset(cell[q] for q in layout.logical_z), d) == lz


def dressed_distance(d: int, kind: str) -> int:
    """Smallest weight of a ``kind`` operator commuting with the other type's stabilizers, not a gauge."""
    code = reference_code(d)
    other = "z_stabs" if kind == "X" else "x_stabs"
    gauges = echelon(masks(code, "x_gauges" if kind == "X" else "z_gauges", d))
    checks = masks(code, other, d)
    for weight in range(1, d * d + 1):
        for support in itertools.combinations(range(d * d), weight):
            op = sum(1 << q for q in support)
            if all(commute(op, c) for c in checks) and reduce(op, gauges) != 0:
                return weight
    raise AssertionError("no logical operator")


@pytest.mark.parametrize("d", [3, 5])
@pytest.mark.parametrize("kind", ["X", "Z"])
def test_dressed_distance_is_d(d: int, kind: str) -> None:
    # [[d^2, 1, d]] ([CZYHC]): brute force over all operators of weight <= d.
    assert dressed_distance(d, kind) == d


# ---------------------------------------------------------------------------
# The hardware graph ([note]; [CZYHC] Fig. of the heavy-hexagon lattice).
# ---------------------------------------------------------------------------


def reference_graph(d: int) -> tuple[set[frozenset[int]], dict[str, int]]:
    """Edges of the graph described in [note], on the layout's qubits found by their coordinates.

    D(i,j) at (2j, 2i); F(i,j) between D(i,j) and D(i+1,j), at (2j, 2i+1); the syndrome
    qubit of the weight-4 gauge with corner (i,j) at (2j+1, 2i+1); top-row syndrome
    qubits at (4m-1, 1), bottom-row ones at (4m+1, 2d+1) (the documented coordinates).
    """
    layout = FAMILY.layout(d, "Z")
    at = {(int(x), int(y)): q for q, (x, y) in layout.coords.items()}
    D = lambda i, j: at[(2 * j, 2 * i)]  # noqa: E731
    F = lambda i, j: at[(2 * j, 2 * i + 1)]  # noqa: E731
    edges: set[frozenset[int]] = set()
    for j in range(1, d + 1):
        for i in range(1, d):
            edges |= {frozenset((D(i, j), F(i, j))), frozenset((F(i, j), D(i + 1, j)))}
    for i in range(1, d):
        for j in range(1, d):
            if (i + j) % 2 == 1:
                s = at[(2 * j + 1, 2 * i + 1)]
                edges |= {frozenset((s, F(i, j))), frozenset((s, F(i, j + 1)))}
    for m in range(1, (d - 1) // 2 + 1):
        top, bottom = at[(4 * m - 1, 1)], at[(4 * m + 1, 2 * d + 1)]
        edges |= {frozenset((top, D(1, 2 * m - 1))), frozenset((top, D(1, 2 * m)))}
        edges |= {frozenset((bottom, D(d, 2 * m))), frozenset((bottom, D(d, 2 * m + 1)))}
    roles = {role: sum(1 for r in layout.roles.values() if r == role) for role in ("data", "flag", "measure")}
    return edges, roles


def two_qubit_pairs(circuit: stim.Circuit) -> set[frozenset[int]]:
    pairs: set[frozenset[int]] = set()
    for inst in circuit.flattened():
        if inst.name in ("CX", "CZ"):
            t = [x.value for x in inst.targets_copy()]
            pairs |= {frozenset(p) for p in zip(t[::2], t[1::2])}
    return pairs


@pytest.mark.parametrize("d, total", [(3, 19), (5, 57), (7, 115)])  # [note]; Error Correction Zoo
def test_qubit_counts(d: int, total: int) -> None:
    _, roles = reference_graph(d)
    assert roles == {"data": d * d, "flag": d * (d - 1), "measure": (d * d - 1) // 2}
    assert FAMILY.qubit_count(d) == total == (5 * d * d - 2 * d - 1) // 2
    assert len(FAMILY.layout(d, "X").qubits) == total


@pytest.mark.parametrize("d", [3, 5, 7])
def test_every_gate_is_on_a_heavy_hex_edge(d: int) -> None:
    edges, _ = reference_graph(d)
    degree: dict[int, int] = {}
    for e in edges:
        for q in e:
            degree[q] = degree.get(q, 0) + 1
    assert max(degree.values()) == 3  # [CZYHC]: a degree-3 graph
    assert len(degree) == FAMILY.qubit_count(d)  # connected to every qubit
    for basis in ("Z", "X"):
        for gate_set in ("cx", "cz"):
            pairs = two_qubit_pairs(FAMILY.ideal_circuit(d, 2, basis, gate_set).to_stim())  # type: ignore[arg-type]
            assert pairs <= edges, sorted(map(sorted, pairs - edges))
            assert pairs == edges  # the round uses every coupler
    assert structure(d).edges == edges


# ---------------------------------------------------------------------------
# Circuits.
# ---------------------------------------------------------------------------


@pytest.mark.parametrize("d", [3, 5])
@pytest.mark.parametrize("basis", ["Z", "X"])
@pytest.mark.parametrize("gate_set", ["cx", "cz"])
def test_noiseless_circuits_give_no_detection_events(d: int, basis: str, gate_set: str) -> None:
    # Common practice: every detector is deterministic without noise, and so is the observable.
    for rounds in sorted({1, 2, 3, d}):
        ideal = FAMILY.ideal_circuit(d, rounds, basis, gate_set)  # type: ignore[arg-type]
        circuit = ideal.to_stim()
        samples = circuit.compile_detector_sampler(seed=rounds).sample(64, append_observables=True)
        assert not samples.any(), (d, basis, gate_set, rounds)
        coords = circuit.get_detector_coordinates()
        flags = [c for c in coords.values() if len(c) == 4]
        assert all(len(c) == 3 or (len(c) == 4 and c[3] == FLAG_MARK) for c in coords.values())
        # Two flags per weight-4 X gauge, (d-1)^2/2 of those ([note]), every round.
        assert len(flags) == rounds * (d - 1) ** 2
        # Stabilizers per round: memory type from round 0, the other from round 1, and the final ones.
        n_basis = (d * d - 1) // 2 if basis == "Z" else d - 1
        n_other = d - 1 if basis == "Z" else (d * d - 1) // 2
        assert circuit.num_detectors == len(flags) + (rounds + 1) * n_basis + (rounds - 1) * n_other


def test_layers_show_one_round_as_described() -> None:
    # [note]: X half (reset, 6 CX layers, measure), Z half (reset, 2 CX layers, measure); one
    # round-opening layer per round, so per-round noise (phenomenological data errors) lands once.
    ideal = FAMILY.ideal_circuit(3, 2, "Z", "cx")
    kinds = [layer.kind for layer in ideal.layers if layer.round == 1]
    assert kinds == ["reset"] + ["gate2"] * 6 + ["measure", "reset"] + ["gate2"] * 2 + ["measure"]
    assert sum(layer.opens_round for layer in ideal.layers) == 2


def noisy(d: int, basis: str, noise: str = "circuit_depolarizing", p: float = 1e-3, rounds: int | None = None) -> stim.Circuit:
    model = get_noise_model(noise)(p)
    ideal = FAMILY.ideal_circuit(d, rounds or d, basis, model.circuit_gate_set())  # type: ignore[arg-type]
    return model.decorate(ideal)


def without_flag_detectors(circuit: stim.Circuit) -> stim.Circuit:
    out = stim.Circuit()
    for inst in circuit.flattened():
        if inst.name == "DETECTOR" and len(inst.gate_args_copy()) == 4:
            continue
        out.append(inst)
    return out


def circuit_distance(circuit: stim.Circuit) -> int:
    return len(circuit.search_for_undetectable_logical_errors(
        dont_explore_detection_event_sets_with_size_above=4,
        dont_explore_edges_with_degree_above=4,
        dont_explore_edges_increasing_symptom_degree=False,
        canonicalize_circuit_errors=True,
    ))


@pytest.mark.parametrize("d", [3, 5])
@pytest.mark.parametrize("basis", ["Z", "X"])
def test_circuit_distance_with_flags_is_d(d: int, basis: str) -> None:
    # [note]: the full circuit distance d in both bases when flag detectors are included.
    assert circuit_distance(noisy(d, basis)) == d


@pytest.mark.parametrize("d, expected", [(3, 2), (5, 3)])
def test_z_circuit_distance_without_flags_drops(d: int, expected: int) -> None:
    # [note]: without flag detectors a single fault spreads to a vertical data pair and
    # the Z-memory circuit distance falls to (d+1)/2: 2 at d = 3, 3 at d = 5.
    assert circuit_distance(without_flag_detectors(noisy(d, "Z"))) == expected


@pytest.mark.parametrize("noise", ["circuit_depolarizing", "si1000"])
@pytest.mark.parametrize("basis", ["Z", "X"])
def test_noise_models_decorate_and_decompose(noise: str, basis: str) -> None:
    # [note]: decompose_errors=True succeeds. The noise models see layers only.
    for d in (3, 5):
        circuit = noisy(d, basis, noise, 2e-3)
        dem = circuit.detector_error_model(decompose_errors=True)
        assert dem.num_errors > 0 and dem.num_detectors == circuit.num_detectors
        gates = {inst.name for inst in circuit.flattened()}
        assert ({"CX", "CZ"} & gates) == ({"CZ"} if noise == "si1000" else {"CX"})


def test_points_and_registry() -> None:
    assert CODE_FAMILIES["heavy_hex"].name == "heavy_hex"
    assert FAMILY.distance_problem(4) is not None and FAMILY.distance_problem(2) is not None
    assert FAMILY.distance_problem(9) is None
    point = Point("heavy_hex", 3, 3, "X", "si1000", 2e-3, "mwpm")
    assert noisy_circuit(point).num_detectors > 0
    assert qubit_count(point) == 19
    with pytest.raises(ValueError):
        structure(4)


# ---------------------------------------------------------------------------
# The decoder.
# ---------------------------------------------------------------------------


def test_class_posteriors_match_enumeration() -> None:
    # Bayes' rule by brute-force enumeration of independent classes (common practice).
    rng = np.random.default_rng(3)
    for k in (1, 2, 3):
        masks_ = [m for m in range(1, 1 << k)]
        probs = list(rng.uniform(0.001, 0.2, len(masks_)))
        full = (1 << k) - 1
        total = 0.0
        fired = np.zeros(len(masks_))
        for choice in itertools.product((0, 1), repeat=len(masks_)):
            xor = 0
            weight = 1.0
            for c, m, p in zip(choice, masks_, probs):
                xor ^= m if c else 0
                weight *= p if c else 1 - p
            if xor == full:
                total += weight
                fired += np.array(choice) * weight
        got = class_posteriors(masks_, probs, k)
        assert got is not None
        np.testing.assert_allclose(got, fired / total, rtol=1e-9)
    assert class_posteriors([0b01], [0.1], 2) is None  # flag 2 cannot be explained


def test_flag_matching_is_plain_matching_without_flags() -> None:
    # No flag detectors (rotated surface code): nothing to condition on, same graph as mwpm.
    circuit = noisy_circuit(Point("rotated_surface", 5, 5, "Z", "circuit_depolarizing", 5e-3, "mwpm"))
    dem = circuit.detector_error_model(decompose_errors=True)
    det, _ = circuit.compile_detector_sampler(seed=2).sample(3000, separate_observables=True, bit_packed=True)
    flagged, plain = FlagMatching(), Matching()
    flagged.compile(dem)
    plain.compile(dem)
    assert flagged.num_flags == 0
    assert np.array_equal(flagged.decode_batch(det), plain.decode_batch(det))


def test_flag_matching_conforms_on_a_heavy_hex_circuit() -> None:
    # The shared conformance suite (codebench.testing), on a circuit with flags.
    from codebench.testing import check_decoder

    check_decoder(FlagMatching, noisy(3, "Z", p=5e-3))


def test_compiled_and_scratch_graphs_agree() -> None:
    # A pattern decodes on a cached graph when shared by several shots, on the scratch graph
    # when seen once: both must give the same predictions (and the cache stays bounded).
    circuit = noisy(5, "Z", p=3e-3, rounds=3)
    dem = circuit.detector_error_model(decompose_errors=True)
    det, _ = circuit.compile_detector_sampler(seed=9).sample(300, separate_observables=True, bit_packed=True)
    doubled = np.concatenate([det, det])
    cached = FlagMatching()
    cached.compile(dem)
    batch = cached.decode_batch(doubled)
    assert np.array_equal(batch[:300], batch[300:])
    fresh = FlagMatching()
    fresh.compile(dem)
    singles = np.concatenate([fresh.decode_batch(det[i : i + 1]) for i in range(len(det))])
    assert np.array_equal(singles, batch[:300])
    graphs = cached._graphs
    assert graphs is not None and 0 < len(graphs.graphs) <= graphs.cache_size <= FlagMatching.cache_size
    assert cached.num_flags == 3 * 16


class TrialNoise(NoiseModel):
    """The noise of the [note] trial: DEPOLARIZE2(p) after each CX, DEPOLARIZE1(p) on the qubits idle
    in each CX layer, flips with probability p after resets and before measurements (nothing else)."""

    name = "heavy_hex_trial"  # not registered: only used here

    def layer_noise(self, layer: Layer, ideal: IdealCircuit) -> tuple[list[NoiseOp], list[NoiseOp]]:
        p = self.p
        before: list[NoiseOp] = []
        after: list[NoiseOp] = []
        if layer.kind == "gate2":
            after.append(("DEPOLARIZE1", idle_qubits(layer, ideal), [p]))
        for op in layer.ops:
            if layer.kind == "gate2":
                after.append(("DEPOLARIZE2", op.targets, [p]))
            elif layer.kind == "reset":
                after.append((flip_for(op.gate), op.targets, [p]))
            elif layer.kind == "measure":
                before.append((flip_for(op.gate), op.targets, [p]))
        return before, after


#: Z-basis logical failure per shot at p = 1e-3, rounds = d, flag-conditioned matching
#: ([note], "from our trial", about these values).
TRIAL = {3: 5e-3, 5: 1.3e-3, 7: 3e-4}


def trial_failure_rate(d: int, shots: int) -> float:
    circuit = TrialNoise(1e-3).decorate(FAMILY.ideal_circuit(d, d, "Z", "cx"))
    decoder = FlagMatching()
    decoder.compile(circuit.detector_error_model(decompose_errors=True))
    det, obs = circuit.compile_detector_sampler(seed=1907 + d).sample(shots, separate_observables=True,
                                                                       bit_packed=True)
    return float(np.any(decoder.decode_batch(det) != obs, axis=1).mean())


@pytest.mark.parametrize("d, shots", [(3, 20_000), (5, 40_000)])
def test_trial_failure_rates_within_a_factor_two(d: int, shots: int) -> None:
    # [note] trial under its own noise model (reproduced by TrialNoise): within a factor 2.
    # We measured 3.9e-3 and 1.8e-3 on 200k shots each (0.8x and 1.4x the trial's values).
    rate = trial_failure_rate(d, shots)
    assert TRIAL[d] / 2 <= rate <= TRIAL[d] * 2, rate


@pytest.mark.slow
def test_trial_failure_rate_at_d7() -> None:
    # [note] trial at d = 7 (about 3e-4; we measured 4.2e-4 on 200k shots): within a factor 2.
    rate = trial_failure_rate(7, 200_000)
    assert TRIAL[7] / 2 <= rate <= TRIAL[7] * 2, rate


# ---------------------------------------------------------------------------
# Sweeps through the public API.
# ---------------------------------------------------------------------------


def _sweep(tmp_path: Path, name: str, studies: list[dict[str, Any]], shots: int, failures: int) -> Any:
    config = {"name": name, "seed": 2020, "stopping": {"failure_target": failures, "shot_budget": shots},
              "study": studies}
    return run_sweep(config, out=tmp_path / name, workers=2, progress=False)


def _row(frame: Any, **match: Any) -> Any:
    sel = frame
    for key, value in match.items():
        sel = sel[sel[key] == value]
    assert len(sel) == 1, match
    return sel.iloc[0]


def _z_memory(tmp_path: Path, shots: int, failures: int) -> None:
    study = {"code": "heavy_hex", "rounds": "d", "basis": ["Z"], "noise": "circuit_depolarizing", "p": [1e-3]}
    frame = _sweep(tmp_path, "hh_z", [
        {**study, "label": "flag", "distances": [3, 5, 7], "decoders": [FLAG_DECODER]},
        {**study, "label": "plain", "distances": [5], "decoders": ["mwpm"]},
    ], shots, failures)
    flag = {d: _row(frame, study="flag", distance=d) for d in (3, 5, 7)}
    plain = _row(frame, study="plain", distance=5)
    # Falls with distance (a threshold exists for X errors, [CZYHC]): 95% intervals separate.
    assert flag[5]["failure_rate_high"] < flag[3]["failure_rate_low"]
    assert flag[7]["failure_rate_high"] < flag[5]["failure_rate_low"]
    # Beats matching with flags as ordinary graph nodes ([note]: that decodes wrongly).
    assert flag[5]["failure_rate_high"] < plain["failure_rate_low"]
    # Our circuit_depolarizing values (measured with 300+ failures each: 6.8e-3, 3.2e-3, 1.06e-3;
    # mwpm 1.8e-2 at d = 5). This model also depolarizes qubits idle during resets and
    # measurements, which the [note] trial does not, so it is noisier than the trial (see
    # test_trial_failure_rates_within_a_factor_two for that comparison); factor-3 band here.
    for d, ours in ((3, 6.8e-3), (5, 3.2e-3), (7, 1.06e-3)):
        assert ours / 3 <= flag[d]["failure_rate"] <= ours * 3, (d, flag[d]["failure_rate"])


def test_z_memory_improves_with_distance(tmp_path: Path) -> None:
    _z_memory(tmp_path, shots=30_000, failures=80)


@pytest.mark.slow
def test_z_memory_improves_with_distance_many_shots(tmp_path: Path) -> None:
    _z_memory(tmp_path, shots=400_000, failures=400)


def _x_memory(tmp_path: Path, shots: int) -> None:
    frame = _sweep(tmp_path, "hh_x", [{
        "code": "heavy_hex", "distances": [3, 5, 7], "rounds": "d", "basis": ["X"],
        "noise": "circuit_depolarizing", "p": [3e-3], "decoders": [FLAG_DECODER],
    }], shots, 10**9)
    rows = {d: _row(frame, distance=d) for d in (3, 5, 7)}
    # No threshold for Z errors (Bacon-Shor-like X stabilizers, [CZYHC]): worse with d at p = 0.3%.
    assert rows[3]["failure_rate_high"] < rows[5]["failure_rate_low"]
    assert rows[5]["failure_rate_high"] < rows[7]["failure_rate_low"]


def test_x_memory_gets_worse_with_distance(tmp_path: Path) -> None:
    _x_memory(tmp_path, shots=3000)


@pytest.mark.slow
def test_x_memory_gets_worse_with_distance_many_shots(tmp_path: Path) -> None:
    _x_memory(tmp_path, shots=50_000)


def test_threshold_config_loads() -> None:
    sweep = load_sweep(REPO / "configs" / "heavy_hex_threshold.toml")
    points = sweep.points
    assert {(p.code, p.decoder) for p in points} == {("heavy_hex", "flag_matching"), ("rotated_surface", "mwpm")}
    assert {p.distance for p in points} == {3, 5, 7}
    assert {p.basis for p in points} == {"Z"} and {p.noise for p in points} == {"circuit_depolarizing"}
    rates = sorted({p.p for p in points})
    assert rates[0] == pytest.approx(2e-3) and rates[-1] == pytest.approx(6e-3)
    assert all(p.rounds == p.distance for p in points)


def test_heavy_hex_family_class() -> None:
    assert isinstance(FAMILY, HeavyHex)
    assert FAMILY.bases == ("Z", "X")
