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

The sweep's ``scale`` s multiplies every error probability and every 1/T1 and
1/T2 (s = 0.5: a device twice as good everywhere; s = 0: noiseless).
Per-qubit and per-pair values apply where the device file maps the code's
qubits onto device qubits (``[[layouts]]``); defaults otherwise.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from pathlib import Path
from typing import ClassVar

import stim

from codebench.circuits import GateSet, IdealCircuit, Layer, NoiseOp
from codebench.errors import DeviceFileError
from codebench.noise.base import NoiseModel, RateMeaning, flip_for, idle_qubits
from codebench.noise.calibration import (
    Device,
    QubitCalibration,
    device_from_json,
    load_device,
)
from codebench.options import OptionSpec

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

    @classmethod
    def options_from_source(cls, path: Path) -> dict[str, str]:
        """The device file at ``path``, checked and in canonical form (its content defines the point)."""
        return {"device": load_device(path).canonical_json()}

    @classmethod
    def display_options(cls, options: Mapping[str, str]) -> dict[str, str]:
        """The device by name and content digest, ``"name [digest]"``, not its whole calibration."""
        shown = dict(options)
        if "device" in shown:
            device = device_from_json(shown["device"])
            shown["device"] = f"{device.name} [{device.digest()}]"
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
        mapping = self.device.layout_map(layout.family, layout.distance)
        if mapping is None:
            return {q: None for q in ideal.qubits}
        if len(mapping) != len(ideal.qubits):
            entries = self.device.data.get("layouts", [])
            index = next(i for i, e in enumerate(entries)
                         if (e.get("code"), e.get("distance")) == (layout.family, layout.distance))
            raise DeviceFileError(
                f"device {self.device.name!r}: layouts[{index}].qubits must list {len(ideal.qubits)} device "
                f"qubits (one per qubit of {layout.family} d={layout.distance}); got {len(mapping)}."
            )
        return {q: mapping[i] for i, q in enumerate(ideal.qubits)}

    def decorate(self, ideal: IdealCircuit) -> stim.Circuit:
        self._map = self._device_qubits(ideal)
        self._check_coupling(ideal)
        return super().decorate(ideal)

    def _check_coupling(self, ideal: IdealCircuit) -> None:
        edges = self.device.edges
        if edges is None or all(v is None for v in self._map.values()):
            return
        for layer in ideal.layers:
            if layer.kind != "gate2":
                continue
            for op in layer.ops:
                for a, b in zip(op.targets[::2], op.targets[1::2]):
                    pair = frozenset((str(self._map[a]), str(self._map[b])))
                    if pair not in edges:
                        raise DeviceFileError(
                            f"device {self.device.name!r}: {ideal.layout.family} d={ideal.layout.distance} needs "
                            f"a two-qubit gate between {self._map[a]} and {self._map[b]}, which [coupling] lacks."
                        )

    def layer_duration_ns(self, layer: Layer) -> float:
        return self.device.durations_ns[_DURATION_OF[layer.kind]]

    def qubit_names(self, ideal: IdealCircuit) -> dict[int, str] | None:
        """Device qubit of each code qubit, from the file's ``[[layouts]]`` entry (``None`` without one)."""
        mapping = self._device_qubits(ideal)
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
        return sum(self.layer_duration_ns(layer) for layer in ideal.layers if layer.round == which)
