"""A point's memory experiment as an OpenQASM 3 program (and its description file).

The program uses only ``stdgates.inc`` gates of the circuit's gate set (``h`` and ``cz``, or ``cx``),
``reset`` and ``measure``. Measurement i of the experiment writes bit i of one register
(``bit[N] rec``); the description file says which bits each detector and observable combines. A
``barrier`` separates consecutive layers; where the noise model has a clock (a device file's
``[durations]``) each layer is a timing box of its duration, ``box[600ns] { ... }``. In the ``cx`` gate
set an X-basis reset is ``reset`` then ``h``, an X-basis measurement ``h`` then ``measure``, both inside
their layer.

Qubits are named by the noise model's ``qubit_names`` hook (a device's ``[[layouts]]`` entry for the
code and distance; a placement chosen by codebench later would answer through the same hook), each
declared as its own ``qubit``; without names, one array ``qubit[n] q``, in the order of the
description's ``qubits``.
"""

from __future__ import annotations

import json
import re
from dataclasses import dataclass

from codebench.build import ideal_circuit, noise_model
from codebench.circuits import Layer
from codebench.noise import NOISE_MODELS
from codebench.qasm.description import Description, describe_circuit
from codebench.records import Point

#: OpenQASM 3 identifiers that a device's qubit names must not take (keywords, our gates and register).
RESERVED = frozenset({
    "rec", "q", "h", "cx", "cz", "x", "y", "z", "s", "t", "reset", "measure", "barrier", "box", "delay", "qubit",
    "bit", "gate", "include", "input", "output", "let", "if", "else", "for", "while", "in", "def", "return",
    "const", "int", "uint", "float", "angle", "bool", "complex", "duration", "stretch", "pi", "U", "gphase",
    "ctrl", "negctrl", "inv", "pow", "end", "break", "continue", "extern", "cal", "defcal", "opaque", "array",
    "OPENQASM", "true", "false", "euler", "tau",
})
_IDENTIFIER = re.compile(r"[A-Za-z_][A-Za-z0-9_]*\Z")

#: The stim gate of each layer operation -> the OpenQASM statement per target (``{q}`` the qubit).
_ONE_QUBIT = {"H": ("h {q};",), "R": ("reset {q};",), "RX": ("reset {q};", "h {q};")}
_MEASURE = {"M": ("{bit} = measure {q};",), "MX": ("h {q};", "{bit} = measure {q};")}


@dataclass(frozen=True)
class Export:
    """An exported experiment: the program text and its description."""

    program: str
    description: Description

    def description_text(self) -> str:
        return json.dumps(self.description.to_json(), indent=1) + "\n"


def usable_names(names: dict[int, str] | None) -> dict[int, str] | None:
    """The hardware names if every one can be an OpenQASM identifier of its own, else ``None``.

    >>> usable_names({0: "a0", 1: "m1"}), usable_names({0: "a-0"}), usable_names({0: "h"})
    ({0: 'a0', 1: 'm1'}, None, None)
    """
    if not names:
        return None
    ok = all(_IDENTIFIER.match(n) and n not in RESERVED for n in names.values())
    return dict(names) if ok and len(set(names.values())) == len(names) else None


def _format_ns(value: float) -> str:
    """A duration literal that reads back exactly.

    >>> _format_ns(600.0), _format_ns(12.5)
    ('600ns', '12.5ns')
    """
    return f"{int(value)}ns" if float(value).is_integer() else f"{float(value)!r}ns"


def export_point(point: Point) -> Export:
    """The OpenQASM 3 program and description of ``point``'s memory experiment."""
    model = noise_model(point)
    ideal = ideal_circuit(point, model)
    hardware = model.qubit_names(ideal)
    names = usable_names(hardware)
    position = {q: i for i, q in enumerate(ideal.qubits)}
    ref = {q: names[q] if names else f"q[{position[q]}]" for q in ideal.qubits}
    durations = [model.layer_duration_ns(layer) for layer in ideal.layers]
    description = describe_circuit(point, ideal, ref, durations)
    header = _header(point, model.display_options(dict(point.noise_options)), hardware, names)
    lines = header + ([f"qubit {ref[q]};" for q in ideal.qubits] if names else [f"qubit[{len(ideal.qubits)}] q;"])
    lines.append(f"bit[{ideal.num_measurements}] {description.bit_register};")
    measured = 0
    for i, (layer, duration) in enumerate(zip(ideal.layers, durations)):
        if i:
            lines.append("barrier;")
        opens = ", opens the round" if layer.opens_round else ""
        lines.append(f"// layer {i}: {layer.kind}, round {layer.round}{opens}")
        body, measured = _layer_statements(layer, ref, description.bit_register, measured)
        if duration is None:
            lines.extend(body)
        else:
            lines.append(f"box[{_format_ns(duration)}] {{")
            lines.extend("  " + line for line in body)
            lines.append("}")
    return Export("\n".join(lines) + "\n", description)


def _header(point: Point, shown: dict[str, str], hardware: dict[int, str] | None,
            names: dict[int, str] | None) -> list[str]:
    model = NOISE_MODELS.get(point.noise)
    rate = model.rate.text(point.p) if model is not None else f"p={point.p:g}"
    lines = ["OPENQASM 3.0;", 'include "stdgates.inc";',
             f"// codebench memory experiment: {point.code} d={point.distance}, {point.rounds} rounds, "
             f"{point.basis} basis",
             f"// noise model: {point.noise} {rate} {json.dumps(shown, sort_keys=True)}",
             "// bit i of rec is measurement i; detectors and observables: see the description file (JSON)"]
    if hardware and not names:
        lines.append("// the device's qubit names are not all OpenQASM identifiers: q[i] is qubit i of the "
                     "description's 'qubits' list, which carries the names")
    return lines


def _layer_statements(layer: Layer, ref: dict[int, str], register: str, measured: int) -> tuple[list[str], int]:
    out: list[str] = []
    for op in layer.ops:
        if layer.kind == "gate2":
            gate = op.gate.lower()
            out.extend(f"{gate} {ref[a]}, {ref[b]};" for a, b in zip(op.targets[::2], op.targets[1::2]))
            continue
        templates = _MEASURE[op.gate] if layer.kind == "measure" else _ONE_QUBIT[op.gate]
        for q in op.targets:
            bit = f"{register}[{measured}]"
            out.extend(t.format(q=ref[q], bit=bit) for t in templates)
            if layer.kind == "measure":
                measured += 1
    return out, measured


def description_of(point: Point) -> Description:
    """The description alone (what lab commands compare measured files with)."""
    return export_point(point).description
