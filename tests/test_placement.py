"""Placing a code patch on a device's own qubits (issue 13): geometry, enumeration, ranking.

Sources, beside each check:

- The rotated surface code's data and measure qubits alternate on a square grid with
  nearest-neighbour couplers (common practice for square-grid chips; Fowler et al., PRA 86, 032324
  (2012), Fig. 1), so a distance-d patch is a diamond in a 2d - 1 square.
- Placements counted by a plain brute-force enumeration written in this file, by networkx's VF2 matcher (Cordella, Foggia,
  Sansone, Vento, IEEE TPAMI 26, 1367 (2004)) and, for the surface code on a grid, built as
  translations x the 8 symmetries of the square (dihedral group D4; common practice).
- Logical error of placements sampled with stim + pymatching (the outside reference of the proxy).
"""

from __future__ import annotations

import copy
import json
import math
import re
from pathlib import Path
from typing import Any

import numpy as np
import pymatching
import pytest
import stim

from codebench.build import noisy_circuit
from codebench.codes import CODE_FAMILIES
from codebench.errors import DeviceFileError
from codebench.noise.calibration import parse_device
from codebench.noise.device import DeviceNoise
from codebench.noise.geometry import generate_lattice
from codebench.noise.placement import embeddings, interaction_graph, logical_proxy
from codebench.records import Point

DEFAULTS = {"t1_us": 100.0, "t2_us": 90.0, "gate_1q_error": 5e-4, "gate_2q_error": 7e-3,
            "readout_error": 1.5e-2, "reset_error": 2e-3}
DURATIONS = {"gate_1q_ns": 25.0, "gate_2q_ns": 40.0, "measure_ns": 600.0, "reset_ns": 200.0}


def grid_device(rows: int = 7, columns: int = 7, lattice: str = "square", **extra: Any) -> dict[str, Any]:
    data: dict[str, Any] = {"name": "grid", "native_2q": "cz", "defaults": dict(DEFAULTS),
                            "durations": dict(DURATIONS),
                            "coupling": {"lattice": lattice, "rows": rows, "columns": columns}}
    data.update(extra)
    return data


def point(data: dict[str, Any], code: str = "rotated_surface", distance: int = 3, basis: str = "Z",
          scale: float = 1.0) -> Point:
    return Point(code, distance, distance, basis, "device", scale, "mwpm",
                 (("device", parse_device(data).canonical_json()),))


def model_of(data: dict[str, Any]) -> DeviceNoise:
    return DeviceNoise(1.0, device=parse_device(data).canonical_json())


def pattern(code: str, distance: int) -> tuple[tuple[int, ...], list[tuple[int, int]]]:
    return interaction_graph(CODE_FAMILIES[code], distance, "cz")


# --------------------------------------------------------------------------- the lattices


def test_generated_square_and_heavy_hex_lattices() -> None:
    # Square r x c grid: r c qubits, r (c - 1) + c (r - 1) nearest-neighbour couplers (common practice).
    ids, coords, edges = generate_lattice("square", 7, 7)
    assert len(ids) == 49 and len(edges) == 2 * 7 * 6
    assert all(abs(coords[a][0] - coords[b][0]) + abs(coords[a][1] - coords[b][1]) == 1
               for a, b in map(sorted, edges))
    # Heavy hexagon: maximum degree 3, and its shortest cycle has 12 qubits (Chamberland et al., PRX 10,
    # 011022 (2020), Fig. 1: hexagons with a qubit on every edge).
    nx = pytest.importorskip("networkx")
    ids, coords, edges = generate_lattice("heavy_hex", 5, 13)
    graph = nx.Graph([tuple(e) for e in edges])
    assert max(d for _, d in graph.degree) == 3
    assert min(len(c) for c in nx.minimum_cycle_basis(graph)) == 12
    assert nx.is_connected(graph)


