"""The heavy-hexagon code: a hybrid surface / Bacon-Shor subsystem code with flag qubits.

Chamberland, Zhu, Yoder, Hertzberg, Cross, "Topological and subsystem codes on
low-degree graphs with flag qubits", PRX 10, 011022 (2020). For odd d >= 3
it is an [[d^2, 1, d]] subsystem code with (d-1)^2/2 gauge qubits on a graph
of maximum degree 3 (the heavy-hexagon lattice).

Data qubits D(i, j), row i and column j with 1 <= i, j <= d:

* Z gauges (weight 2): Z D(i,j) Z D(i+1,j), measured through the flag qubit
  F(i,j) that sits between the two on the column chain.
* X gauges: weight 4 on the plaquette with top-left corner (i,j) for i+j
  odd, measured by a syndrome qubit through the flags F(i,j) and F(i,j+1);
  weight 2 on the top row X D(1,2m-1) X D(1,2m) and the bottom row
  X D(d,2m) X D(d,2m+1), measured by a syndrome qubit joined to its two data
  qubits directly.
* Z stabilizers (surface-code-like, give the Z-basis memory a threshold):
  weight-4 plaquettes with i+j even (two vertical Z gauges), left-edge pairs
  Z D(2m,1) Z D(2m+1,1) and right-edge pairs Z D(2m-1,d) Z D(2m,d).
* X stabilizers (Bacon-Shor-like, no threshold): X over two whole
  neighbouring columns, a product of X gauges.
* Logical Z: Z on the top row; logical X: X on the left column.

Coordinates (x, y), y growing downwards: D(i,j) at (2j, 2i); F(i,j) at
(2j, 2i+1), between D(i,j) and D(i+1,j); the syndrome qubit of the weight-4
gauge (i,j) at (2j+1, 2i+1), between its two flags; a top-row syndrome
qubit at (4m-1, 1), above its two data qubits; a bottom-row one at
(4m+1, 2d+1), below them. Qubit indices: data row by row, then flags row
by row, then syndrome qubits.

One round (X-gauge half, then Z-gauge half), every gate a CX on a graph
edge:

* X half. Reset the flags of weight-4 gauges to |0> and the syndrome qubits
  to |+> (in round 0 also the data, in the memory basis). Layer 1: syndrome ->
  left flag (boundary gauge: syndrome -> first data); layer 2: syndrome ->
  right flag (boundary: -> second data); layer 3: flag -> upper data;
  layer 4: flag -> lower data; layers 5 and 6 repeat layers 1 and 2 on the
  weight-4 gauges. Measure the syndrome qubits in X (the gauge values) and
  the flags in Z (0 unless a fault spread).
* Z half. Reset every flag to |0>. Layer 7: D(i,j) -> F(i,j); layer 8:
  D(i+1,j) -> F(i,j). Measure the flags in Z (the Z gauge values).

Detectors of a Z-basis memory: Z stabilizers from round 0 (product of their
one or two Z gauge outcomes, XOR the previous round after that), X
stabilizers (product of a column pair's X gauge outcomes) from round 1 on,
XOR the previous round, every X-half flag outcome on its own (coordinates
(x, y, t, FLAG_MARK)), and final Z-stabilizer detectors from the data
readout. An X-basis memory swaps the roles of the two stabilizer types. A
single gauge outcome is not a detector: the other gauge type is measured in
between, so it is random from round to round.

The flags matter: without flag detectors a single fault on a syndrome qubit
between layers 1 and 2, or on a flag before layer 3, leaves a vertical pair
of data X errors (parallel to the logical X) that the Z stabilizers see only
as a weight-1 pattern, and the Z-memory circuit distance drops to (d+1)/2.

``Layout.checks`` holds the X gauges (syndrome qubit and data support, in a
plaquette order in which no data qubit is used twice per layer): they commute
with each other and are the part of the gauge group the generic
:func:`~codebench.circuits.build_memory` can measure. The heavy-hexagon
circuit itself is built by :meth:`HeavyHex.ideal_circuit`; the full gauge and
stabilizer structure is :func:`structure`.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

from codebench.circuits import (
    FLAG_MARK,
    Detector,
    GateSet,
    IdealCircuit,
    LayerBuilder,
    Op,
    merge_hadamard_layers,
)
from codebench.codes.base import CodeFamily
from codebench.layout import Basis, Check, Layout, Role


@dataclass(frozen=True)
class XGauge:
    """One X gauge and the qubits that measure it.

    ``flags`` is ``(left, right)`` for a weight-4 gauge, ``None`` for a
    weight-2 boundary gauge (whose syndrome qubit touches ``data`` directly).
    ``data`` lists the support: (upper-left, upper-right, lower-left,
    lower-right) for weight 4, (first, second) for weight 2.
    """

    syndrome: int
    data: tuple[int, ...]
    flags: tuple[int, int] | None
    columns: tuple[int, int]


@dataclass(frozen=True)
class ZGauge:
    """The weight-2 Z gauge Z D(i,j) Z D(i+1,j), measured through flag F(i,j)."""

    flag: int
    upper: int
    lower: int


@dataclass(frozen=True)
class Stabilizer:
    """A stabilizer: its data support, the gauges whose product it is, and its coordinates."""

    basis: Basis
    support: tuple[int, ...]
    gauges: tuple[int, ...]
    coords: tuple[float, float]


@dataclass(frozen=True)
class HeavyHexStructure:
    """Qubits, gauges, stabilizers, logicals and hardware edges of the code at one distance."""

    distance: int
    data: dict[tuple[int, int], int]
    flags: dict[tuple[int, int], int]
    coords: dict[int, tuple[float, float]]
    roles: dict[int, Role]
    x_gauges: tuple[XGauge, ...]
    z_gauges: tuple[ZGauge, ...]
    z_stabilizers: tuple[Stabilizer, ...]
    x_stabilizers: tuple[Stabilizer, ...]
    logical_x: tuple[int, ...]
    logical_z: tuple[int, ...]
    edges: frozenset[frozenset[int]]

    @property
    def x_flags(self) -> tuple[int, ...]:
        """Flags used by the weight-4 X gauges (the X half's flag detectors)."""
        return tuple(sorted(f for g in self.x_gauges if g.flags for f in g.flags))

    @property
    def syndromes(self) -> tuple[int, ...]:
        return tuple(sorted(g.syndrome for g in self.x_gauges))

    def stabilizers(self, basis: Basis) -> tuple[Stabilizer, ...]:
        return self.z_stabilizers if basis == "Z" else self.x_stabilizers


def qubit_count(distance: int) -> int:
    """d^2 data + d(d-1) flags + (d^2-1)/2 syndrome qubits = (5d^2 - 2d - 1)/2."""
    return (5 * distance * distance - 2 * distance - 1) // 2


@lru_cache(maxsize=16)
def structure(distance: int) -> HeavyHexStructure:
    """The heavy-hexagon code at odd ``distance`` >= 3 (see the module docstring).

    Cached and shared between callers: treat it as read-only.
    """
    d = distance
    if d < 3 or d % 2 == 0:
        raise ValueError(f"heavy_hex distance must be an odd integer >= 3; got {d}")
    coords: dict[int, tuple[float, float]] = {}
    roles: dict[int, Role] = {}

    def add(xy: tuple[int, int], role: Role) -> int:
        q = len(coords)
        coords[q] = (float(xy[0]), float(xy[1]))
        roles[q] = role
        return q

    data = {(i, j): add((2 * j, 2 * i), "data") for i in range(1, d + 1) for j in range(1, d + 1)}
    flags = {(i, j): add((2 * j, 2 * i + 1), "flag") for i in range(1, d) for j in range(1, d + 1)}
    edges: set[frozenset[int]] = set()
    x_gauges: list[XGauge] = []
    # Weight-4 gauges, row by row, then the boundary ones (top row, bottom row).
    for i in range(1, d):
        for j in range(1, d):
            if (i + j) % 2 == 1:
                s = add((2 * j + 1, 2 * i + 1), "measure")
                left, right = flags[(i, j)], flags[(i, j + 1)]
                corners = (data[(i, j)], data[(i, j + 1)], data[(i + 1, j)], data[(i + 1, j + 1)])
                x_gauges.append(XGauge(s, corners, (left, right), (j, j + 1)))
                edges.update({frozenset((s, left)), frozenset((s, right))})
    for m in range(1, (d - 1) // 2 + 1):
        s = add((4 * m - 1, 1), "measure")
        pair = (data[(1, 2 * m - 1)], data[(1, 2 * m)])
        x_gauges.append(XGauge(s, pair, None, (2 * m - 1, 2 * m)))
        edges.update(frozenset((s, q)) for q in pair)
    for m in range(1, (d - 1) // 2 + 1):
        s = add((4 * m + 1, 2 * d + 1), "measure")
        pair = (data[(d, 2 * m)], data[(d, 2 * m + 1)])
        x_gauges.append(XGauge(s, pair, None, (2 * m, 2 * m + 1)))
        edges.update(frozenset((s, q)) for q in pair)
    z_gauges: list[ZGauge] = []
    z_gauge_at: dict[tuple[int, int], int] = {}
    for (i, j), f in flags.items():
        z_gauge_at[(i, j)] = len(z_gauges)
        z_gauges.append(ZGauge(f, data[(i, j)], data[(i + 1, j)]))
        edges.update({frozenset((f, data[(i, j)])), frozenset((f, data[(i + 1, j)]))})

    z_stabs: list[Stabilizer] = []
    for i in range(1, d):
        for j in range(1, d):
            if (i + j) % 2 == 0:
                gauges: tuple[int, ...] = (z_gauge_at[(i, j)], z_gauge_at[(i, j + 1)])
                support: tuple[int, ...] = (data[(i, j)], data[(i + 1, j)], data[(i, j + 1)], data[(i + 1, j + 1)])
                z_stabs.append(Stabilizer("Z", support, gauges, (2.0 * j + 1, 2.0 * i + 1)))
    for m in range(1, (d - 1) // 2 + 1):
        g = z_gauge_at[(2 * m, 1)]
        z_stabs.append(Stabilizer("Z", (data[(2 * m, 1)], data[(2 * m + 1, 1)]), (g,), coords[flags[(2 * m, 1)]]))
    for m in range(1, (d - 1) // 2 + 1):
        g = z_gauge_at[(2 * m - 1, d)]
        support = (data[(2 * m - 1, d)], data[(2 * m, d)])
        z_stabs.append(Stabilizer("Z", support, (g,), coords[flags[(2 * m - 1, d)]]))
    x_stabs: list[Stabilizer] = []
    for j in range(1, d):
        gauges = tuple(k for k, g in enumerate(x_gauges) if g.columns == (j, j + 1))
        support = tuple(data[(i, c)] for i in range(1, d + 1) for c in (j, j + 1))
        x_stabs.append(Stabilizer("X", support, gauges, (2.0 * j + 1, float(d + 1))))
    logical_x = tuple(data[(i, 1)] for i in range(1, d + 1))
    logical_z = tuple(data[(1, j)] for j in range(1, d + 1))
    return HeavyHexStructure(
        d, data, flags, coords, roles, tuple(x_gauges), tuple(z_gauges), tuple(z_stabs), tuple(x_stabs),
        logical_x, logical_z, frozenset(edges),
    )


def _gauge_check(gauge: XGauge) -> Check:
    # Four slots in the order upper-left, upper-right, lower-left, lower-right of a plaquette:
    # the slot fixes the plaquette, so no data qubit is used twice in one slot. A top-row pair
    # is the lower half of a plaquette above the grid, a bottom-row pair the upper half of one below.
    if gauge.flags is not None:
        schedule: tuple[int | None, ...] = gauge.data
    elif gauge.columns[0] % 2 == 1:
        schedule = (None, None) + gauge.data
    else:
        schedule = gauge.data + (None, None)
    return Check(basis="X", measure=gauge.syndrome, schedule=schedule)


class HeavyHex(CodeFamily):
    name = "heavy_hex"
    # Flag qubits are detectors that plain matching cannot use; flag-conditioned matching reaches
    # distance d where mwpm does not.
    default_decoder = "flag_matching"

    def distance_problem(self, distance: int) -> str | None:
        return None if distance >= 3 and distance % 2 == 1 else "an odd integer >= 3"

    def qubit_count(self, distance: int) -> int:
        """(5d^2 - 2d - 1)/2: data, flag and syndrome qubits (closed form)."""
        return qubit_count(distance)

    def layout(self, distance: int, basis: Basis) -> Layout:
        s = structure(distance)
        checks = tuple(_gauge_check(g) for g in s.x_gauges)
        layout = Layout(self.name, distance, dict(s.coords), dict(s.roles), checks, s.logical_x, s.logical_z)
        layout.validate()
        return layout

    def ideal_circuit(self, distance: int, rounds: int, basis: Basis, gate_set: GateSet) -> IdealCircuit:
        return build_heavy_hex_memory(distance, rounds, basis, gate_set, layout=self.layout(distance, basis))


def build_heavy_hex_memory(
    distance: int, rounds: int, basis: Basis, gate_set: GateSet = "cx", layout: Layout | None = None
) -> IdealCircuit:
    """The heavy-hexagon memory experiment: prepare, ``rounds`` rounds of both halves, read out.

    Every detector has coordinates (x, y, t), t the round (``rounds`` for the
    final data readout); flag detectors have (x, y, t, FLAG_MARK), (x, y)
    the flag's position.
    """
    if rounds < 1:
        raise ValueError(f"rounds must be >= 1; got {rounds}")
    s = structure(distance)
    if layout is None:
        layout = HeavyHex().layout(distance, basis)
    circuit = IdealCircuit(layout=layout, basis=basis, rounds=rounds, gate_set=gate_set)
    b = LayerBuilder(circuit)
    bulk = [(g.syndrome, g.flags, g.data) for g in s.x_gauges if g.flags is not None]
    edge = [g for g in s.x_gauges if g.flags is None]
    x_flags = list(s.x_flags)
    syndromes = list(s.syndromes)
    all_flags = sorted(g.flag for g in s.z_gauges)
    data = sorted(layout.data_qubits)
    last: dict[Basis, list[tuple[int, ...]]] = {}

    def detect(records: tuple[int, ...], coords: tuple[float, ...]) -> None:
        circuit.detectors.append(Detector(records, coords, len(circuit.layers) - 1))

    def stabilizer_detectors(kind: Basis, gauge_records: list[int], rnd: int) -> None:
        """Products of gauge outcomes; from round 0 in the memory basis, else from round 1."""
        values = [tuple(gauge_records[g] for g in st.gauges) for st in s.stabilizers(kind)]
        if kind == basis or rnd > 0:
            for k, st in enumerate(s.stabilizers(kind)):
                detect(values[k] + (last[kind][k] if rnd > 0 else ()), st.coords + (float(rnd),))
        last[kind] = values

    for rnd in range(rounds):
        # X half: syndrome -> flags (or boundary data), flags -> data, syndrome -> flags.
        resets: dict[Basis, list[int]] = {"Z": list(x_flags), "X": list(syndromes)}
        if rnd == 0:
            resets[basis] = resets[basis] + data
        b.reset(resets, rnd)
        b.entangle([(m, f[0]) for m, f, _ in bulk] + [(g.syndrome, g.data[0]) for g in edge], rnd)
        b.entangle([(m, f[1]) for m, f, _ in bulk] + [(g.syndrome, g.data[1]) for g in edge], rnd)
        b.entangle([(f[k], q[k]) for _, f, q in bulk for k in (0, 1)], rnd)
        b.entangle([(f[k], q[k + 2]) for _, f, q in bulk for k in (0, 1)], rnd)
        b.entangle([(m, f[0]) for m, f, _ in bulk], rnd)
        b.entangle([(m, f[1]) for m, f, _ in bulk], rnd)
        record_of = dict(zip(syndromes + x_flags, b.measure({"X": syndromes, "Z": x_flags}, rnd)))
        stabilizer_detectors("X", [record_of[g.syndrome] for g in s.x_gauges], rnd)
        for f in x_flags:
            x, y = s.coords[f]
            detect((record_of[f],), (x, y, float(rnd), FLAG_MARK))
        # Z half: every flag collects the Z parity of its two data qubits. Not a round-opening reset.
        b.layer("reset", [Op("R", tuple(all_flags))], rnd)
        b.entangle([(g.upper, g.flag) for g in s.z_gauges], rnd)
        b.entangle([(g.lower, g.flag) for g in s.z_gauges], rnd)
        z_record = dict(zip(all_flags, b.measure({"Z": all_flags}, rnd)))
        stabilizer_detectors("Z", [z_record[g.flag] for g in s.z_gauges], rnd)
    data_record = dict(zip(data, b.measure({basis: data}, rounds)))
    for st, previous in zip(s.stabilizers(basis), last[basis]):
        detect(tuple(data_record[q] for q in st.support) + previous, st.coords + (float(rounds),))
    logical = s.logical_z if basis == "Z" else s.logical_x
    circuit.observable = tuple(data_record[q] for q in logical)
    if gate_set == "cz":
        merge_hadamard_layers(circuit)
    return circuit
