"""Device-derived noise: conversions, device-file validation, and what the circuits carry.

Sources, beside each check:

- Pauli-twirled amplitude and phase damping: Ghosh, Fowler, Geller, PRA 86,
  062318 (2012); Tomita & Svore, PRA 90, 062320 (2014), Eqs. 9-10.
- Average gate infidelity r of a depolarizing channel: F_avg = (D F_pro + 1)/(D + 1)
  (Horodecki, Horodecki, Horodecki, PRA 60, 1888 (1999); Nielsen, Phys. Lett.
  A 303, 249 (2002)), so p = r (D + 1) / D.
- Randomized-benchmarking decay: Magesan et al., PRL 106, 180504 (2011).
- Symmetric readout flip = mean of the two conditional errors; one-line error
  messages naming key path, value and what is allowed: common practice.

The expected noise of a device circuit is rebuilt here from the raw TOML of
the device file (read with tomllib, not through codebench's parser), layer by
layer, following the model stated in codebench/noise/device.py.
"""

from __future__ import annotations

import copy
import json
import math
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import pytest
import stim

from codebench.api import run_sweep
from codebench.build import noisy_circuit
from codebench.engine.local import InProcessExecutor
from codebench.errors import CodebenchError, DeviceFileError
from codebench.layout import Basis
from codebench.noise.calibration import load_device, parse_device
from codebench.noise.device import (
    depolarizing_from_infidelity,
    depolarizing_from_rb_decay,
    twirled_idle,
)
from codebench.records import Point

REPO = Path(__file__).parents[1]
DEVICES = REPO / "configs" / "devices"
CURRENT = DEVICES / "larkspur_current.toml"

# ---------------------------------------------------------------------------
# helpers


def device_point(device_json: str, scale: float = 1.0, code: str = "rotated_surface", distance: int = 3,
                 rounds: int | None = None, basis: Basis = "Z") -> Point:
    """A device-noise point (rounds = d unless given); ``scale`` is the sweep's what-if factor."""
    return Point(code, distance, distance if rounds is None else rounds, basis, "device", scale, "mwpm",
                 (("device", device_json),))


def current_json(**model: Any) -> str:
    """The current-generation example device, optionally with [model] changed."""
    data = tomllib.loads(CURRENT.read_text())
    if model:
        data["model"] = {**data.get("model", {}), **model}
    return parse_device(data, "current").canonical_json()


GATE_KIND = {"R": "reset", "RX": "reset", "H": "gate1", "CZ": "gate2", "CX": "gate2", "M": "measure", "MX": "measure"}
NOISE = {"DEPOLARIZE1", "DEPOLARIZE2", "PAULI_CHANNEL_1", "X_ERROR", "Z_ERROR"}
Entry = tuple[str, tuple[int, ...], tuple[float, ...]]


@dataclass
class LayerView:
    """One TICK-delimited layer: its gates, and noise before / after them, one entry per qubit or pair."""

    gates: list[tuple[str, tuple[int, ...]]] = field(default_factory=list)
    before: list[Entry] = field(default_factory=list)
    after: list[Entry] = field(default_factory=list)

    @property
    def kind(self) -> str:
        kinds = {GATE_KIND[g] for g, _ in self.gates}
        assert len(kinds) == 1, self.gates
        return kinds.pop()

    @property
    def busy(self) -> set[int]:
        return {q for _, ts in self.gates for q in ts}


def layers_of(circuit: stim.Circuit) -> tuple[list[int], list[LayerView]]:
    """Qubits (from QUBIT_COORDS) and layers of a flat decorated circuit."""
    qubits: list[int] = []
    layers = [LayerView()]
    for inst in circuit.flattened():
        name = inst.name
        targets = [t.value for t in inst.targets_copy()]
        if name == "QUBIT_COORDS":
            qubits.extend(targets)
        elif name == "TICK":
            layers.append(LayerView())
        elif name in GATE_KIND:
            layers[-1].gates.append((name, tuple(targets)))
        elif name in NOISE:
            width = 2 if name == "DEPOLARIZE2" else 1
            side = layers[-1].after if layers[-1].gates else layers[-1].before
            args = tuple(inst.gate_args_copy())
            for i in range(0, len(targets), width):
                side.append((name, tuple(targets[i:i + width]), args))
    return qubits, layers


class RawDevice:
    """Numbers of a device file read straight from its TOML."""

    def __init__(self, raw: dict[str, Any]) -> None:
        self.raw = raw
        self.defaults = raw["defaults"]
        self.qubit_tables = {q["id"]: q for q in raw.get("qubits", [])}
        self.durations = raw["durations"]
        self.includes = raw.get("model", {}).get("gate_error_includes_decoherence", True)

    def value(self, device_qubit: str | None, key: str) -> float:
        table = {**self.defaults, **self.qubit_tables.get(device_qubit or "", {})}
        if key == "readout_error" and "readout_error_0to1" in table:
            # Symmetric flip = mean of the conditional errors (common practice).
            return float((table["readout_error_0to1"] + table["readout_error_1to0"]) / 2)
        return float(table[key])

    def pair(self, a: str | None, b: str | None) -> float:
        for entry in self.raw.get("pairs", []):
            if {a, b} == set(entry["qubits"]):
                return float(entry["gate_2q_error"])
        return float(self.defaults["gate_2q_error"])

    def layout(self, code: str, distance: int) -> list[str] | None:
        for entry in self.raw.get("layouts", []):
            if (entry["code"], entry["distance"]) == (code, distance):
                return list(entry["qubits"])
        return None


DURATION_KEY = {"gate1": "gate_1q_ns", "gate2": "gate_2q_ns", "measure": "measure_ns", "reset": "reset_ns"}