def test_geometry_validation_messages() -> None:
    cases = [
        ({"coupling": {"lattice": "hexagonal", "rows": 3, "columns": 3}},
         ["coupling.lattice", "'hexagonal'", "'square', 'heavy_hex'"]),
        ({"coupling": {"lattice": "square", "rows": 0, "columns": 3}}, ["coupling.rows", "0", "an integer in [1, 100]"]),
        ({"coupling": {"lattice": "square", "rows": 3}}, ["coupling.columns", "None", "required with a lattice"]),
        ({"coupling": {"lattice": "square", "rows": 3, "columns": 3, "edges": []}}, ["either edges or a lattice"]),
        ({"qubits": [{"id": "q9_9"}]}, ["qubits[0].id", "'q9_9'", "a qubit of the square lattice"]),
        ({"qubits": [{"id": "q0_0", "usable": "no"}]}, ["qubits[0].usable", "'no'", "true or false"]),
        ({"qubits": [{"id": "q0_0", "x": 1.0}]}, ["qubits[0].x", "no coordinate: the lattice places its qubits"]),
        ({"pairs": [{"qubits": ["q0_0", "q1_1"], "usable": False}]}, ["pairs[0].qubits", "an edge of [coupling]"]),
        ({"pairs": [{"qubits": ["q0_0", "q0_1"], "gate_2q_ns": -4}]}, ["pairs[0].gate_2q_ns", "-4", "positive"]),
        ({"pairs": [{"qubits": ["q0_0", "q0_1"], "zz_khz": -1}]}, ["pairs[0].zz_khz", "-1", "kHz in [0, 10000]"]),
        ({"placement": "better"}, ["placement", "'better'", "'best', 'worst', 'median'"]),
        ({"placement": ["q0_0", "q0_0"]}, ["placement", "distinct device qubits"]),
        ({"qubits": [{"id": "a0", "site": "q9_9"}]}, ["qubits[0].site", "'q9_9'", "a qubit of the lattice"]),
        ({"qubits": [{"id": "a0", "site": "q0_0"}, {"id": "a1", "site": "q0_0"}]},
         ["qubits[1].site", "'q0_0'", "no earlier entry names"]),
        ({"qubits": [{"id": "q0_1", "site": "q0_0"}]}, ["qubits[0].id", "'q0_1'", "a name no other lattice qubit"]),
        ({"qubits": [{"id": "a0", "site": "q0_0"}, {"id": "a0", "site": "q0_1"}]}, ["qubits[1].id", "'a0'"]),
        # A named site has only its name: its lattice id is no longer a qubit of the file.
        ({"qubits": [{"id": "a0", "site": "q0_0"}], "pairs": [{"qubits": ["q0_0", "q0_1"], "gate_2q_error": 0.01}]},
         ["pairs[0].qubits[0]", "'q0_0'", "the id of a qubit of the [coupling] lattice"]),
    ]
    for change, fragments in cases:
        data = grid_device(3, 3)
        data.update(copy.deepcopy(change))
        with pytest.raises(DeviceFileError) as info:
            parse_device(data, "chip.toml")
        message = str(info.value)
        assert "\n" not in message and message.startswith("chip.toml: ")
        for fragment in fragments:
            assert fragment in message, (change, message)
    # Coordinates and usable marks need a coupling graph (a device without one keeps today's meaning).
    bare = {"name": "x", "defaults": dict(DEFAULTS), "durations": dict(DURATIONS),
            "qubits": [{"id": "a", "x": 0.0, "y": 1.0}]}
    with pytest.raises(DeviceFileError, match="only on a device with a \\[coupling\\] graph"):
        parse_device(bare)
    with pytest.raises(DeviceFileError, match="a site only on a generated lattice"):
        parse_device(dict(bare, qubits=[{"id": "a", "site": "q0_0"}]))


def test_named_sites_keep_the_lattice() -> None:
    """A named site is the same qubit of the chip: same place, same couplers, same circuit at the same numbers."""
    plain = grid_device(5, 5, qubits=[{"id": "q2_2", "t1_us": 40.0, "t2_us": 30.0}],
                        pairs=[{"qubits": ["q2_2", "q2_3"], "gate_2q_error": 0.02}])
    named = grid_device(5, 5, qubits=[{"id": "a4", "site": "q2_2", "t1_us": 40.0, "t2_us": 30.0}],
                        pairs=[{"qubits": ["a4", "q2_3"], "gate_2q_error": 0.02}])
    g, h = parse_device(plain).geometry, parse_device(named).geometry
    assert "a4" in h.nodes and "q2_2" not in h.nodes and h.coords["a4"] == g.coords["q2_2"] == (2.0, 2.0)
    assert {frozenset("a4" if q == "q2_2" else q for q in e) for e in g.edges} == set(h.edges)
    placed = [model_of(data).placement("rotated_surface", 3) for data in (plain, named)]
    assert placed[1] == tuple("a4" if q == "q2_2" else q for q in placed[0])
    assert noisy_circuit(point(plain)) == noisy_circuit(point(named))


