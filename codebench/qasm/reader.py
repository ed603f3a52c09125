"""Read back the subset of OpenQASM 3 that :mod:`codebench.qasm.writer` writes.

The subset, statement by statement (one per line; ``//`` comments and blank lines are skipped):
``OPENQASM 3.0;``, ``include "stdgates.inc";``, ``qubit NAME;`` or ``qubit[n] q;``, ``bit[N] REG;``,
``h Q;``, ``cz Q, Q;``, ``cx Q, Q;``, ``reset Q;``, ``REG[i] = measure Q;`` (bit i is measurement i,
in order), ``barrier;`` (ends a layer) and ``box[Tns] {`` ... ``}`` around one layer. A layer with
``reset`` is a reset layer (``reset`` then ``h`` on a qubit: X-basis reset, cx gate set), one with
``measure`` a measurement layer (``h`` then ``measure``: X-basis measurement), one with ``cz``/``cx``
a two-qubit layer, one of ``h`` alone a one-qubit layer. The description file supplies what the
program does not say (rounds, detectors, observables, coordinates, roles), and the program must agree
with it: the same qubits, layer kinds, durations and measured qubit of every bit. Anything else is a
:class:`~codebench.errors.DataError` naming the line.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from typing import cast

from codebench.circuits import Detector, IdealCircuit, Layer, LayerKind, Op
from codebench.errors import DataError
from codebench.layout import Layout, Role
from codebench.qasm.description import Description

_NAME = r"([A-Za-z_][A-Za-z0-9_]*(?:\[\d+\])?)"
_PATTERNS = {
    "qubit": re.compile(r"qubit ([A-Za-z_][A-Za-z0-9_]*);"),
    "qubits": re.compile(r"qubit\[(\d+)\] q;"),
    "bits": re.compile(r"bit\[(\d+)\] ([A-Za-z_][A-Za-z0-9_]*);"),
    "gate1": re.compile(rf"(h|reset) {_NAME};"),
    "gate2": re.compile(rf"(cz|cx) {_NAME}, {_NAME};"),
    "measure": re.compile(rf"([A-Za-z_][A-Za-z0-9_]*)\[(\d+)\] = measure {_NAME};"),
    "box": re.compile(r"box\[(\d+(?:\.\d*)?(?:e-?\d+)?)ns\] \{"),
}
_SKIP = {"OPENQASM 3.0;", 'include "stdgates.inc";'}


@dataclass
class _Layer:
    statements: list[tuple[str, tuple[int, ...], int]] = field(default_factory=list)  # (what, qubits, line)
    duration_ns: float | None = None


class _Reader:
    def __init__(self, source: str) -> None:
        self.source = source
        self.qubits: dict[str, int] = {}
        self.register: str | None = None
        self.width = 0
        self.layers: list[_Layer] = [_Layer()]
        self.in_box = False
        self.measured = 0

    def fail(self, line: int, what: str) -> DataError:
        return DataError(f"{self.source}, line {line}: {what}.")

    def qubit(self, name: str, line: int) -> int:
        if name not in self.qubits:
            raise self.fail(line, f"the qubit {name!r} is not declared")
        return self.qubits[name]

    def statement(self, text: str, line: int) -> None:
        if text in _SKIP:
            return
        if text == "barrier;":
            if self.in_box:
                raise self.fail(line, "a barrier inside a box")
            self.layers.append(_Layer())
            return
        if text == "}":
            if not self.in_box:
                raise self.fail(line, "'}' closes no box")
            self.in_box = False
            return
        for kind, pattern in _PATTERNS.items():
            match = pattern.fullmatch(text)
            if match:
                self._matched(kind, match.groups(), line)
                return
        raise self.fail(line, f"{text!r} is not in the subset codebench writes (see codebench.qasm.reader)")

    def _matched(self, kind: str, groups: tuple[str, ...], line: int) -> None:
        layer = self.layers[-1]
        if kind == "qubit":
            self.qubits[groups[0]] = len(self.qubits)
        elif kind == "qubits":
            self.qubits.update({f"q[{i}]": i for i in range(int(groups[0]))})
        elif kind == "bits":
            self.width, self.register = int(groups[0]), groups[1]
        elif kind == "box":
            if self.in_box or layer.statements:
                raise self.fail(line, "a box must hold one whole layer")
            self.in_box, layer.duration_ns = True, float(groups[0])
        elif kind == "gate1":
            layer.statements.append((groups[0], (self.qubit(groups[1], line),), line))
        elif kind == "gate2":
            layer.statements.append((groups[0], (self.qubit(groups[1], line), self.qubit(groups[2], line)), line))
        else:
            register, bit, name = groups
            if register != self.register or int(bit) >= self.width:
                raise self.fail(line, f"{register}[{bit}] is not a bit of the declared register")
            layer.statements.append(("measure", (self.qubit(name, line), int(bit)), line))


def read_program(text: str, description: Description, source: str = "program") -> IdealCircuit:
    """The layered circuit a program of the subset describes, with the description's detectors."""
    reader = _Reader(source)
    for number, raw in enumerate(text.splitlines(), start=1):
        stripped = raw.split("//", 1)[0].strip()
        if stripped:
            reader.statement(stripped, number)
    if reader.in_box:
        raise DataError(f"{source}: a box is not closed.")
    if len(reader.qubits) != len(description.qubits):
        raise DataError(f"{source}: declares {len(reader.qubits)} qubits; the description lists "
                        f"{len(description.qubits)}.")
    if reader.width != description.measurements:
        raise DataError(f"{source}: declares {reader.width} bits; the description has {description.measurements} "
                        "measurements.")
    built = [_build_layer(reader, raw, info_index, description, source)
             for info_index, raw in enumerate(reader.layers)]
    return _ideal(description, built)