def expected_layer(layer: LayerView, qubits: list[int], dev: RawDevice, where: dict[int, str | None],
                   scale: float) -> tuple[list[Entry], list[Entry]]:
    """The noise the device model (codebench/noise/device.py docstring) puts around ``layer``."""
    kind = layer.kind
    t_us = dev.durations[DURATION_KEY[kind]] / 1000.0

    def idle(q: int) -> Entry:
        # Ghosh, Fowler, Geller (2012); Tomita & Svore (2014), Eqs. 9-10; scale s divides T1 and T2.
        t1, t2 = dev.value(where[q], "t1_us") / scale, dev.value(where[q], "t2_us") / scale
        return ("PAULI_CHANNEL_1", (q,), twirled_idle(t_us, t1, t2))

    before: list[Entry] = []
    after: list[Entry] = [idle(q) for q in qubits if q not in layer.busy]
    for gate, targets in layer.gates:
        if kind == "gate1":
            # p = 3 r / 2 for one qubit (Horodecki x3 1999; Nielsen 2002).
            after += [("DEPOLARIZE1", (q,), (min(0.75, 1.5 * dev.value(where[q], "gate_1q_error") * scale),))
                      for q in targets]
        elif kind == "gate2":
            # p = 5 r / 4 for two qubits (same sources).
            after += [("DEPOLARIZE2", (a, b), (min(15 / 16, 1.25 * dev.pair(where[a], where[b]) * scale),))
                      for a, b in zip(targets[::2], targets[1::2])]
        elif kind == "reset":
            flip = "Z_ERROR" if gate.endswith("X") else "X_ERROR"
            after += [(flip, (q,), (min(0.5, dev.value(where[q], "reset_error") * scale),)) for q in targets]
        else:
            flip = "Z_ERROR" if gate.endswith("X") else "X_ERROR"
            before += [(flip, (q,), (min(0.5, dev.value(where[q], "readout_error") * scale),)) for q in targets]
        if kind in ("gate1", "gate2") and not dev.includes:
            after += [idle(q) for q in targets]
    return before, after


def assert_same_entries(got: list[Entry], want: list[Entry], where: str) -> None:
    got_s, want_s = sorted(got), sorted(want)
    assert [(n, t) for n, t, _ in got_s] == [(n, t) for n, t, _ in want_s], where
    for (name, targets, g), (_, _, w) in zip(got_s, want_s):
        assert g == pytest.approx(w, abs=1e-12, rel=1e-9), f"{where}: {name} {targets}"


def check_whole_circuit(circuit: stim.Circuit, raw: dict[str, Any], code: str, distance: int, scale: float) -> None:
    dev = RawDevice(raw)
    qubits, layers = layers_of(circuit)
    mapping = dev.layout(code, distance)
    where: dict[int, str | None] = {q: (mapping[i] if mapping else None) for i, q in enumerate(sorted(qubits))}
    for i, layer in enumerate(layers):
        before, after = expected_layer(layer, qubits, dev, where, scale)
        assert_same_entries(layer.before, before, f"layer {i} before")
        assert_same_entries(layer.after, after, f"layer {i} after")


def entries_on(entries: list[Entry], name: str, targets: tuple[int, ...]) -> list[tuple[float, ...]]:
    return [args for n, t, args in entries if n == name and set(t) == set(targets)]


# ---------------------------------------------------------------------------
# 1. conversions: worked values


@pytest.mark.parametrize(("args", "want"), [
    # Ghosh, Fowler, Geller, PRA 86, 062318 (2012); Tomita & Svore, PRA 90, 062320 (2014), Eqs. 9-10:
    # px = py = (1 - e^(-t/T1))/4, pz = (1 - e^(-t/T2))/2 - (1 - e^(-t/T1))/4. Values worked by hand.
    ((1.0, 100.0, 100.0), (0.002487541563, 0.002487541563, 0.002487541563)),
    ((1.0, 100.0, 200.0), (0.002487541563, 0.002487541563, 6.218840951e-6)),
    ((0.5, 50.0, 30.0), (0.002487541563, 0.002487541563, 0.005776731526)),
])
def test_twirled_idle_worked_values(args: tuple[float, float, float], want: tuple[float, float, float]) -> None:
    got = twirled_idle(*args)
    for g, w in zip(got, want):
        assert abs(g - w) < 1e-12


def test_twirled_idle_limits() -> None:
    # No decay without time or with infinite coherence; T2 = 2 T1 (pure amplitude damping) leaves
    # pz = (1 - e^(-t/2T1))/2 - (1 - e^(-t/T1))/4 = (1 - e^(-t/2T1))^2 / 4 (algebra on Eqs. 9-10).
    assert twirled_idle(0.0, 50.0, 60.0) == (0.0, 0.0, 0.0)
    assert twirled_idle(3.0, math.inf, math.inf) == (0.0, 0.0, 0.0)
    px, py, pz = twirled_idle(2.0, 40.0, 80.0)
    assert px == py and abs(pz - (-math.expm1(-2.0 / 80.0)) ** 2 / 4) < 1e-15
    # Long idles approach the fully mixed state: px = py = 1/4, pz = 1/2 - 1/4 = 1/4.
    assert twirled_idle(1e6, 1.0, 1.0) == pytest.approx((0.25, 0.25, 0.25))


def test_infidelity_to_depolarizing() -> None:
    # p = r (D + 1)/D (Horodecki, Horodecki, Horodecki, PRA 60, 1888 (1999); Nielsen, PLA 303, 249 (2002)).
    assert depolarizing_from_infidelity(0.005, 2) == pytest.approx(0.00625, abs=1e-15)
    assert depolarizing_from_infidelity(1e-3, 1) == pytest.approx(1.5e-3, abs=1e-15)
    for r in (1e-4, 3e-3, 0.02):
        assert depolarizing_from_infidelity(r, 1) == pytest.approx(3 * r / 2, rel=1e-14)
        assert depolarizing_from_infidelity(r, 2) == pytest.approx(5 * r / 4, rel=1e-14)
        for n in (1, 2):
            dim = 2**n
            p = depolarizing_from_infidelity(r, n)
            # Process fidelity of the Pauli channel is 1 - p; F_avg = (D F_pro + 1)/(D + 1) (same sources).
            assert 1 - (dim * (1 - p) + 1) / (dim + 1) == pytest.approx(r, rel=1e-12)


def test_rb_decay_to_depolarizing() -> None:
    # p = (1 - alpha)(D^2 - 1)/D^2 (Magesan et al., PRL 106, 180504 (2011)): 3/4 and 15/16.
    assert depolarizing_from_rb_decay(0.99, 1) == pytest.approx(0.01 * 3 / 4, rel=1e-12)
    assert depolarizing_from_rb_decay(0.99, 2) == pytest.approx(0.01 * 15 / 16, rel=1e-12)
    assert depolarizing_from_rb_decay(1.0, 2) == 0.0
    # RB infidelity r = (1 - alpha)(D - 1)/D (same source) converts to the same p.
    for alpha in (0.999, 0.98):
        for n in (1, 2):
            dim = 2**n
            r = (1 - alpha) * (dim - 1) / dim
            assert depolarizing_from_infidelity(r, n) == pytest.approx(depolarizing_from_rb_decay(alpha, n), rel=1e-12)


