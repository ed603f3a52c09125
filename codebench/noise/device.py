"""Device noise: circuit-level Pauli noise derived from a calibration file.

Per layer (a layer lasts as long as its longest operation):

- a one-qubit gate with average infidelity r gets ``DEPOLARIZE1(3r/2)``, a
  two-qubit gate ``DEPOLARIZE2(5r/4)``: for an n-qubit depolarizing channel
  of total probability p on the non-identity Paulis, the average gate
  fidelity is 1 - p D / (D + 1) with D = 2^n, so p = r (D + 1) / D
  (Horodecki, Horodecki, Horodecki, PRA 60, 1888 (1999); Nielsen, Phys.
  Lett. A 303, 249 (2002));
- every qubit the layer does not act on decoheres for the layer's duration
  through the Pauli-twirled amplitude and phase damping channel
  ``PAULI_CHANNEL_1(px, py, pz)``, px = py = (1 - e^(-t/T1)) / 4,
  pz = (1 - e^(-t/T2)) / 2 - (1 - e^(-t/T1)) / 4 (Ghosh, Fowler, Geller,
  PRA 86, 062318 (2012); Tomita & Svore, PRA 90, 062320 (2014), Eqs. 9-10).
  Measurement layers are long, so data qubits decohere while the measure
  qubits are read out;
- a measurement result flips with the readout error (the mean of the two
  conditional errors where given), a reset leaves the wrong state with the
  reset error;
- ``gate_error_includes_decoherence`` (device file ``[model]``, default
  true): randomized-benchmarking infidelities already contain the
  decoherence during the gate, so gate qubits get only the gate channel.
  Set it false to add the idle channel for the gate's own duration too.

- residual ZZ (off unless a coupler or ``[defaults]`` gives ``zz_khz``): two
  coupled qubits of the patch that both idle through a layer of duration t
  accumulate the conditional phase phi = 2 pi zeta t, zeta the coupler's ZZ
  rate (the shift omega_11 - omega_10 - omega_01 + omega_00 = 2 pi zeta).
  diag(1, 1, 1, e^{i phi}) equals, up to a global phase,
  exp(-i phi Z1/4) exp(-i phi Z2/4) exp(i phi Z1 Z2/4); the single-qubit
  parts are deterministic and taken as calibrated away (tracked as frame
  changes), and the Pauli twirl of exp(i phi ZZ/4) = cos(phi/4) I + i sin(phi/4) ZZ
  is a ZZ error with probability sin^2(phi/4) (common practice for coherent
  errors, e.g. Wallman & Emerson, PRA 94, 052325 (2016); worked value in
  tests/test_placement_noise.py). Qubits outside the patch are not modelled.

The sweep's ``scale`` s multiplies every error probability and every 1/T1 and
1/T2 (s = 0.5: a device twice as good everywhere; s = 0: noiseless).
Per-qubit and per-pair values apply where the code's qubits sit on device
qubits: a hand-written ``[[layouts]]`` entry, or, on a device with a coupling
graph, the automatic placement (:mod:`codebench.noise.placement`; the device's
``placement``: best, worst, median or an explicit list). A device without a
coupling graph and without a layout uses its defaults, as before placements
existed. A gate layer lasts as long as its slowest coupler (``gate_2q_ns`` per
coupler where given).
"""

from __future__ import annotations

import copy
import math
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any, ClassVar

import stim

from codebench.circuits import GateSet, IdealCircuit, Layer, NoiseOp
from codebench.codes import CODE_FAMILIES
from codebench.errors import DeviceFileError
from codebench.noise.base import NoiseModel, RateMeaning, flip_for, idle_qubits
from codebench.noise.calibration import (
    Device,
    QubitCalibration,
    device_from_json,
    load_device,
    parse_device,
)
from codebench.noise.placement import (
    PROXY_ROUNDS,
    Placement,
    Ranked,
    embeddings,
    interaction_graph,
    pick,
    rank,
    unplaced_problem,
)
from codebench.options import OptionSpec

#: Ranked placements per (device content, code, distance), shared by every model of one process.
_RANKED: dict[tuple[str, str, int, str], list[Ranked]] = {}
#: How many placements were found for the same keys (more than ranked when above MAX_RANKED).
_FOUND: dict[tuple[str, str, int, str], int] = {}