# --------------------------------------------------------------------------- enumeration


def _translations_and_symmetries(distance: int, size: int) -> set[tuple[str, ...]]:
    """The rotated surface patch placed rigidly: translations x the 8 symmetries of the square."""
    layout = CODE_FAMILIES["rotated_surface"].layout(distance, "Z")
    # Code coordinates (x, y) -> grid (u, v) = ((x + y) / 2, (x - y) / 2 + d): data and measure neighbours
    # (diagonal in code coordinates) become nearest neighbours on the grid.
    base = {q: ((x + y) / 2, (x - y) / 2) for q, (x, y) in layout.coords.items()}
    out = set()
    symmetries = [lambda u, v: (u, v), lambda u, v: (-v, u), lambda u, v: (-u, -v), lambda u, v: (v, -u),
                  lambda u, v: (-u, v), lambda u, v: (u, -v), lambda u, v: (v, u), lambda u, v: (-v, -u)]
    for sym in symmetries:
        moved = {q: sym(u, v) for q, (u, v) in base.items()}
        u0 = min(u for u, _ in moved.values())
        v0 = min(v for _, v in moved.values())
        span = max(max(u for u, _ in moved.values()) - u0, max(v for _, v in moved.values()) - v0)
        for du in range(size - int(span)):
            for dv in range(size - int(span)):
                out.add(tuple(f"q{int(moved[q][1] - v0 + dv)}_{int(moved[q][0] - u0 + du)}"
                              for q in layout.qubits))
    return out


def _brute_force(nodes: list[str], edges: list[list[str]], qubits: tuple[int, ...],
                 pairs: list[tuple[int, int]]) -> list[tuple[str, ...]]:
    """Every injective map of the code's qubits to grid qubits with every pair on a coupler: plain
    depth-first enumeration, each next code qubit (breadth-first from qubit 0) tried on every free grid
    qubit next to its already placed partners (written here, independently of codebench's search)."""
    adj: dict[str, set[str]] = {n: set() for n in nodes}
    for a, b in edges:
        adj[a].add(b)
        adj[b].add(a)
    partners: dict[int, set[int]] = {q: set() for q in qubits}
    for a, b in pairs:
        partners[a].add(b)
        partners[b].add(a)
    order = [qubits[0]]
    for q in order:
        order += sorted(partners[q] - set(order))
    out: list[tuple[str, ...]] = []
    place: dict[int, str] = {}

    def go(i: int) -> None:
        if i == len(order):
            out.append(tuple(place[q] for q in qubits))
            return
        q = order[i]
        done = [place[n] for n in partners[q] if n in place]
        used = set(place.values())
        for c in sorted(adj[done[0]]) if done else nodes:
            if c not in used and all(c in adj[d] for d in done):
                place[q] = c
                go(i + 1)
                del place[q]

    go(0)
    return sorted(out)


@pytest.mark.parametrize("code, distance, expected", [
    ("rotated_surface", 3, 72),   # (7 - 5 + 1)^2 translations x 8 symmetries of the 5 x 5 diamond
    ("rotated_surface", 5, 0),    # the d = 5 diamond needs a 9 x 9 square
    ("repetition", 3, 2652),      # 4-step self-avoiding paths on the 7 x 7 grid
    ("repetition", 5, 78168),     # 8-step self-avoiding paths
])
def test_placements_on_a_7x7_grid_match_a_brute_force_enumeration(code: str, distance: int, expected: int) -> None:
    device = parse_device(grid_device(7, 7))
    qubits, pairs = pattern(code, distance)
    found = embeddings(device.geometry, qubits, pairs, limit=10**6)
    reference = _brute_force(list(device.geometry.nodes), [sorted(e) for e in device.geometry.edges], qubits, pairs)
    assert found == reference
    assert len(found) == expected
    if code == "rotated_surface":
        assert set(found) == _translations_and_symmetries(distance, 7)


@pytest.mark.parametrize("code, distance, rows", [("rotated_surface", 3, 7), ("repetition", 3, 7)])
def test_placements_match_networkx_subgraph_monomorphisms(code: str, distance: int, rows: int) -> None:
    nx = pytest.importorskip("networkx")
    from networkx.algorithms.isomorphism import GraphMatcher

    device = parse_device(grid_device(rows, rows))
    qubits, pairs = pattern(code, distance)
    host = nx.Graph([tuple(sorted(e)) for e in device.geometry.edges])
    reference = sorted(tuple({c: h for h, c in m.items()}[q] for q in qubits)
                       for m in GraphMatcher(host, nx.Graph(pairs)).subgraph_monomorphisms_iter())
    assert embeddings(device.geometry, qubits, pairs) == reference
    if code == "rotated_surface":
        assert set(reference) == _translations_and_symmetries(distance, rows)