def test_readout_flip_is_mean_of_conditional_errors() -> None:
    # Symmetric flip = mean of P(1|0) and P(0|1) (common practice).
    data = copy.deepcopy(BASE)
    data["qubits"][1].update(readout_error_0to1=0.01, readout_error_1to0=0.03)
    device = parse_device(data)
    assert device.qubit("q1").readout_error == pytest.approx(0.02, abs=1e-15)
    assert device.qubit("q0").readout_error == BASE["defaults"]["readout_error"]
    # The example device: a1 has 0.008 and 0.031 (configs/devices/larkspur_current.toml).
    assert load_device(CURRENT).qubit("a1").readout_error == pytest.approx(0.0195, abs=1e-15)


# ---------------------------------------------------------------------------
# 2. validation: every problem is one DeviceFileError line with key path, value and what is allowed

BASE: dict[str, Any] = {
    "name": "line of five",
    "native_2q": "cz",
    "defaults": {"t1_us": 100.0, "t2_us": 90.0, "gate_1q_error": 5e-4, "gate_2q_error": 7e-3,
                 "readout_error": 1.5e-2, "reset_error": 2e-3},
    "durations": {"gate_1q_ns": 25.0, "gate_2q_ns": 40.0, "measure_ns": 600.0, "reset_ns": 200.0},
    "qubits": [{"id": f"q{i}"} for i in range(5)],
    "pairs": [{"qubits": ["q0", "q1"], "gate_2q_error": 6e-3}],
    "coupling": {"edges": [["q0", "q1"], ["q1", "q2"], ["q2", "q3"], ["q3", "q4"]]},
    "layouts": [{"code": "repetition", "distance": 3, "qubits": ["q0", "q1", "q2", "q3", "q4"]}],
    "model": {"gate_error_includes_decoherence": True},
}


def _set(path: str, value: Any) -> Any:
    """A change to BASE: set ``path`` (dots and [i]) to ``value``; value DELETE removes the key."""
    def change(data: dict[str, Any]) -> None:
        *parents, last = path.replace("[", ".").replace("]", "").split(".")
        node: Any = data
        for part in parents:
            node = node[int(part)] if part.isdigit() else node[part]
        if value is DELETE:
            del node[last]
        elif last.isdigit():
            node[int(last)] = value
        else:
            node[last] = value
    return change


DELETE = object()

# (id, changes, fragments the message must contain: key path first)
BAD_DEVICES: list[tuple[str, list[Any], list[str]]] = [
    ("T2 above 2 T1 in defaults", [_set("defaults.t2_us", 250.0)],
     ["defaults.t2_us", "250.0", "at most 2 T1 = 200 us"]),
    ("T2 above 2 T1 per qubit", [_set("qubits[2].t2_us", 210.0)],
     ["qubits[2].t2_us", "210.0", "at most 2 T1 = 200 us"]),
    ("per-qubit T1 below T2/2", [_set("qubits[1].t1_us", 30.0)],
     ["qubits[1].t2_us", "90.0", "at most 2 T1 = 60 us"]),
    ("zero duration", [_set("durations.measure_ns", 0)],
     ["durations.measure_ns", "0", "a positive number (nanoseconds)"]),
    ("negative duration", [_set("durations.gate_2q_ns", -40.0)],
     ["durations.gate_2q_ns", "-40.0", "a positive number (nanoseconds)"]),
    ("zero T1", [_set("qubits[0].t1_us", 0.0)],
     ["qubits[0].t1_us", "0.0", "a positive number (microseconds)"]),
    ("bool T1", [_set("defaults.t1_us", True)],
     ["defaults.t1_us", "True", "a positive number (microseconds)"]),
    ("missing duration", [_set("durations.reset_ns", DELETE)],
     ["durations.reset_ns is required", "nanoseconds"]),
    ("missing durations table", [_set("durations", DELETE)],
     ["durations must be a table", "None"]),
    ("missing default", [_set("defaults.reset_error", DELETE)],
     ["defaults.reset_error is required"]),
    ("readout above 0.5", [_set("defaults.readout_error", 0.6)],
     ["defaults.readout_error", "0.6", "a probability in [0, 0.5]"]),
    ("negative gate error", [_set("qubits[3].gate_1q_error", -1e-3)],
     ["qubits[3].gate_1q_error", "-0.001", "a probability in [0, 0.5]"]),
    ("pair error above 0.5", [_set("pairs[0].gate_2q_error", 0.7)],
     ["pairs[0].gate_2q_error", "0.7", "a probability in [0, 0.5]"]),
    ("conditional mean above 0.5",
     [_set("qubits[1].readout_error_0to1", 0.9), _set("qubits[1].readout_error_1to0", 0.5)],
     ["qubits[1].readout_error (mean of 0to1 and 1to0)", "0.7", "a probability in [0, 0.5]"]),
    ("qubit key typo", [_set("qubits[0].t1_uss", 80.0)],
     ["qubits[0].t1_uss is not a known key", "allowed keys: id, t1_us, t2_us"]),
    ("defaults key typo", [_set("defaults.readout_eror", 0.01)],
     ["defaults.readout_eror is not a known key", "allowed keys: t1_us"]),
    ("top-level typo", [_set("couplings", {"edges": []})],
     ["couplings is not a known key", "allowed keys: name, native_2q, defaults"]),
    ("durations typo", [_set("durations.measure_us", 0.6)],
     ["durations.measure_us is not a known key", "allowed keys: gate_1q_ns"]),
    ("pair names unknown qubit", [_set("pairs[0].qubits", ["q0", "q9"])],
     ["pairs[0].qubits[1]", "'q9'", "the id of a qubit listed under [[qubits]]"]),
    ("pair not an edge", [_set("pairs[0].qubits", ["q0", "q2"])],
     ["pairs[0].qubits", "['q0', 'q2']", "an edge of [coupling]"]),
    ("pair given twice", [_set("pairs[1]", {"qubits": ["q1", "q0"], "gate_2q_error": 5e-3})],
     ["pairs[1].qubits", "['q1', 'q0']", "a pair no earlier [[pairs]] entry gives"]),
    ("pair of one qubit", [_set("pairs[0].qubits", ["q2", "q2"])],
     ["pairs[0].qubits", "['q2', 'q2']", "a list of two different qubit ids"]),
    ("edge names unknown qubit", [_set("coupling.edges[3]", ["q3", "q7"])],
     ["coupling.edges[3][1]", "'q7'", "the id of a qubit listed under [[qubits]]"]),
    ("bad native_2q", [_set("native_2q", "iswap")],
     ["native_2q", "'iswap'", "'cz' or 'cx'"]),
    ("readout_error with conditional errors",
     [_set("qubits[1].readout_error", 0.01), _set("qubits[1].readout_error_0to1", 0.01),
      _set("qubits[1].readout_error_1to0", 0.02)],
     ["qubits[1] gives readout_error and the conditional readout errors", "give one or the other"]),
    ("only one conditional error", [_set("qubits[1].readout_error_1to0", 0.02)],
     ["qubits[1] needs both readout_error_0to1 and readout_error_1to0"]),
    ("duplicate qubit id", [_set("qubits[3].id", "q0")],
     ["qubits[3].id", "'q0'", "an id no earlier qubit uses"]),
    ("missing name", [_set("name", DELETE)],
     ["name", "None", "a non-empty string"]),
    ("layout for unknown code", [_set("layouts[0].code", "repetiton")],
     ["layouts[0].code", "'repetiton'", "one of 'repetition', 'rotated_surface'"]),
    ("layout distance not allowed", [_set("layouts[0].distance", 1)],
     ["layouts[0].distance", "1", "an integer >= 2 for repetition"]),
    ("layout distance not an integer", [_set("layouts[0].distance", "3")],
     ["layouts[0].distance", "'3'", "an integer (a distance of repetition)"]),
    ("layout names unknown qubit", [_set("layouts[0].qubits[4]", "q7")],
     ["layouts[0].qubits[4]", "'q7'", "the id of a qubit listed under [[qubits]]"]),
    ("layout repeats a qubit", [_set("layouts[0].qubits[4]", "q0")],
     ["layouts[0].qubits", "distinct device qubits"]),
    ("layout given twice", [_set("layouts[1]", {"code": "repetition", "distance": 3, "qubits": ["q4"]})],
     ["layouts[1].distance", "3", "a distance no earlier repetition layout uses"]),
    ("model flag not a bool", [_set("model.gate_error_includes_decoherence", "no")],
     ["model.gate_error_includes_decoherence", "'no'", "true or false"]),
]