#: Largest valid total probability of stim's DEPOLARIZE1 / DEPOLARIZE2 and of a flip.
MAX_DEPOLARIZE1, MAX_DEPOLARIZE2, MAX_FLIP = 0.75, 15 / 16, 0.5

_DURATION_OF = {"gate1": "gate_1q_ns", "gate2": "gate_2q_ns", "measure": "measure_ns", "reset": "reset_ns"}


def depolarizing_from_infidelity(r: float, qubits: int) -> float:
    """Depolarizing probability p (stim convention) with average gate infidelity ``r``.

    >>> depolarizing_from_infidelity(0.005, 2)
    0.00625
    """
    dim = float(2**qubits)
    return r * (dim + 1) / dim


def depolarizing_from_rb_decay(alpha: float, qubits: int) -> float:
    """Depolarizing probability from a randomized-benchmarking decay parameter ``alpha``.

    p = (1 - alpha)(D^2 - 1) / D^2 (Magesan et al., PRL 106, 180504 (2011)).
    """
    dim2 = float(4**qubits)
    return (1 - alpha) * (dim2 - 1) / dim2


def twirled_idle(t_us: float, t1_us: float, t2_us: float) -> tuple[float, float, float]:
    """(px, py, pz) of the Pauli-twirled amplitude and phase damping channel for an idle of ``t_us``.

    Infinite T1/T2 (``math.inf``) means no decay.

    >>> [round(x, 12) for x in twirled_idle(1.0, 100.0, 100.0)]
    [0.002487541563, 0.002487541563, 0.002487541563]
    """
    decay1 = -math.expm1(-t_us / t1_us) if t1_us != math.inf else 0.0
    decay2 = -math.expm1(-t_us / t2_us) if t2_us != math.inf else 0.0
    px = decay1 / 4
    pz = decay2 / 2 - decay1 / 4
    return px, px, max(0.0, pz)


def zz_error(zz_khz: float, t_ns: float) -> float:
    """Probability of the twirled ZZ error after idling ``t_ns`` on a coupler with ZZ rate ``zz_khz``.

    sin^2(phi / 4) with phi = 2 pi zeta t (see the module docstring).

    >>> round(zz_error(100.0, 1000.0), 6)   # 100 kHz for 1 us: phi = 0.2 pi
    0.024472
    """
    phi = 2 * math.pi * zz_khz * 1e3 * t_ns * 1e-9
    return math.sin(phi / 4) ** 2