def test_every_placed_gate_is_on_a_usable_coupler_and_dead_parts_are_never_used() -> None:
    data = grid_device(7, 7, qubits=[{"id": "q1_1", "usable": False}],
                       pairs=[{"qubits": ["q4_4", "q4_5"], "usable": False}])
    device = parse_device(data)
    qubits, pairs = pattern("rotated_surface", 3)
    found = embeddings(device.geometry, qubits, pairs)
    assert 0 < len(found) < 72
    usable = {frozenset(e) for e in device.geometry.usable_edges()}
    for placed in found:
        assert "q1_1" not in placed
        for a, b in pairs:
            pair = frozenset((placed[qubits.index(a)], placed[qubits.index(b)]))
            assert pair in usable and pair != frozenset(("q4_4", "q4_5"))
    # The circuit actually built: every CZ target pair sits on a usable coupler of the chosen placement.
    model = model_of(data)
    chosen = model.placement("rotated_surface", 3)
    assert chosen is not None
    circuit = noisy_circuit(point(data))
    for inst in circuit.flattened():
        if inst.name == "CZ":
            targets = [t.value for t in inst.targets_copy()]
            for a, b in zip(targets[::2], targets[1::2]):
                assert frozenset((chosen[a], chosen[b])) in usable


def test_a_hand_written_layout_is_checked_against_dead_qubits_and_couplers() -> None:
    data = grid_device(5, 5)
    qubits = model_of(data).placement("rotated_surface", 3)
    assert qubits is not None
    broken = dict(data, layouts=[{"code": "rotated_surface", "distance": 3, "qubits": list(qubits)}],
                  qubits=[{"id": qubits[4], "usable": False}])
    with pytest.raises(DeviceFileError, match=f"would use qubit {qubits[4]}, which is marked usable = false"):
        noisy_circuit(point(broken))


def test_an_explicit_placement_is_checked_by_every_command(tmp_path: Path,
                                                            capsys: pytest.CaptureFixture[str]) -> None:
    """The OpenQASM export, the placements command and a forecast refuse a placement that uses a dead qubit
    or the wrong number of qubits, in one line and before writing anything (as the circuit build does)."""
    from codebench.cli import main

    data = grid_device(7, 7)
    qubits = model_of(data).placement("rotated_surface", 3)
    assert qubits is not None
    broken = tmp_path / "broken.json"
    broken.write_text(json.dumps(dict(data, placement=list(qubits), qubits=[{"id": qubits[4], "usable": False}])))
    short = tmp_path / "short.json"
    short.write_text(json.dumps(dict(data, placement=list(qubits[:3]))))
    runs = [["qasm", "--device", str(broken), "--code", "rotated_surface", "--distance", "3", "--rounds", "3",
             "--out", str(tmp_path / "out" / "e.qasm")],
            ["placements", str(broken), "--distance", "3", "--out", str(tmp_path / "out")],
            ["placements", str(short), "--distance", "3", "--out", str(tmp_path / "out")],
            ["forecast", str(short), "--distances", "3,5", "--work", "1e6", "--out", str(tmp_path / "out")]]
    for arguments in runs:
        assert main(arguments) == 2, arguments
        err = [line for line in capsys.readouterr().err.splitlines() if line.strip() and "placements:" not in line]
        assert len(err) == 1 and ("marked usable = false" in err[0] or "must list 17 device qubits" in err[0]), err
        assert not (tmp_path / "out").exists()


def test_too_small_or_too_broken_device_names_the_largest_distance_that_fits() -> None:
    with pytest.raises(DeviceFileError) as info:
        noisy_circuit(point(grid_device(7, 7), distance=5))
    message = str(info.value)
    assert "\n" not in message
    assert "rotated_surface d=5 does not fit" in message and "largest distance that fits is 3" in message
    # 5 x 5 holds exactly one d = 3 diamond, centred on q2_2: with q2_2 dead, nothing fits.
    with pytest.raises(DeviceFileError) as info:
        noisy_circuit(point(grid_device(5, 5, qubits=[{"id": "q2_2", "usable": False}])))
    assert "no region of 17 usable qubits" in str(info.value) and "no distance of rotated_surface fits" in str(
        info.value)
    with pytest.raises(DeviceFileError, match="17 qubits needed, 16 usable"):
        noisy_circuit(point(grid_device(4, 4)))


