"""Memory-experiment circuits as layers, before any noise.

The builder turns a :class:`~codebench.codes.Layout` into an
:class:`IdealCircuit`: a list of layers (one operation kind per layer, one
TICK between layers), the detectors and the logical observable, all in terms
of absolute measurement indices. A noise model then decorates each layer
(:func:`render`), so detectors stay valid: noise adds no measurements.

Two gate sets exist because noise models prescribe their native gates:
``"cx"`` uses R/RX, CX, M/MX; ``"cz"`` uses only Z-basis reset and
measurement, CZ and H (CX = H·CZ·H on the target; adjacent H layers merge
and cancel).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable, Literal, Sequence

import stim

from codebench.layout import Basis, Layout

LayerKind = Literal["reset", "gate1", "gate2", "measure"]
GateSet = Literal["cx", "cz"]


@dataclass(frozen=True)
class Op:
    """One stim gate on its targets (pairs flattened for two-qubit gates)."""

    gate: str
    targets: tuple[int, ...]


@dataclass(frozen=True)
class Layer:
    """Operations of one kind that run at the same time.

    ``round`` is the syndrome round the layer belongs to (``rounds`` for the
    final data readout); ``opens_round`` marks the first layer of a round.
    """

    kind: LayerKind
    ops: tuple[Op, ...]
    round: int
    opens_round: bool = False

    @property
    def qubits(self) -> frozenset[int]:
        return frozenset(q for op in self.ops for q in op.targets)


#: Fourth detector coordinate of a flag detector: (x, y, t, FLAG_MARK). Decoders find flags by it.
FLAG_MARK = 1.0


@dataclass(frozen=True)
class Detector:
    """A parity of measurement results that is deterministic without noise.

    ``coords`` is (x, y, t), or (x, y, t, FLAG_MARK) for a flag-qubit detector.
    """

    records: tuple[int, ...]
    coords: tuple[float, ...]
    after_layer: int


@dataclass
class IdealCircuit:
    """A noiseless memory experiment, layer by layer."""

    layout: Layout
    basis: Basis
    rounds: int
    gate_set: GateSet
    layers: list[Layer] = field(default_factory=list)
    detectors: list[Detector] = field(default_factory=list)
    observable: tuple[int, ...] = ()
    num_measurements: int = 0

    @property
    def qubits(self) -> tuple[int, ...]:
        return self.layout.qubits

    def to_stim(self) -> stim.Circuit:
        """The circuit without noise."""
        return render(self, lambda layer, circuit: ([], []))


NoiseOp = tuple[str, Sequence[int], Sequence[float]]
NoiseHook = Callable[[Layer, IdealCircuit], tuple[list[NoiseOp], list[NoiseOp]]]


def _reset_gate(basis: Basis, gate_set: GateSet) -> str:
    return "R" if basis == "Z" or gate_set == "cz" else "RX"


def _measure_gate(basis: Basis, gate_set: GateSet) -> str:
    return "M" if basis == "Z" or gate_set == "cz" else "MX"


class LayerBuilder:
    """Appends layers to an :class:`IdealCircuit` in its gate set and counts measurement records.

    Code families with their own round structure (flag qubits, several halves
    per round) build their circuits with it.
    """

    def __init__(self, circuit: IdealCircuit) -> None:
        self.c = circuit

    def layer(self, kind: LayerKind, ops: list[Op], rnd: int, opens: bool = False) -> None:
        ops = [op for op in ops if op.targets]
        if ops:
            self.c.layers.append(Layer(kind, tuple(ops), rnd, opens))

    def hadamards(self, qubits: Sequence[int], rnd: int, opens: bool = False) -> None:
        self.layer("gate1", [Op("H", tuple(sorted(qubits)))], rnd, opens)

    def reset(self, by_basis: dict[Basis, list[int]], rnd: int) -> None:
        """Reset qubits into the +1 eigenstate of their basis."""
        gs = self.c.gate_set
        ops = [Op(_reset_gate(b, gs), tuple(sorted(qs))) for b, qs in by_basis.items()]
        self.layer("reset", ops, rnd, opens=True)
        if gs == "cz":
            self.hadamards(by_basis.get("X", []), rnd)

    def measure(self, by_basis: dict[Basis, list[int]], rnd: int) -> list[int]:
        """Measure qubits in their basis; returns the record indices in order of ``by_basis``."""
        gs = self.c.gate_set
        if gs == "cz":
            self.hadamards(by_basis.get("X", []), rnd)
        ops = [Op(_measure_gate(b, gs), tuple(sorted(qs))) for b, qs in by_basis.items()]
        self.layer("measure", ops, rnd)
        records: list[int] = []
        for op in ops:
            records.extend(range(self.c.num_measurements, self.c.num_measurements + len(op.targets)))
            self.c.num_measurements += len(op.targets)
        return records

    def entangle(self, pairs: list[tuple[int, int]], rnd: int) -> None:
        """One layer of CX(control, target), compiled to the gate set."""
        flat = tuple(q for pair in pairs for q in pair)
        if self.c.gate_set == "cx":
            self.layer("gate2", [Op("CX", flat)], rnd)
            return
        targets = [t for _, t in pairs]
        self.hadamards(targets, rnd)
        self.layer("gate2", [Op("CZ", flat)], rnd)
        self.hadamards(targets, rnd)


def _merge_single_qubit_layers(layers: list[Layer]) -> list[Layer]:
    """Merge adjacent H-only layers; H·H on one qubit cancels."""
    out: list[Layer] = []
    for layer in layers:
        is_h = layer.kind == "gate1" and all(op.gate == "H" for op in layer.ops)
        prev = out[-1] if out else None
        if is_h and prev is not None and prev.kind == "gate1" and all(op.gate == "H" for op in prev.ops):
            merged = set(prev.qubits) ^ set(layer.qubits)
            out.pop()
            if merged:
                out.append(Layer("gate1", (Op("H", tuple(sorted(merged))),), prev.round, prev.opens_round))
            continue
        out.append(layer)
    return out


def build_memory(layout: Layout, rounds: int, basis: Basis, gate_set: GateSet = "cx") -> IdealCircuit:
    """Build the memory experiment: prepare, ``rounds`` syndrome rounds, read out.

    Data qubits are prepared in ``basis``; every round resets the measure
    qubits, runs the check schedule, and measures the measure qubits. Round 0
    has detectors only for checks of type ``basis`` (the others are random);
    later rounds compare each check with its previous value; the final data
    readout closes the checks of type ``basis`` and gives the observable.

    >>> from codebench.codes import get_code_family
    >>> layout = get_code_family("repetition").layout(3, "Z")
    >>> ideal = build_memory(layout, rounds=2, basis="Z")
    >>> ideal.to_stim().compile_detector_sampler().sample(4).any()
    np.False_
    """
    if rounds < 1:
        raise ValueError(f"rounds must be >= 1; got {rounds}")
    circuit = IdealCircuit(layout=layout, basis=basis, rounds=rounds, gate_set=gate_set)
    b = LayerBuilder(circuit)
    by_type: dict[Basis, list[int]] = {"Z": [], "X": []}
    for check in layout.checks:
        by_type[check.basis].append(check.measure)
    order = [c.measure for c in sorted(layout.checks, key=lambda c: (c.basis != "Z", c.measure))]
    check_of = {c.measure: c for c in layout.checks}
    previous: dict[int, int] = {}
    for rnd in range(rounds):
        resets = {k: list(v) for k, v in by_type.items()}
        if rnd == 0:
            resets[basis] = resets[basis] + list(layout.data_qubits)
        b.reset(resets, rnd)
        for step in range(layout.num_steps):
            pairs: list[tuple[int, int]] = []
            for check in layout.checks:
                q = check.schedule[step] if step < len(check.schedule) else None
                if q is None:
                    continue
                pairs.append((q, check.measure) if check.basis == "Z" else (check.measure, q))
            b.entangle(pairs, rnd)
        meas: dict[Basis, list[int]] = {"Z": sorted(by_type["Z"]), "X": sorted(by_type["X"])}
        recs = b.measure(meas, rnd)
        record_of = dict(zip(meas["Z"] + meas["X"], recs))
        for m in order:
            check = check_of[m]
            if rnd == 0 and check.basis != basis:
                continue
            records: tuple[int, ...] = (record_of[m],) if rnd == 0 else (record_of[m], previous[m])
            x, y = layout.coords[m]
            circuit.detectors.append(Detector(records, (x, y, float(rnd)), len(circuit.layers) - 1))
        previous = record_of
    data = sorted(layout.data_qubits)
    recs = b.measure({basis: data}, rounds)
    data_record = dict(zip(data, recs))
    for check in layout.checks_of(basis):
        records = tuple(data_record[q] for q in check.support) + (previous[check.measure],)
        x, y = layout.coords[check.measure]
        circuit.detectors.append(Detector(records, (x, y, float(rounds)), len(circuit.layers) - 1))
    circuit.observable = tuple(data_record[q] for q in layout.logical(basis))
    if gate_set == "cz":
        merge_hadamard_layers(circuit)
    return circuit


def merge_hadamard_layers(circuit: IdealCircuit) -> None:
    """Finish a cz-gate-set circuit: merge adjacent H layers and move each detector's anchor along."""
    anchors = [circuit.layers[det.after_layer] for det in circuit.detectors]
    circuit.layers = _merge_single_qubit_layers(circuit.layers)
    position = {id(layer): i for i, layer in enumerate(circuit.layers)}
    circuit.detectors = [
        Detector(det.records, det.coords, position[id(anchor)])
        for det, anchor in zip(circuit.detectors, anchors)
    ]