def _build_layer(reader: _Reader, raw: _Layer, index: int, description: Description, source: str) -> Layer:
    if index >= len(description.layers):
        raise DataError(f"{source}: has more layers than the description's {len(description.layers)}.")
    info = description.layers[index]
    what = {s[0] for s in raw.statements}
    kind: LayerKind = ("measure" if "measure" in what else "reset" if "reset" in what
                       else "gate2" if what & {"cz", "cx"} else "gate1")
    if kind != info.kind or raw.duration_ns != info.duration_ns:
        line = raw.statements[0][2] if raw.statements else 0
        raise DataError(f"{source}, line {line}: layer {index} is a {kind} layer of {raw.duration_ns} ns; the "
                        f"description says {info.kind} of {info.duration_ns} ns.")
    ops: list[Op] = []
    if kind in ("gate1", "gate2"):
        for gate, qubits, _ in raw.statements:
            _append(ops, gate.upper(), qubits)
        return Layer(kind, tuple(ops), info.round, info.opens_round)
    rotated = {qubits[0] for gate, qubits, _ in raw.statements if gate == "h"}
    for gate, qubits, line in raw.statements:
        if gate == "h":
            continue
        q = qubits[0]
        if kind == "measure":
            bit = qubits[1]
            if bit != reader.measured or description.bits[bit][0] != q:
                raise DataError(f"{source}, line {line}: measurement {reader.measured} must write bit "
                                f"{reader.measured} and measure the description's qubit of that bit.")
            reader.measured += 1
            _append(ops, "MX" if q in rotated else "M", (q,))
        else:
            _append(ops, "RX" if q in rotated else "R", (q,))
    return Layer(kind, tuple(ops), info.round, info.opens_round)


def _append(ops: list[Op], gate: str, targets: tuple[int, ...]) -> None:
    """Add targets to the last op when it is the same gate (stim fuses them the same way)."""
    if ops and ops[-1].gate == gate:
        ops[-1] = Op(gate, ops[-1].targets + targets)
    else:
        ops.append(Op(gate, targets))


def _ideal(description: Description, layers: list[Layer]) -> IdealCircuit:
    point = description.point
    if len(layers) != len(description.layers):
        raise DataError(f"program has {len(layers)} layers; the description has {len(description.layers)}.")
    roles = {q.index: cast(Role, q.role) for q in description.qubits}
    layout = Layout(point.code, point.distance, {q.index: q.coords for q in description.qubits}, roles, (), (), ())
    ideal = IdealCircuit(layout=layout, basis=point.basis, rounds=point.rounds,
                         gate_set="cz" if description.gate_set == "cz" else "cx", layers=layers,
                         num_measurements=description.measurements)
    ends = []
    count = 0
    for i, layer in enumerate(layers):
        if layer.kind == "measure":
            count += sum(len(op.targets) for op in layer.ops)
        ends.append((count, i))
    for bits, coords in description.detectors:
        after = next(i for count, i in ends if count > max(bits))
        ideal.detectors.append(Detector(bits, coords, after))
    ideal.observable = description.observables[0] if description.observables else ()
    return ideal