def test_cli_sweep_on_a_device_too_small_writes_nothing(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    from codebench.cli import main

    (tmp_path / "chip.toml").write_text(
        'name = "chip"\n[defaults]\nt1_us = 100.0\nt2_us = 90.0\ngate_1q_error = 5e-4\ngate_2q_error = 7e-3\n'
        'readout_error = 1.5e-2\nreset_error = 2e-3\n[durations]\ngate_1q_ns = 25.0\ngate_2q_ns = 40.0\n'
        'measure_ns = 600.0\nreset_ns = 200.0\n[coupling]\nlattice = "square"\nrows = 6\ncolumns = 6\n')
    (tmp_path / "sweep.toml").write_text(
        'name = "s"\nseed = 1\n[stopping]\nshot_budget = 100\n[[study]]\ncode = "rotated_surface"\n'
        'distances = [3, 5]\nrounds = "d"\nnoise = "device"\ndevice = "chip.toml"\ndecoders = ["mwpm"]\n')
    out = tmp_path / "out"
    assert main(["sweep", str(tmp_path / "sweep.toml"), "--out", str(out)]) == 2
    lines = [line for line in capsys.readouterr().err.splitlines() if line.strip()]
    assert len(lines) == 1 and "d=5 does not fit" in lines[0] and "largest distance that fits is 3" in lines[0]
    assert not out.exists()
    assert main(["forecast", str(tmp_path / "chip.toml"), "--distances", "3,5", "--out", str(out), "--quiet"]) == 2
    assert "largest distance that fits is 3" in capsys.readouterr().err
    assert not out.exists()


# --------------------------------------------------------------------------- per-qubit numbers reach the circuit


def _instructions(circuit: stim.Circuit, name: str) -> list[tuple[list[float], list[int]]]:
    return [(inst.gate_args_copy(), [t.value for t in inst.targets_copy()])
            for inst in circuit.flattened() if inst.name == name]


def test_per_qubit_and_per_pair_values_reach_the_circuit_text() -> None:
    # On a 5 x 5 grid the d = 3 diamond is centred on q2_2, which always holds the centre data qubit.
    data = grid_device(5, 5, qubits=[{"id": "q2_2", "readout_error": 0.037, "gate_1q_error": 8e-4}],
                       pairs=[{"qubits": ["q2_2", "q2_3"], "gate_2q_error": 0.011}])
    model = model_of(data)
    placed = model.placement("rotated_surface", 3)
    assert placed is not None
    centre = placed.index("q2_2")
    partner = placed.index("q2_3")
    text = str(noisy_circuit(point(data)))
    # Readout: X_ERROR(0.037) on the centre qubit right before its final measurement (device.py docstring).
    assert re.search(rf"X_ERROR\(0\.037\) {centre}\b", text)
    # The coupler's own error: DEPOLARIZE2(5 r / 4) on the pair (Horodecki et al., PRA 60, 1888 (1999)).
    dep2 = [args for args, targets in _instructions(noisy_circuit(point(data)), "DEPOLARIZE2")
            if {centre, partner} <= set(targets)
            and any({targets[i], targets[i + 1]} == {centre, partner} for i in range(0, len(targets), 2))]
    assert dep2 and all(args == [pytest.approx(0.011 * 5 / 4, rel=1e-12)] for args in dep2)
    uniform = str(noisy_circuit(point(grid_device(5, 5))))
    assert "0.037" not in uniform and text != uniform


EXAMPLES = Path(__file__).parents[1] / "configs" / "devices"


def _without_chip(path: Path) -> dict[str, Any]:
    """The example device's content without its coupling graph and sites (the file before issue 13, item 6)."""
    import tomllib

    data = tomllib.loads(path.read_text())
    del data["coupling"]
    for entry in data.get("qubits", []):
        entry.pop("site")
    return data


def test_one_device_file_is_one_family_over_distances() -> None:
    """Each placed distance writes its own [[layouts]] entry (its own key), but shows the device file's digest, so
    a sweep's distances on one chip form one family (a Lambda fit, as on a device without a chip)."""
    options = (("device", parse_device(grid_device(9, 9)).canonical_json()),)
    placed = [DeviceNoise.options_for(options, "rotated_surface", d) for d in (3, 5)]
    assert placed[0] != placed[1]
    shown = {DeviceNoise.display_options(dict(o))["device"] for o in (options, *placed)}
    assert len(shown) == 1


def test_example_devices_have_chips() -> None:
    """The three example devices load with a coupling graph large enough for d = 7 (improved, goal: d = 15)."""
    import tomllib

    for name, side, listed in (("current", 13, 17), ("improved", 29, 0), ("goal", 29, 0)):
        path = EXAMPLES / f"larkspur_{name}.toml"
        device = parse_device(tomllib.loads(path.read_text()), str(path))
        geometry = device.geometry
        assert geometry.has_graph and len(geometry.nodes) == side * side and len(device.qubits) == listed
        assert len(geometry.usable_edges()) == 2 * side * (side - 1) and not geometry.dead_qubits
        assert set(geometry.coords) == set(geometry.nodes)
    # The current device's listed qubits keep their names, in the middle of the chip (rows, columns 4-8).
    current = parse_device(tomllib.loads((EXAMPLES / "larkspur_current.toml").read_text()))
    assert all(4 <= current.geometry.coords[q][k] <= 8 for q in current.qubits for k in (0, 1))
    assert current.layout_map("rotated_surface", 3) == tuple(current.qubits)


def test_example_devices_keep_their_circuits() -> None:
    """d = 3 on the current device, and every distance on the improved and goal devices, build the circuits
    of the same files without a chip: the d = 3 patch sits on the listed qubits, and the other two chips'
    qubits all have the defaults. (The counts still differ: the file's content is part of the point key.)"""
    import tomllib

    for name, distances in (("current", (3,)), ("improved", (3, 5)), ("goal", (3, 5))):
        path = EXAMPLES / f"larkspur_{name}.toml"
        chip = tomllib.loads(path.read_text())
        for d in distances:
            for basis in ("Z", "X"):
                placed = Point("rotated_surface", d, d, basis, "device", 1.0, "mwpm", DeviceNoise.options_for(
                    (("device", parse_device(chip).canonical_json()),), "rotated_surface", d))
                assert noisy_circuit(placed) == noisy_circuit(point(_without_chip(path), distance=d, basis=basis))
    # Larger distances of the current device now sit on its chip, the listed qubits included.
    model = model_of(tomllib.loads((EXAMPLES / "larkspur_current.toml").read_text()))
    for d, held in ((5, 15), (7, 17)):
        placed = model.placement("rotated_surface", d)
        assert placed is not None and sum(q[0] in "am" for q in placed) == held


def test_forecast_places_d3_of_the_current_device_on_its_listed_qubits() -> None:
    """The forecast's d = 3 patch uses the listed qubits, and the circuit carries their own numbers."""
    import tomllib

    from codebench.forecast import forecast

    path = EXAMPLES / "larkspur_current.toml"
    table = tomllib.loads(path.read_text())
    listed = [entry["id"] for entry in table["qubits"]]
    result = forecast(path, distances=(3, 5), work=2e6, workers=1)
    assert list(result.placements["3"]) == listed == table["layouts"][0]["qubits"]
    assert len(result.placements["5"]) == 49
    device = parse_device(table)
    # a4 (T1 64 us, T2 41 us) and the coupler a4-m2 (1.2e-2) are the listed qubit and pair of code qubits 4, 11.
    assert device.qubit("a4").t1_us == 64.0 and device.pair_error("a4", "m2") == 1.2e-2
    circuit = noisy_circuit(Point("rotated_surface", 3, 3, "Z", "device", 1.0, "mwpm",
                                  (("device", device.canonical_json()),)))
    weak = set()
    for inst in circuit.flattened():
        if inst.name == "DEPOLARIZE2" and inst.gate_args_copy() == [pytest.approx(1.2e-2 * 5 / 4, rel=1e-12)]:
            targets = [t.value for t in inst.targets_copy()]
            weak |= {frozenset(pair) for pair in zip(targets[::2], targets[1::2])}
    assert weak == {frozenset((4, 11))}


# --------------------------------------------------------------------------- the proxy


def _sampled_failures(circuit: stim.Circuit, shots: int, seed: int) -> int:
    dem = circuit.detector_error_model(decompose_errors=True)
    matching = pymatching.Matching.from_detector_error_model(dem)
    dets, obs = circuit.compile_detector_sampler(seed=seed).sample(shots, separate_observables=True)
    return int(np.sum(matching.decode_batch(dets)[:, 0] != obs[:, 0]))


def test_proxy_ranks_a_10x_worse_qubit_below_a_clean_placement_and_sampling_agrees() -> None:
    # A 5 x 9 grid holds d = 3 diamonds centred on q2_2 .. q2_6; q2_7 and its couplers are 10x worse, so a
    # placement touching it must rank below one that does not.
    bad = {"id": "q2_7", "t1_us": 10.0, "t2_us": 9.0, "gate_1q_error": 5e-3, "readout_error": 0.15,
           "reset_error": 0.02}
    pairs = [{"qubits": ["q2_7", n], "gate_2q_error": 0.07} for n in ("q1_7", "q3_7", "q2_6", "q2_8")]
    data = grid_device(5, 9, qubits=[bad], pairs=pairs)
    model = model_of(data)
    ranked = model.ranked_placements("rotated_surface", 3)
    clean = ranked[0]
    dirty = next(r for r in ranked if "q2_7" in r.qubits)
    assert "q2_7" not in clean.qubits
    assert dirty.proxy > clean.proxy
    family = CODE_FAMILIES["rotated_surface"]
    ideal = family.ideal_circuit(3, 3, "Z", "cz")
    shots = 40_000
    k_clean = _sampled_failures(model.decorate_on(ideal, clean.qubits), shots, 1)
    k_dirty = _sampled_failures(model.decorate_on(ideal, dirty.qubits), shots, 2)
    # Two-proportion z test, one-sided at 99.9% (z > 3.1): the dirty placement fails more often.
    p1, p2 = k_clean / shots, k_dirty / shots
    pooled = (k_clean + k_dirty) / (2 * shots)
    z = (p2 - p1) / math.sqrt(2 * pooled * (1 - pooled) / shots)
    assert z > 3.1, (k_clean, k_dirty)


def test_proxy_of_a_uniform_device_is_the_same_for_every_placement() -> None:
    ranked = model_of(grid_device(6, 6)).ranked_placements("rotated_surface", 3)
    assert len(ranked) == 4 * 8
    assert max(r.proxy for r in ranked) == pytest.approx(min(r.proxy for r in ranked), rel=1e-9)


def test_proxy_weight_is_the_lightest_logical_failure_of_a_uniform_code_capacity_model() -> None:
    # Repetition code d = 5, one round of perfect checks, data flips with probability p: the lightest
    # undetectable logical failure flips all 5 data qubits (weight 5 ln((1-p)/p)), and there is one
    # such path (common practice: the repetition code's distance is d).
    p = 0.01
    lines = [f"error({p}) D0 L0"] + [f"error({p}) D{i} D{i + 1}" for i in range(3)] + [f"error({p}) D3"]
    weight = logical_proxy(stim.DetectorErrorModel("\n".join(lines)))[1]
    assert weight == pytest.approx(5 * math.log((1 - p) / p), rel=1e-12)
    # stim's own search finds the same minimum number of mechanisms on a real circuit's model.
    circuit = stim.Circuit.generated("repetition_code:memory", distance=5, rounds=3,
                                     before_round_data_depolarization=p)
    dem = circuit.detector_error_model(decompose_errors=True)
    fewest = len(circuit.search_for_undetectable_logical_errors(
        dont_explore_detection_event_sets_with_size_above=4, dont_explore_edges_with_degree_above=4,
        dont_explore_edges_increasing_symptom_degree=False))
    proxy, weight, paths = logical_proxy(dem)
    p_data = 2 * p / 3  # X or Y of a depolarizing channel flips a Z-basis data qubit
    assert weight == pytest.approx(fewest * math.log((1 - p_data) / p_data), rel=1e-6)
    assert paths >= 1 and proxy > 0


def test_placement_choices_best_worst_median_and_explicit() -> None:
    bad = {"id": "q2_6", "readout_error": 0.2}
    data = grid_device(5, 7, qubits=[bad])
    ranked = model_of(data).ranked_placements("rotated_surface", 3)
    assert model_of(data).placement("rotated_surface", 3) == ranked[0].qubits
    assert model_of(dict(data, placement="worst")).placement("rotated_surface", 3) == ranked[-1].qubits
    assert model_of(dict(data, placement="median")).placement("rotated_surface", 3) == ranked[
        (len(ranked) - 1) // 2].qubits
    explicit = list(ranked[5].qubits)
    assert model_of(dict(data, placement=explicit)).placement("rotated_surface", 3) == tuple(explicit)
    with pytest.raises(DeviceFileError, match="placement must list 17 device qubits"):
        noisy_circuit(point(dict(data, placement=explicit[:-1])))


# --------------------------------------------------------------------------- commands


def test_forecast_uses_the_best_placement_and_reports_its_qubits(tmp_path: Path) -> None:
    from codebench.forecast import forecast
    from codebench.forecast.render import forecast_table

    # A line of 9 qubits, the middle one 10x worse in readout: d = 3 (5 qubits) avoids it where it can
    # (it cannot: every 5-qubit stretch of 9 holds q0_4), d = 5 takes all nine.
    data = grid_device(1, 9, qubits=[{"id": "q0_1", "readout_error": 0.15}])
    result = forecast(parse_device(data), code="repetition", distances=(3, 5), work=1e6, workers=1)
    document = result.to_json()
    assert set(document["placements"]) == {"3", "5"}
    assert "q0_1" not in document["placements"]["3"]          # the best stretch avoids the bad qubit
    assert sorted(document["placements"]["5"]) == sorted(f"q0_{c}" for c in range(9))
    assert "d = 3 on device qubits" in forecast_table(result)
    assert result.break_even.qubits_considered == 9          # the device's usable qubits


def test_placements_command_table_sampling_and_figure(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    from codebench.cli import main

    device = Path(__file__).parents[1] / "configs" / "devices" / "larkspur_grid.toml"
    out = tmp_path / "figs"
    assert main(["placements", str(device), "--distance", "3", "--sample", "--shots", "2000", "--top", "2",
                 "--out", str(out), "--quiet", "--colour-by", "readout_error"]) == 0
    printed = capsys.readouterr().out
    assert "rank" in printed and "per round" in printed and "chosen (best)" in printed
    assert (out / "placements_rotated_surface_d3.png").stat().st_size > 10_000
    assert (out / "placements_rotated_surface_d3.svg").exists()
    # A device without a coupling graph (the goal example without its chip): one line, exit 2, nothing written.
    bare = tmp_path / "bare.json"
    bare.write_text(json.dumps(_without_chip(EXAMPLES / "larkspur_goal.toml")))
    empty = tmp_path / "none"
    assert main(["placements", str(bare), "--distance", "3", "--out", str(empty)]) == 2
    err = [line for line in capsys.readouterr().err.splitlines() if line.strip()]
    assert len(err) == 1 and "[coupling] is missing" in err[0]
    assert not empty.exists()


def test_sweep_study_placement_key(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    from codebench.cli import main
    from codebench.config import load_sweep

    device = Path(__file__).parents[1] / "configs" / "devices" / "larkspur_grid.toml"
    body = ('name = "s"\nseed = 1\n[stopping]\nshot_budget = 200\n[[study]]\ncode = "rotated_surface"\n'
            f'distances = [3]\nrounds = "d"\nnoise = "device"\ndevice = "{device}"\ndecoders = ["mwpm"]\n')
    (tmp_path / "worst.toml").write_text(body + 'placement = "worst"\n')
    sweep = load_sweep(tmp_path / "worst.toml")
    document = json.loads(dict(sweep.points[0].noise_options)["device"])
    assert document["placement"] == "worst"
    worst = model_of(document).placement("rotated_surface", 3)
    assert worst == model_of(document).ranked_placements("rotated_surface", 3)[-1].qubits
    # The run names the device qubits it uses.
    assert main(["sweep", str(tmp_path / "worst.toml"), "--out", str(tmp_path / "o"), "--workers", "1"]) == 0
    assert f"rotated_surface d=3 on device qubits {', '.join(worst)} (worst placement by the proxy)" in capsys.readouterr().err
    (tmp_path / "bad.toml").write_text(body + 'placement = "luckiest"\n')
    assert main(["sweep", str(tmp_path / "bad.toml"), "--out", str(tmp_path / "b")]) == 2
    line = capsys.readouterr().err.strip()
    assert "placement" in line and "'luckiest'" in line and "'best', 'worst', 'median'" in line
    assert not (tmp_path / "b").exists()
    # Another noise model does not take it.
    (tmp_path / "si.toml").write_text(body.replace('noise = "device"', 'noise = "si1000"\np = [0.001]').replace(
        f'device = "{device}"\n', "") + 'placement = "best"\n')
    assert main(["sweep", str(tmp_path / "si.toml"), "--out", str(tmp_path / "c")]) == 2
    assert "placement is not used with noise = 'si1000'" in capsys.readouterr().err