def _append_aware(changes: list[Any]) -> dict[str, Any]:
    """Apply changes; ``pairs[1]`` / ``layouts[1]`` style paths append a second entry."""
    data = copy.deepcopy(BASE)
    data["pairs"].append(None)
    data["layouts"].append(None)
    for change in changes:
        change(data)
    data["pairs"] = [p for p in data["pairs"] if p is not None]
    data["layouts"] = [lay for lay in data["layouts"] if lay is not None]
    return data


def test_base_device_is_valid() -> None:
    device = parse_device(copy.deepcopy(BASE), "dev.toml")
    assert device.pair_error("q1", "q0") == 6e-3 and device.pair_error("q1", "q2") == 7e-3
    assert device.layout_map("repetition", 3) == ("q0", "q1", "q2", "q3", "q4")


@pytest.mark.parametrize(("changes", "fragments"), [c[1:] for c in BAD_DEVICES], ids=[c[0] for c in BAD_DEVICES])
def test_bad_device_rejected(changes: list[Any], fragments: list[str]) -> None:
    with pytest.raises(DeviceFileError) as info:
        parse_device(_append_aware(changes), "dev.toml")
    message = str(info.value)
    assert "\n" not in message
    assert message.startswith(f"dev.toml: {fragments[0]}")
    for fragment in fragments:
        assert fragment in message


def _toml(data: dict[str, Any]) -> str:
    """Enough TOML for BASE-shaped tables (JSON scalars and arrays are valid TOML values)."""
    lines = [f"{k} = {json.dumps(v)}" for k, v in data.items() if not isinstance(v, (dict, list))]
    for key, value in data.items():
        if isinstance(value, dict):
            lines.append(f"[{key}]")
            lines += [f"{k} = {json.dumps(v)}" for k, v in value.items()]
        elif isinstance(value, list):
            for entry in value:
                lines.append(f"[[{key}]]")
                lines += [f"{k} = {json.dumps(v)}" for k, v in entry.items()]
    return "\n".join(lines) + "\n"


@pytest.mark.parametrize("case", ["qubit key typo", "top-level typo", "T2 above 2 T1 per qubit", "zero duration"])
def test_bad_device_file_rejected(tmp_path: Path, case: str) -> None:
    """Through load_device on a TOML file: the file path leads the message."""
    changes, fragments = next(c[1:] for c in BAD_DEVICES if c[0] == case)
    path = tmp_path / "dev.toml"
    path.write_text(_toml(_append_aware(changes)))
    with pytest.raises(DeviceFileError) as info:
        load_device(path)
    message = str(info.value)
    assert "\n" not in message and message.startswith(f"{path}: {fragments[0]}")


def test_device_file_problems(tmp_path: Path) -> None:
    assert parse_device(tomllib.loads(_toml(copy.deepcopy(BASE)))).name == "line of five"
    missing = tmp_path / "none.toml"
    with pytest.raises(DeviceFileError, match="does not exist"):
        load_device(missing)
    broken = tmp_path / "broken.toml"
    broken.write_text("name = = 1\n")
    with pytest.raises(DeviceFileError) as info:
        load_device(broken)
    assert str(info.value).startswith(f"{broken}: not valid TOML") and "\n" not in str(info.value)
    as_json = tmp_path / "dev.json"
    as_json.write_text(json.dumps(BASE))
    assert load_device(as_json).canonical_json() == parse_device(copy.deepcopy(BASE)).canonical_json()


def _line_device(**changes: Any) -> str:
    data = copy.deepcopy(BASE)
    data.update(changes)
    return parse_device(data, "line").canonical_json()