class DeviceNoise(NoiseModel):
    """Noise derived from a device calibration file, scaled by ``p`` (the what-if factor)."""

    name = "device"
    p_max: ClassVar[float] = 100.0
    rate = RateMeaning("scale", "device scale factor (multiplies every error rate)", "scale", default=(1.0,))
    option_specs: ClassVar[dict[str, OptionSpec]] = {
        "device": OptionSpec("text", "", "the calibration as canonical JSON, read from the study's device file"),
    }
    source_key = "device"
    has_round_duration = True

    def __init__(self, p: float, **options: str) -> None:
        if not options.get("device"):
            raise DeviceFileError("device noise needs a device file (the study's `device` key).")
        super().__init__(p, **options)
        self.device_json = options["device"]
        self.device: Device = device_from_json(self.device_json)
        self._map: dict[int, str | None] = {}
        self._zz_pairs: list[tuple[int, int, float]] = []

    source_overrides: ClassVar[tuple[str, ...]] = ("placement",)

    @classmethod
    def options_from_source(cls, path: Path, **overrides: Any) -> dict[str, str]:
        """The device file at ``path``, checked and in canonical form (its content defines the point).

        A study's ``placement`` replaces the file's (best / worst / median or a list of device qubits).
        """
        device = load_device(path)
        if "placement" in overrides:
            data = dict(device.data, placement=overrides["placement"])
            device = parse_device(data, f"{path} with the study's placement")
        return {"device": device.canonical_json()}

    @classmethod
    def display_options(cls, options: Mapping[str, str]) -> dict[str, str]:
        """The device by name and content digest, ``"name [digest]"``, not its whole calibration.

        The digest is that of the device file (:meth:`Device.file_digest`): the points of one placed device
        at several distances show one device, so they form one family (each keeps its own key)."""
        shown = dict(options)
        if "device" in shown:
            device = device_from_json(shown["device"])
            shown["device"] = f"{device.name} [{device.file_digest()}]"
        return shown

    def circuit_gate_set(self) -> GateSet:
        return "cz" if self.device.native_2q == "cz" else "cx"

    # per-qubit numbers under the scale ------------------------------------

    def _scaled_times(self, cal: QubitCalibration) -> tuple[float, float]:
        if self.p == 0:
            return math.inf, math.inf
        return cal.t1_us / self.p, cal.t2_us / self.p

    def _scaled(self, probability: float, cap: float) -> float:
        return min(cap, probability * self.p)

    def idle_channel(self, cal: QubitCalibration, duration_ns: float) -> tuple[float, float, float]:
        t1, t2 = self._scaled_times(cal)
        return twirled_idle(duration_ns / 1000.0, t1, t2)

    def _device_qubits(self, ideal: IdealCircuit) -> dict[int, str | None]:
        layout = ideal.layout
        mapping = self.placement(layout.family, layout.distance)
        if mapping is None:
            return {q: None for q in ideal.qubits}
        return self.checked_map(ideal, mapping)

    def checked_map(self, ideal: IdealCircuit, placement: Sequence[str]) -> dict[int, str | None]:
        """Code qubit -> device qubit of ``placement``, refused in one line unless it has one device qubit per
        code qubit, uses no unusable qubit, and puts every two-qubit gate on a usable coupler."""
        layout = ideal.layout
        if len(placement) != len(ideal.qubits):  # an explicit placement (the reader checked [[layouts]])
            raise DeviceFileError(
                f"device {self.device.name!r}: placement must list {len(ideal.qubits)} device "
                f"qubits (one per qubit of {layout.family} d={layout.distance}); got {len(placement)}."
            )
        mapping: dict[int, str | None] = {q: placement[i] for i, q in enumerate(ideal.qubits)}
        self._map = mapping
        self._check_coupling(ideal)
        return mapping

    def placement(self, code: str, distance: int) -> tuple[str, ...] | None:
        """The device qubit of each code qubit (``None``: no map, the defaults apply).

        A ``[[layouts]]`` entry wins; else, on a device with a coupling graph, the placement the
        device's ``placement`` names (an explicit list, or best / worst / median by the proxy).
        Raises :class:`DeviceFileError` when the patch does not fit.
        """
        mapping = self.device.layout_map(code, distance)
        if mapping is not None or not self.device.geometry.has_graph:
            return mapping
        choice = self.device.placement
        if not isinstance(choice, str):
            return choice
        return pick(self.ranked_placements(code, distance), choice).qubits

    @classmethod
    def options_for(cls, options: tuple[tuple[str, str], ...], code: str,
                    distance: int) -> tuple[tuple[str, str], ...]:
        """The device with the placement of ``code`` at ``distance`` written in as a ``[[layouts]]`` entry.

        Placing is done once, where the points are made; the points carry the device qubits they use in
        their key, and workers read the layout instead of ranking the placements again. A device without
        a coupling graph, or with a hand-written layout for the code and distance, is left as it is.
        """
        given = dict(options)
        if "device" not in given:
            return options
        device = device_from_json(given["device"])
        if not device.geometry.has_graph or device.layout_map(code, distance) is not None:
            return options
        qubits = cls(1.0, device=given["device"]).placement(code, distance)
        assert qubits is not None
        data = copy.deepcopy(device.data)
        chosen = device.placement if isinstance(device.placement, str) else "placement"
        data["layouts"] = list(data.get("layouts", [])) + [
            {"code": code, "distance": distance, "qubits": list(qubits), "chosen_by": chosen}]
        given["device"] = parse_device(data, "<placed device>").canonical_json()
        return tuple(sorted(given.items()))

    def qubit_note(self, code: str, distance: int) -> str | None:
        """``"<code> d=<d> on device qubits a, b, ... (best placement)"``, or ``None`` without a map."""
        qubits = self.placement(code, distance)
        if qubits is None or len(qubits) != CODE_FAMILIES[code].qubit_count(distance):
            return None  # no map, or a placement list of the wrong length (the circuit build says so)
        how = "[[layouts]]"
        for entry in self.device.data.get("layouts", []):
            if (entry.get("code"), entry.get("distance")) == (code, distance) and "chosen_by" in entry:
                how = f"{entry['chosen_by']} placement by the proxy" if entry["chosen_by"] != "placement" \
                    else "the device's placement list"
        if self.device.layout_map(code, distance) is None:
            how = (f"{self.device.placement} of {self.placements_found(code, distance)} placements by the proxy"
                   if isinstance(self.device.placement, str) else "the device's placement list")
        return f"{code} d={distance} on device qubits {', '.join(qubits)} ({how})"

    def ranked_placements(self, code: str, distance: int) -> list[Ranked]:
        """Every placement of the code on the device's usable qubits, best first (at the device's own numbers)."""
        dev = self.device
        choice = dev.placement if isinstance(dev.placement, str) else "best"
        key = (dev.canonical_json(), code, distance, choice)
        if key not in _RANKED:
            family = CODE_FAMILIES[code]
            gate_set = self.circuit_gate_set()
            qubits, pairs = interaction_graph(family, distance, gate_set)
            found = embeddings(dev.geometry, qubits, pairs)
            if not found:
                raise DeviceFileError(f"device {dev.name!r}: "
                                      + unplaced_problem(dev.geometry, family, distance, gate_set))
            own = DeviceNoise(1.0, device=self.device_json)
            ideals = [family.ideal_circuit(distance, min(distance, PROXY_ROUNDS), b, gate_set) for b in family.bases]

            def circuits(candidate: Placement) -> list[stim.Circuit]:
                return [own.decorate_on(ideal, candidate) for ideal in ideals]

            def cheap(candidate: Placement) -> float:
                cals = [dev.qubit(q) for q in candidate]
                return (sum(c.readout_error + c.gate_1q_error + c.reset_error + 1 / c.t1_us + 1 / c.t2_us
                            for c in cals)
                        + sum(dev.pair_error(candidate[qubits.index(a)], candidate[qubits.index(b)])
                              for a, b in pairs))

            _RANKED[key] = rank(found, circuits, cheap, choice)
            _FOUND[key] = len(found)
        return _RANKED[key]

    def placements_found(self, code: str, distance: int) -> int:
        """How many placements exist (up to the enumeration's limit); the ranked ones may be fewer."""
        self.ranked_placements(code, distance)
        dev = self.device
        return _FOUND[(dev.canonical_json(), code, distance, dev.placement if isinstance(dev.placement, str)
                       else "best")]

    def decorate(self, ideal: IdealCircuit) -> stim.Circuit:
        self._use_map(ideal, self._device_qubits(ideal))
        self._check_coupling(ideal)
        return super().decorate(ideal)

    def decorate_on(self, ideal: IdealCircuit, placement: Placement) -> stim.Circuit:
        """The noisy circuit with the code's qubits on ``placement`` (device qubit per code qubit)."""
        self._use_map(ideal, {q: placement[i] for i, q in enumerate(ideal.qubits)})
        return super().decorate(ideal)

    def _use_map(self, ideal: IdealCircuit, mapping: dict[int, str | None]) -> None:
        self._map = mapping
        geometry = self.device.geometry
        self._zz_pairs = []
        if not geometry.has_graph or all(v is None for v in mapping.values()):
            return
        code_of = {dev: q for q, dev in mapping.items() if dev is not None}
        for edge in sorted(geometry.edges, key=sorted):
            a, b = sorted(edge)
            if a in code_of and b in code_of and geometry.zz_of(edge) > 0:
                self._zz_pairs.append((code_of[a], code_of[b], geometry.zz_of(edge)))

    def _check_coupling(self, ideal: IdealCircuit) -> None:
        edges = self.device.edges
        if edges is None or all(v is None for v in self._map.values()):
            return
        geometry = self.device.geometry
        for q, dev in self._map.items():
            if dev in geometry.dead_qubits:
                raise DeviceFileError(f"device {self.device.name!r}: {ideal.layout.family} d={ideal.layout.distance} "
                                      f"would use qubit {dev}, which is marked usable = false.")
        for layer in ideal.layers:
            if layer.kind != "gate2":
                continue
            for op in layer.ops:
                for a, b in zip(op.targets[::2], op.targets[1::2]):
                    pair = frozenset((str(self._map[a]), str(self._map[b])))
                    if pair not in edges or pair in geometry.dead_pairs:
                        lacks = "which [coupling] lacks" if pair not in edges else "a coupler marked usable = false"
                        raise DeviceFileError(
                            f"device {self.device.name!r}: {ideal.layout.family} d={ideal.layout.distance} needs "
                            f"a two-qubit gate between {self._map[a]} and {self._map[b]}, {lacks}."
                        )

    def layer_duration_ns(self, layer: Layer) -> float:
        """The layer's duration: its kind's, or for two-qubit gates that of its slowest coupler."""
        if layer.kind == "gate2" and self.device.geometry.pair_ns and self._map:
            return max(self.device.coupler_ns(self._map[a], self._map[b])
                       for op in layer.ops for a, b in zip(op.targets[::2], op.targets[1::2]))
        return self.device.durations_ns[_DURATION_OF[layer.kind]]

    def qubit_names(self, ideal: IdealCircuit) -> dict[int, str] | None:
        """Device qubit of each code qubit, from the file's ``[[layouts]]`` entry (``None`` without one)."""
        mapping = self._device_qubits(ideal)  # checked against the chip, as for the circuit
        if any(name is None for name in mapping.values()):
            return None
        return {q: str(name) for q, name in mapping.items()}

    def layer_noise(self, layer: Layer, ideal: IdealCircuit) -> tuple[list[NoiseOp], list[NoiseOp]]:
        dev = self.device
        duration = self.layer_duration_ns(layer)
        before: list[NoiseOp] = []
        after: list[NoiseOp] = []
        for q in idle_qubits(layer, ideal):
            after.append(("PAULI_CHANNEL_1", [q], self.idle_channel(dev.qubit(self._map[q]), duration)))
        busy = layer.qubits
        for a, b, zz in self._zz_pairs:
            if a not in busy and b not in busy:
                pzz = self._scaled(zz_error(zz, duration), MAX_FLIP)
                after.append(("PAULI_CHANNEL_2", [a, b], [0.0] * 14 + [pzz]))
        for op in layer.ops:
            if layer.kind == "gate1":
                for q in op.targets:
                    cal = dev.qubit(self._map[q])
                    p1 = self._scaled(depolarizing_from_infidelity(cal.gate_1q_error, 1), MAX_DEPOLARIZE1)
                    after.append(("DEPOLARIZE1", [q], [p1]))
            elif layer.kind == "gate2":
                for a, b in zip(op.targets[::2], op.targets[1::2]):
                    r2 = dev.pair_error(self._map[a], self._map[b])
                    after.append(("DEPOLARIZE2", [a, b], [self._scaled(depolarizing_from_infidelity(r2, 2),
                                                                        MAX_DEPOLARIZE2)]))
            elif layer.kind == "reset":
                for q in op.targets:
                    flip = self._scaled(dev.qubit(self._map[q]).reset_error, MAX_FLIP)
                    after.append((flip_for(op.gate), [q], [flip]))
            else:
                for q in op.targets:
                    flip = self._scaled(dev.qubit(self._map[q]).readout_error, MAX_FLIP)
                    before.append((flip_for(op.gate), [q], [flip]))
            if layer.kind in ("gate1", "gate2") and not dev.gate_error_includes_decoherence:
                for q in op.targets:
                    after.append(("PAULI_CHANNEL_1", [q], self.idle_channel(dev.qubit(self._map[q]), duration)))
        return before, after

    def round_duration_ns(self, ideal: IdealCircuit) -> float:
        """Duration of one syndrome round (round 1 when there is one: round 0 also prepares data)."""
        which = 1 if ideal.rounds > 1 else 0
        self._use_map(ideal, self._device_qubits(ideal))
        return sum(self.layer_duration_ns(layer) for layer in ideal.layers if layer.round == which)