def _number(value: float) -> str:
    """A parenthesised argument as stim text: repr of the float round-trips exactly.

    >>> _number(0.001), _number(2), _number(1e-05)
    ('0.001', '2.0', '1e-05')
    """
    return repr(float(value))


def _instruction(name: str, targets: Sequence[int] | Sequence[str], args: Sequence[float] = ()) -> str:
    head = f"{name}({', '.join(_number(a) for a in args)})" if args else name
    return f"{head} {' '.join(str(t) for t in targets)}"


def render(ideal: IdealCircuit, noise: NoiseHook) -> stim.Circuit:
    """Emit ``ideal`` as a stim circuit, asking ``noise`` what to add around each layer.

    The circuit is written as text and parsed once: one ``stim.Circuit.append`` per
    instruction cost 0.8 s at d = 11 (stim fuses adjacent equal instructions either way,
    so the two give equal circuits; ``tests/test_circuit_physics.py`` checks it).
    """
    lines: list[str] = []
    for q in ideal.qubits:
        x, y = ideal.layout.coords[q]
        lines.append(_instruction("QUBIT_COORDS", [q], [x, y]))
    by_layer: dict[int, list[Detector]] = {}
    for det in ideal.detectors:
        by_layer.setdefault(det.after_layer, []).append(det)
    measured = 0
    for i, layer in enumerate(ideal.layers):
        if i:
            lines.append("TICK")
        before, after = noise(layer, ideal)
        for name, targets, args in before:
            if targets:
                lines.append(_instruction(name, list(targets), list(args)))
        for op in layer.ops:
            lines.append(_instruction(op.gate, list(op.targets)))
            if layer.kind == "measure":
                measured += len(op.targets)
        for name, targets, args in after:
            if targets:
                lines.append(_instruction(name, list(targets), list(args)))
        for det in by_layer.get(i, []):
            lines.append(_instruction("DETECTOR", [f"rec[{r - measured}]" for r in det.records], list(det.coords)))
    lines.append(_instruction("OBSERVABLE_INCLUDE", [f"rec[{r - measured}]" for r in ideal.observable], [0]))
    return stim.Circuit("\n".join(lines))