def test_layout_of_wrong_length_fails_when_the_file_is_read() -> None:
    # Refused by the reader (file name first), before any circuit is built or any output written.
    data = copy.deepcopy(BASE)
    data["layouts"] = [{"code": "repetition", "distance": 3, "qubits": ["q0", "q1", "q2", "q3"]}]
    with pytest.raises(DeviceFileError) as info:
        parse_device(data, "line.toml")
    message = str(info.value)
    assert "\n" not in message
    for fragment in ("line.toml", "layouts[0].qubits", "4 qubits", "5 device qubits", "repetition d=3"):
        assert fragment in message


def test_code_needing_a_missing_edge_fails_at_circuit_build() -> None:
    # Repetition d=3 on a line q0..q4 needs the edges q0-q1, q1-q2, q2-q3, q3-q4 (common practice).
    whole = noisy_circuit(device_point(_line_device(), code="repetition"))
    assert whole.num_detectors > 0
    gappy = _line_device(coupling={"edges": [["q0", "q1"], ["q1", "q2"], ["q3", "q4"], ["q0", "q4"]]})
    with pytest.raises(DeviceFileError) as info:
        noisy_circuit(device_point(gappy, code="repetition"))
    message = str(info.value)
    assert "\n" not in message
    assert "repetition d=3" in message and "q2" in message and "q3" in message and "[coupling]" in message
    # Without a layout the code is placed on the coupling graph: d = 5 needs 9 qubits of the 5 (issue 13:
    # never a silent use of the defaults), and the message names the largest distance that fits.
    with pytest.raises(DeviceFileError) as info:
        noisy_circuit(device_point(gappy, code="repetition", distance=5))
    assert "repetition d=5 does not fit" in str(info.value) and "largest distance that fits is 3" in str(info.value)


def _sweep_file(tmp_path: Path, device: str) -> Path:
    cfg = tmp_path / "sweep.toml"
    cfg.write_text(
        'name = "dev"\nseed = 4\n[stopping]\nshot_budget = 1000\n'
        '[[study]]\ncode = "repetition"\ndistances = [3]\nrounds = "d"\nnoise = "device"\n'
        f'device = "{device}"\ndecoders = ["mwpm"]\n'
    )
    return cfg


def _cli_fails(tmp_path: Path, capsys: pytest.CaptureFixture[str], cfg: Path) -> str:
    cli = pytest.importorskip("codebench.cli")
    out = tmp_path / "out"
    assert cli.main(["sweep", str(cfg), "--out", str(out)]) == 2
    lines = [line for line in capsys.readouterr().err.splitlines() if line.strip()]
    assert len(lines) == 1 and "Traceback" not in lines[0]
    assert not out.exists()
    return lines[0]


