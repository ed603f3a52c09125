"""The description file: what each measurement bit, detector and observable of an exported experiment is.

A JSON object (``format`` = :data:`FORMAT`, ``version`` = 1) with

- ``point``: the point's canonical parameters (code, distance, rounds, basis, noise and its options,
  decoder), so the model the experiment was built from can be rebuilt;
- ``gate_set``, ``measurements`` (bits per shot), ``bit_register`` (its name in the program);
- ``qubits``: per qubit its index in the program, its name, role (data / measure / flag) and (x, y);
- ``layers``: per layer its kind (reset, gate1, gate2, measure), round, whether it opens the round
  and its duration in ns (``null`` when the model has no clock);
- ``bits``: per measurement bit, the qubit measured and its round;
- ``detectors``: per detector the bits whose parity it is and its coordinates (x, y, t[, flag mark]);
- ``observables``: per logical observable the bits whose parity it is.

A detection event of a shot is the XOR of its detector's bits (no reference value is needed: without
noise every detector and observable of a codebench experiment is 0). Anything that does not fit raises
:class:`~codebench.errors.DataError` with one line naming the file and the key.
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from codebench.circuits import IdealCircuit
from codebench.codes import CODE_FAMILIES
from codebench.decoders import DECODERS
from codebench.errors import DataError, not_allowed
from codebench.noise import NOISE_MODELS
from codebench.records import Point

FORMAT = "codebench experiment description"
VERSION = 1
KINDS = ("reset", "gate1", "gate2", "measure")


@dataclass(frozen=True)
class QubitInfo:
    index: int
    name: str
    role: str
    coords: tuple[float, float]


@dataclass(frozen=True)
class LayerInfo:
    kind: str
    round: int
    opens_round: bool
    duration_ns: float | None


@dataclass(frozen=True)
class Description:
    """The content of a description file, checked."""

    point: Point
    gate_set: str
    qubits: tuple[QubitInfo, ...]
    layers: tuple[LayerInfo, ...]
    bits: tuple[tuple[int, int], ...]
    detectors: tuple[tuple[tuple[int, ...], tuple[float, ...]], ...]
    observables: tuple[tuple[int, ...], ...]
    bit_register: str = "rec"

    @property
    def measurements(self) -> int:
        return len(self.bits)

    def qubit_name(self, index: int) -> str:
        return next(q.name for q in self.qubits if q.index == index)

    def detector_qubit(self, detector: int) -> str:
        """The qubit a detector sits on: the one at its (x, y), else the qubit of its first bit."""
        _, coords = self.detectors[detector]
        for q in self.qubits:
            if q.coords == tuple(coords[:2]):
                return q.name
        return self.qubit_name(self.bits[self.detectors[detector][0][0]][0])

    def detector_round(self, detector: int) -> int:
        return int(self.detectors[detector][1][2])

    def to_json(self) -> dict[str, Any]:
        return {
            "format": FORMAT, "version": VERSION, "point": self.point.params(), "gate_set": self.gate_set,
            "measurements": self.measurements, "bit_register": self.bit_register,
            "qubits": [{"index": q.index, "name": q.name, "role": q.role, "coords": list(q.coords)}
                       for q in self.qubits],
            "layers": [{"kind": layer.kind, "round": layer.round, "opens_round": layer.opens_round,
                        "duration_ns": layer.duration_ns} for layer in self.layers],
            "bits": [{"qubit": q, "round": r} for q, r in self.bits],
            "detectors": [{"bits": list(bits), "coords": list(coords)} for bits, coords in self.detectors],
            "observables": [{"bits": list(bits)} for bits in self.observables],
        }

    def same_experiment(self, other: Description) -> bool:
        """Whether two descriptions describe the same measurements, detectors and observables."""
        return (self.bits, self.detectors, self.observables) == (other.bits, other.detectors, other.observables)


def describe_circuit(point: Point, ideal: IdealCircuit, names: dict[int, str] | None,
                     durations: list[float | None]) -> Description:
    """The description of ``ideal`` (the circuit of ``point``), its qubits named by ``names`` or q[i]."""
    layout = ideal.layout
    position = {q: i for i, q in enumerate(ideal.qubits)}
    qubits = tuple(QubitInfo(position[q], names[q] if names else f"q[{position[q]}]", layout.roles[q],
                             (float(layout.coords[q][0]), float(layout.coords[q][1]))) for q in ideal.qubits)
    layers = tuple(LayerInfo(layer.kind, layer.round, layer.opens_round, duration)
                   for layer, duration in zip(ideal.layers, durations))
    bits = tuple((position[q], layer.round) for layer in ideal.layers if layer.kind == "measure"
                 for op in layer.ops for q in op.targets)
    detectors = tuple((tuple(det.records), tuple(float(c) for c in det.coords)) for det in ideal.detectors)
    return Description(point, ideal.gate_set, qubits, layers, bits, detectors, (tuple(ideal.observable),))


def load_description(path: str | Path) -> Description:
    """Read and check a description file."""
    source = str(path)
    try:
        data = json.loads(Path(path).read_text())
    except FileNotFoundError:
        raise DataError(f"no description file at '{source}'.") from None
    except (OSError, UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise DataError(f"{source}: not a readable JSON description file ({exc}).") from None
    return description_from_json(data, source)


def _get(data: Any, key: str, kind: type, where: str, allowed: str) -> Any:
    if not isinstance(data, dict) or key not in data:
        raise DataError(f"{where}: the key '{key}' is missing (expected {allowed}).")
    value = data[key]
    if not isinstance(value, kind) or (isinstance(value, bool) and kind is not bool):
        raise DataError(f"{where}: " + not_allowed(key, value, allowed))
    return value


def _bit_list(value: Any, key: str, source: str, measurements: int) -> tuple[int, ...]:
    if not isinstance(value, list) or not all(isinstance(b, int) and not isinstance(b, bool)
                                              and 0 <= b < measurements for b in value):
        raise DataError(f"{source}: " + not_allowed(key, value, f"a list of bit indices in [0, {measurements - 1}]"))
    return tuple(value)


def description_from_json(data: Any, source: str) -> Description:
    """A checked :class:`Description` from parsed JSON; every problem is one line naming ``source``."""
    if not isinstance(data, dict) or data.get("format") != FORMAT:
        raise DataError(f"{source}: not a codebench experiment description (the key 'format' must be {FORMAT!r}).")
    if data.get("version") != VERSION:
        raise DataError(f"{source}: " + not_allowed("version", data.get("version"), f"{VERSION}"))
    params = _get(data, "point", dict, source, "the point's parameters")
    try:
        point = Point.from_params(params)
    except (KeyError, TypeError, ValueError) as exc:
        raise DataError(f"{source}: point lacks or mangles {exc}.") from None
    for key, known in (("code", CODE_FAMILIES), ("noise", NOISE_MODELS), ("decoder", DECODERS)):
        name = str(params[key])
        if name not in known and not (key == "decoder" and ":" in name):  # a plug-in decoder is module:Class
            raise DataError(f"{source}: " + not_allowed(f"point.{key}", name, " | ".join(sorted(known))))
    gate_set = _get(data, "gate_set", str, source, "cz or cx")
    if gate_set not in ("cz", "cx"):
        raise DataError(f"{source}: " + not_allowed("gate_set", gate_set, "cz or cx"))
    measurements = _get(data, "measurements", int, source, "a positive integer")
    qubits = []
    for i, q in enumerate(_get(data, "qubits", list, source, "a list of qubits")):
        where = f"{source}: qubits[{i}]"
        coords = _get(q, "coords", list, where, "[x, y]")
        qubits.append(QubitInfo(_get(q, "index", int, where, "an integer"), _get(q, "name", str, where, "a name"),
                                _get(q, "role", str, where, "data, measure or flag"),
                                (float(coords[0]), float(coords[1]))))
    layers = []
    for i, layer in enumerate(_get(data, "layers", list, source, "a list of layers")):
        where = f"{source}: layers[{i}]"
        kind = _get(layer, "kind", str, where, "|".join(KINDS))
        if kind not in KINDS:
            raise DataError(f"{where}: " + not_allowed("kind", kind, " | ".join(KINDS)))
        duration = layer.get("duration_ns")
        layers.append(LayerInfo(kind, _get(layer, "round", int, where, "an integer"),
                                bool(_get(layer, "opens_round", bool, where, "true or false")),
                                None if duration is None else float(duration)))
    n_qubits = len(qubits)
    bits = []
    for i, bit in enumerate(_get(data, "bits", list, source, "a list of measurement bits")):
        where = f"{source}: bits[{i}]"
        qubit = _get(bit, "qubit", int, where, f"a qubit index in [0, {n_qubits - 1}]")
        bits.append((qubit, _get(bit, "round", int, where, "an integer")))
    if len(bits) != measurements:
        raise DataError(f"{source}: bits lists {len(bits)} measurements but 'measurements' says {measurements}.")
    detectors = []
    for i, det in enumerate(_get(data, "detectors", list, source, "a list of detectors")):
        where = f"{source}: detectors[{i}]"
        coords = _get(det, "coords", list, where, "coordinates [x, y, t]")
        detectors.append((_bit_list(det.get("bits"), f"detectors[{i}].bits", source, measurements),
                          tuple(float(c) for c in coords)))
    observables = tuple(_bit_list(obs.get("bits") if isinstance(obs, dict) else None, f"observables[{i}].bits",
                                  source, measurements)
                        for i, obs in enumerate(_get(data, "observables", list, source, "a list of observables")))
    register = _get(data, "bit_register", str, source, "an identifier")
    return Description(point, gate_set, tuple(qubits), tuple(layers), tuple(bits), tuple(detectors), observables,
                       register)