def test_cli_broken_device_file(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    data = _append_aware(next(c[1] for c in BAD_DEVICES if c[0] == "T2 above 2 T1 per qubit"))
    (tmp_path / "devices").mkdir()
    (tmp_path / "devices" / "bad.toml").write_text(_toml(data))
    line = _cli_fails(tmp_path, capsys, _sweep_file(tmp_path, "devices/bad.toml"))
    assert "bad.toml" in line and "qubits[2].t2_us" in line and "210.0" in line


def test_cli_missing_device_file(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    line = _cli_fails(tmp_path, capsys, _sweep_file(tmp_path, "devices/nowhere.toml"))
    assert "study[0].device" in line and "devices/nowhere.toml" in line


def test_cli_layout_of_wrong_length(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    data = copy.deepcopy(BASE)
    data["layouts"][0]["qubits"] = ["q0", "q1", "q2"]
    (tmp_path / "short.toml").write_text(_toml(data))
    line = _cli_fails(tmp_path, capsys, _sweep_file(tmp_path, "short.toml"))
    assert "layouts[0].qubits" in line


def test_device_file_relative_to_sweep_file(tmp_path: Path) -> None:
    (tmp_path / "devices").mkdir()
    (tmp_path / "devices" / "line.toml").write_text(_toml(copy.deepcopy(BASE)))
    from codebench.config import load_sweep

    sweep = load_sweep(_sweep_file(tmp_path, "devices/line.toml"))
    assert [pt.p for pt in sweep.points] == [1.0]  # scale defaults to 1
    assert dict(sweep.points[0].noise_options)["device"] == parse_device(copy.deepcopy(BASE)).canonical_json()


# ---------------------------------------------------------------------------
# 3. the circuit carries exactly the probabilities the device file implies

RAW_CURRENT = tomllib.loads(CURRENT.read_text())
# rotated_surface d=3: data qubits 0..8 row by row, then measure qubits 9..16; the file maps code qubit i
# onto its layouts entry i, so a4 = qubit 4 and m2 = qubit 11 (configs/devices/larkspur_current.toml).
A1, A4, A6, M0, M2, M4 = 1, 4, 6, 9, 11, 13


@pytest.fixture(scope="module")
def current_circuit() -> stim.Circuit:
    return noisy_circuit(device_point(current_json()))


def test_whole_circuit_matches_device_file(current_circuit: stim.Circuit) -> None:
    check_whole_circuit(current_circuit, RAW_CURRENT, "rotated_surface", 3, 1.0)


def test_measurement_layer_idle_on_data_qubit(current_circuit: stim.Circuit) -> None:
    # a4: T1 = 64 us, T2 = 41 us, measure_ns = 600 (the device file); twirled idle (Tomita & Svore, Eqs. 9-10).
    want = twirled_idle(600 / 1000, 64.0, 41.0)
    _, layers = layers_of(current_circuit)
    syndrome = [lay for lay in layers if lay.gates and lay.kind == "measure" and A4 not in lay.busy]
    assert len(syndrome) == 3  # one per round (rounds = d = 3)
    for layer in syndrome:
        got = [args for name, t, args in layer.after if t == (A4,)]
        assert len(got) == 1 and entries_on(layer.after, "PAULI_CHANNEL_1", (A4,)) == got
        assert all(abs(g - w) < 1e-12 for g, w in zip(got[0], want))
        assert not [e for e in layer.before if e[1] == (A4,)]


def test_two_qubit_gate_channel_per_pair(current_circuit: stim.Circuit) -> None:
    # (a4, m2) is coupled in the d=3 circuit: m2 at (2, 2) is an X check touching a4 at (3, 3).
    # DEPOLARIZE2 = 5/4 * 1.2e-2 (Horodecki x3 1999; Nielsen 2002; value from the device file).
    _, layers = layers_of(current_circuit)
    cz = [lay for lay in layers if lay.gates and lay.kind == "gate2"]
    on_pair = [args for lay in cz for args in entries_on(lay.after, "DEPOLARIZE2", (A4, M2))]
    assert on_pair and all(args == pytest.approx((5 / 4 * 1.2e-2,), abs=1e-15) for args in on_pair)
    # (a1, m0) has its own 5.5e-3 (m0 at (4, 0) touches a1 and a2); every other pair the default 7e-3.
    special = {frozenset((A4, M2)): 1.2e-2, frozenset((A1, M0)): 5.5e-3}
    seen = set()
    for lay in cz:
        for n, t, args in lay.after:
            if n == "DEPOLARIZE2":
                pair = frozenset(t)
                seen.add(pair)
                assert args == pytest.approx((5 / 4 * special.get(pair, 7e-3),), abs=1e-15)
    assert set(special) <= seen


def test_readout_and_reset_flips(current_circuit: stim.Circuit) -> None:
    _, layers = layers_of(current_circuit)
    measure = [lay for lay in layers if lay.gates and lay.kind == "measure"]
    flips: dict[int, set[float]] = {}
    for lay in measure:
        for name, (q,), args in lay.before:
            assert name == "X_ERROR"  # the CZ gate set measures in Z only
            flips.setdefault(q, set()).add(args[0])
    # Device file: m0 0.021, m4 0.012, a1 conditional 0.008 / 0.031 -> mean 0.0195 (common practice),
    # every other qubit the default 1.5e-2.
    assert flips[M0] == {0.021} and flips[M4] == {0.012}
    assert len(flips[A1]) == 1 and abs(flips[A1].pop() - 0.0195) < 1e-15
    flips[A1] = {0.0195}
    assert set(flips) == set(range(17))
    assert all(flips[q] == {0.015} for q in flips if q not in (M0, M4, A1))
    resets = [lay for lay in layers if lay.gates and lay.kind == "reset"]
    assert resets
    for lay in resets:
        # Reset error 3e-3 for every qubit (no per-qubit reset_error in the file).
        flipped = [(name, args) for name, (q, *_), args in lay.after if q in lay.busy]
        assert len(flipped) == len(lay.busy)
        assert all(name == "X_ERROR" and args == (3e-3,) for name, args in flipped)
        assert not lay.before


def test_single_qubit_gate_channel(current_circuit: stim.Circuit) -> None:
    # DEPOLARIZE1 after H = 3/2 * gate_1q_error (Horodecki x3 1999; Nielsen 2002); a6 has 9e-4.
    _, layers = layers_of(current_circuit)
    seen = set()
    for lay in layers:
        if not lay.gates or lay.kind != "gate1":
            continue
        for q in lay.busy:
            (args,) = entries_on(lay.after, "DEPOLARIZE1", (q,))
            assert args == pytest.approx((1.5 * (9e-4 if q == A6 else 5e-4),), abs=1e-15)
            assert entries_on(lay.after, "PAULI_CHANNEL_1", (q,)) == []  # RB includes decoherence
            seen.add(q)
    assert A6 in seen


def test_scale_half_halves_probabilities_and_doubles_coherence(current_circuit: stim.Circuit) -> None:
    half = noisy_circuit(device_point(current_json(), scale=0.5))
    check_whole_circuit(half, RAW_CURRENT, "rotated_surface", 3, 0.5)
    _, full_layers = layers_of(current_circuit)
    _, half_layers = layers_of(half)
    assert len(full_layers) == len(half_layers)
    for full, part in zip(full_layers, half_layers):
        assert full.gates == part.gates
        for side_full, side_half in ((full.before, part.before), (full.after, part.after)):
            for (n1, t1, a1), (n2, t2, a2) in zip(sorted(side_full), sorted(side_half)):
                assert (n1, t1) == (n2, t2)
                if n1 != "PAULI_CHANNEL_1":
                    assert a2 == pytest.approx(tuple(x / 2 for x in a1), rel=1e-12)
    # An idle of a4 at scale 0.5 is the idle of a qubit with T1 and T2 doubled.
    meas = next(lay for lay in half_layers if lay.gates and lay.kind == "measure" and A4 not in lay.busy)
    (got,) = entries_on(meas.after, "PAULI_CHANNEL_1", (A4,))
    assert got == pytest.approx(twirled_idle(0.6, 128.0, 82.0), abs=1e-12)


def test_gate_error_without_decoherence_adds_idle_on_gate_qubits() -> None:
    raw = copy.deepcopy(RAW_CURRENT)
    raw["model"]["gate_error_includes_decoherence"] = False
    circuit = noisy_circuit(device_point(current_json(gate_error_includes_decoherence=False)))
    check_whole_circuit(circuit, raw, "rotated_surface", 3, 1.0)
    _, layers = layers_of(circuit)
    cz = next(lay for lay in layers if lay.gates and lay.kind == "gate2" and A4 in lay.busy)
    (idle,) = entries_on(cz.after, "PAULI_CHANNEL_1", (A4,))
    assert idle == pytest.approx(twirled_idle(0.040, 64.0, 41.0), abs=1e-12)  # gate_2q_ns = 40
    h = next(lay for lay in layers if lay.gates and lay.kind == "gate1" and A4 in lay.busy)
    (idle,) = entries_on(h.after, "PAULI_CHANNEL_1", (A4,))
    assert idle == pytest.approx(twirled_idle(0.025, 64.0, 41.0), abs=1e-12)  # gate_1q_ns = 25
    # Measurements and resets add no idle on the qubits they act on.
    for lay in layers:
        if lay.gates and lay.kind in ("measure", "reset"):
            assert not [e for e in lay.after if e[0] == "PAULI_CHANNEL_1" and e[1][0] in lay.busy]


def without_chip(path: Path) -> dict[str, Any]:
    """An example device's file without its [coupling] chip and the sites of its qubits."""
    raw = tomllib.loads(path.read_text())
    raw.pop("coupling", None)
    for entry in raw.get("qubits", []):
        entry.pop("site", None)
    return raw


def test_defaults_apply_without_a_layout() -> None:
    # Without its chip the example has no placement, and d=5 no [[layouts]] entry: every qubit gets the defaults.
    raw = without_chip(CURRENT)
    circuit = noisy_circuit(device_point(parse_device(copy.deepcopy(raw)).canonical_json(), distance=5, rounds=2))
    check_whole_circuit(circuit, raw, "rotated_surface", 5, 1.0)
    for name in ("current", "improved", "goal"):  # the other examples' marks need their chips
        raw = without_chip(DEVICES / f"larkspur_{name}.toml")
        json_text = parse_device(copy.deepcopy(raw)).canonical_json()
        for basis in ("Z", "X"):
            check_whole_circuit(noisy_circuit(device_point(json_text, basis=basis, rounds=2)), raw, "rotated_surface", 3,
                                1.0)


def test_placed_patch_carries_its_device_qubits_numbers() -> None:
    # On its chip the example's d=5 sits where the placement puts it, with each qubit's and coupler's own numbers
    # (the placement written as a [[layouts]] entry of the raw file, for the reference).
    from codebench.noise.device import DeviceNoise

    placed = DeviceNoise(1.0, device=current_json()).placement("rotated_surface", 5)
    assert placed is not None and {"a4", "m2"} <= set(placed)
    raw = tomllib.loads(CURRENT.read_text())
    raw["layouts"] = [*raw["layouts"], {"code": "rotated_surface", "distance": 5, "qubits": list(placed)}]
    for basis in ("Z", "X"):
        circuit = noisy_circuit(device_point(current_json(), distance=5, rounds=2, basis=basis))
        check_whole_circuit(circuit, raw, "rotated_surface", 5, 1.0)


def test_cx_native_device_circuit() -> None:
    raw = copy.deepcopy(BASE)
    raw["native_2q"] = "cx"
    raw["qubits"][2].update(t1_us=30.0, t2_us=20.0, readout_error_0to1=0.01, readout_error_1to0=0.05)
    circuit = noisy_circuit(device_point(parse_device(copy.deepcopy(raw)).canonical_json(), code="repetition", basis="X"))
    gates = {inst.name for inst in circuit.flattened()}
    assert "CX" in gates and "CZ" not in gates and "MX" in gates
    check_whole_circuit(circuit, raw, "repetition", 3, 1.0)


# ---------------------------------------------------------------------------
# 4. a noiseless device gives no failures

QUIET: dict[str, Any] = {
    "name": "quiet",
    "defaults": {"t1_us": 1e12, "t2_us": 1e12, "gate_1q_error": 0.0, "gate_2q_error": 0.0,
                 "readout_error": 0.0, "reset_error": 0.0},
    "durations": {"gate_1q_ns": 25.0, "gate_2q_ns": 40.0, "measure_ns": 600.0, "reset_ns": 250.0},
}


def _study(device: Path, **keys: Any) -> dict[str, Any]:
    return {"code": "rotated_surface", "distances": [3], "rounds": "d", "basis": ["Z", "X"], "noise": "device",
            "device": str(device), "decoders": ["mwpm"], **keys}


def test_noiseless_device_never_fails(tmp_path: Path) -> None:
    quiet = tmp_path / "quiet.toml"
    quiet.write_text(_toml(QUIET))
    for basis in ("Z", "X"):
        circuit = noisy_circuit(device_point(load_device(quiet).canonical_json(), basis=basis))
        assert not circuit.compile_detector_sampler(seed=11).sample(50_000).any()
    cfg = {"name": "quiet", "seed": 5, "stopping": {"failure_target": 10, "shot_budget": 20_000},
           "study": [_study(quiet, label="quiet"), _study(CURRENT, scale=[0.0], label="off")]}
    frame = run_sweep(cfg, out=tmp_path / "out", executor=InProcessExecutor(), progress=False)
    assert len(frame) == 4
    assert (frame["shots"] == 20_000).all() and (frame["failures"] == 0).all()
    assert noisy_circuit(device_point(current_json(), scale=0.0)).detector_error_model().num_errors == 0


# ---------------------------------------------------------------------------
# 5. a better device suppresses errors more


def test_halving_errors_lowers_rates_and_raises_lambda(tmp_path: Path) -> None:
    from codebench.analysis.suppression import per_round_with_variance

    cfg = {"name": "half", "seed": 21, "stopping": {"failure_target": 400, "shot_budget": 1_000_000},
           "study": [{**_study(CURRENT, scale=[0.5, 1.0]), "distances": [3, 5], "basis": ["Z"]}]}
    frame = run_sweep(cfg, out=tmp_path / "out", executor=InProcessExecutor(), progress=False)
    eps, var = {}, {}
    assert (frame["failures"] >= 400).all()
    e, v = per_round_with_variance(frame["failures"].to_numpy(), frame["shots"].to_numpy(), frame["rounds"].to_numpy())
    for i, (d, s) in enumerate(zip(frame["distance"], frame["p"])):
        eps[(int(d), float(s))], var[(int(d), float(s))] = float(e[i]), float(v[i])
    # Per-round rates: each comparison at > 4 sigma in log (delta method; common practice).
    for d in (3, 5):
        gap = math.log(eps[(d, 1.0)]) - math.log(eps[(d, 0.5)])
        assert gap > 4 * math.sqrt(var[(d, 1.0)] + var[(d, 0.5)])
    # Lambda = eps_3 / eps_5 rises when every error halves (below threshold, suppression improves).
    log_lambda = {s: math.log(eps[(3, s)] / eps[(5, s)]) for s in (0.5, 1.0)}
    spread = math.sqrt(sum(var.values()))
    assert log_lambda[0.5] - log_lambda[1.0] > 3 * spread
    assert math.exp(log_lambda[0.5]) > 1


# ---------------------------------------------------------------------------
# 6. a device file that reproduces circuit_depolarizing


def depolarizing_twin(p: float, native_2q: str = "cx", t_ns: float = 100.0) -> dict[str, Any]:
    """A device whose every channel equals circuit_depolarizing at ``p``.

    - DEPOLARIZE1(p) on idles: the twirled idle has px = py = (1 - e^(-t/T1))/4 and
      pz = (1 - e^(-t/T2))/2 - px (Tomita & Svore, Eqs. 9-10), so px = py = pz only for
      T2 = T1, and then each is p/3 when 1 - e^(-t/T1) = 4p/3, i.e. T1 = -t / ln(1 - 4p/3);
    - DEPOLARIZE1(p) after one-qubit gates: r1 = 2p/3; DEPOLARIZE2(p): r2 = 4p/5
      (p = r (D + 1)/D, Horodecki x3 1999; Nielsen 2002);
    - flips p after reset and before measurement: reset_error = readout_error = p.
    All four durations are equal, so every layer's idle is the same channel.
    """
    t1 = (t_ns / 1000.0) / -math.log1p(-4 * p / 3)
    return {
        "name": f"depolarizing twin p={p:g}", "native_2q": native_2q,
        "defaults": {"t1_us": t1, "t2_us": t1, "gate_1q_error": 2 * p / 3, "gate_2q_error": 4 * p / 5,
                     "readout_error": p, "reset_error": p},
        "durations": {key: t_ns for key in ("gate_1q_ns", "gate_2q_ns", "measure_ns", "reset_ns")},
    }


@pytest.mark.parametrize("basis", ["Z", "X"])
@pytest.mark.parametrize("code", ["rotated_surface", "repetition"])
def test_twin_has_the_same_error_model(code: str, basis: Basis) -> None:
    p = 3e-3
    twin = noisy_circuit(device_point(parse_device(depolarizing_twin(p)).canonical_json(), code=code, basis=basis))
    reference = noisy_circuit(Point(code, 3, 3, basis, "circuit_depolarizing", p, "mwpm"))
    # The ideal circuits are the same (CX gate set: R/RX, CX, M/MX; no H layers).
    strip = {"DEPOLARIZE1", "DEPOLARIZE2", "PAULI_CHANNEL_1", "X_ERROR", "Z_ERROR"}
    assert [(i.name, i.targets_copy()) for i in twin.flattened() if i.name not in strip] == \
        [(i.name, i.targets_copy()) for i in reference.flattened() if i.name not in strip]
    # PAULI_CHANNEL_1(p/3, p/3, p/3) is DEPOLARIZE1(p): the detector error models agree term by term.
    dem_twin, dem_ref = twin.detector_error_model(), reference.detector_error_model()
    assert dem_twin.num_errors == dem_ref.num_errors > 0
    assert dem_twin.approx_equals(dem_ref, atol=1e-12)


def test_twin_with_cz_differs_structurally() -> None:
    # With native CZ every CX becomes H.CZ.H on the target: extra H layers, each with DEPOLARIZE1 on the
    # H qubits and an idle channel on the others, so the twin can only match circuit_depolarizing with
    # native_2q = "cx" (the CZ circuit has strictly more noise locations).
    p = 3e-3
    twin = noisy_circuit(device_point(parse_device(depolarizing_twin(p, "cz")).canonical_json()))
    reference = noisy_circuit(Point("rotated_surface", 3, 3, "Z", "circuit_depolarizing", p, "mwpm"))
    assert twin.num_ticks > reference.num_ticks
    assert not twin.detector_error_model().approx_equals(reference.detector_error_model(), atol=1e-6)


def _two_proportion_z(k1: int, n1: int, k2: int, n2: int) -> float:
    pooled = (k1 + k2) / (n1 + n2)
    return abs(k1 / n1 - k2 / n2) / math.sqrt(pooled * (1 - pooled) * (1 / n1 + 1 / n2))


def _twin_sweep(tmp_path: Path, distance: int, shots: int) -> tuple[Any, Any]:
    p = 3e-3
    twin = tmp_path / "twin.json"
    twin.write_text(json.dumps(depolarizing_twin(p)))
    base = {"code": "rotated_surface", "distances": [distance], "rounds": "d", "basis": ["Z"], "decoders": ["mwpm"]}
    cfg = {"name": "twin", "seed": 77, "stopping": {"failure_target": 10**9, "shot_budget": shots},
           "study": [{**base, "noise": "circuit_depolarizing", "p": [p], "label": "reference"},
                     {**base, "noise": "device", "device": str(twin), "label": "twin"}]}
    frame = run_sweep(cfg, out=tmp_path / "out", executor=InProcessExecutor(), progress=False)
    ref = frame[frame["study"] == "reference"].iloc[0]
    got = frame[frame["study"] == "twin"].iloc[0]
    return ref, got


def test_twin_samples_the_same_logical_rate(tmp_path: Path) -> None:
    ref, got = _twin_sweep(tmp_path, 3, 50_000)
    assert ref["shots"] == got["shots"] == 50_000 and ref["failures"] > 100
    # Two-proportion z-test at 99.9% (two-sided critical value 3.29; common practice).
    assert _two_proportion_z(int(ref["failures"]), 50_000, int(got["failures"]), 50_000) < 3.29


@pytest.mark.slow
def test_twin_samples_the_same_logical_rate_d5(tmp_path: Path) -> None:
    shots = 2_000_000
    ref, got = _twin_sweep(tmp_path, 5, shots)
    assert ref["failures"] > 5000
    assert _two_proportion_z(int(ref["failures"]), shots, int(got["failures"]), shots) < 3.29


def test_noise_errors_are_codebench_errors() -> None:
    # The command line turns every CodebenchError into exit status 2 (codebench/errors.py).
    assert issubclass(DeviceFileError, CodebenchError)
    with pytest.raises(DeviceFileError, match="needs a device file"):
        from codebench.noise.device import DeviceNoise

        DeviceNoise(1.0)


def test_forecast_with_a_layout_of_wrong_length_writes_nothing(tmp_path: Path,
                                                              capsys: pytest.CaptureFixture[str]) -> None:
    cli = pytest.importorskip("codebench.cli")
    data = copy.deepcopy(BASE)
    data["layouts"][0]["qubits"] = ["q0", "q1", "q2"]
    device = tmp_path / "short.toml"
    device.write_text(_toml(data))
    out = tmp_path / "forecast"
    assert cli.main(["forecast", str(device), "--code", "repetition", "--out", str(out)]) == 2
    lines = [line for line in capsys.readouterr().err.splitlines() if line.strip()]
    assert len(lines) == 1 and "layouts[0].qubits" in lines[0] and "short.toml" in lines[0]
    assert not out.exists()


def test_device_points_name_their_rate_a_scale() -> None:
    # The device model's rate is a what-if factor, not an error probability (its RateMeaning says so).
    from codebench.build import point_label

    label = point_label(device_point(_line_device(), code="repetition"))
    assert "scale=1" in label and "p=" not in label
