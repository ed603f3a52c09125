"""Records that stand in for a device's: stim samples a circuit whose noise departs from the model.

For tests, examples and rehearsals of the lab commands before a device is at hand. The departures are
those an experimentalist meets: one qubit much noisier than its calibration says (its 1/T1, 1/T2 and
one-qubit gate error times ``qubit_factor``), one readout worse (times ``readout_factor``), and a
correlated error the model lacks (``E(p) X(a) X(b)`` on two measure qubits just before the
measurement of round ``correlated_round``: four detection events, two per qubit). Only device points
(noise = device) can be perturbed this way; the records are those of the point's own experiment (the
same measurements, detectors and observables).
"""

from __future__ import annotations

import dataclasses
import json
from dataclasses import dataclass

import numpy as np
import stim

from codebench.build import ideal_circuit, noise_model
from codebench.noise.calibration import device_from_json
from codebench.records import Point

#: Largest one-qubit gate error and readout error a perturbation sets (device-file limits).
MAX_ERROR = 0.5


@dataclass(frozen=True)
class Perturbation:
    noisier_qubit: str | None = None
    qubit_factor: float = 10.0
    worse_readout: str | None = None
    readout_factor: float = 5.0
    correlated: tuple[str, str] | None = None
    correlated_p: float = 0.02
    correlated_round: int = 1


def perturbed_point(point: Point, change: Perturbation) -> Point:
    """``point`` with its device file changed as ``change`` says (the model point stays ``point``)."""
    options = dict(point.noise_options)
    if point.noise != "device" or "device" not in options:
        raise ValueError("only device points can be perturbed")
    device = device_from_json(options["device"])
    data = json.loads(options["device"])
    entries = {entry["id"]: entry for entry in data.setdefault("qubits", [])}

    def entry(name: str) -> dict[str, object]:
        if name not in entries:
            entries[name] = {"id": name}
            data["qubits"].append(entries[name])
        found: dict[str, object] = entries[name]
        return found

    if change.noisier_qubit is not None:
        cal = device.qubit(change.noisier_qubit)
        entry(change.noisier_qubit).update({
            "t1_us": cal.t1_us / change.qubit_factor, "t2_us": cal.t2_us / change.qubit_factor,
            "gate_1q_error": min(MAX_ERROR, cal.gate_1q_error * change.qubit_factor)})
    if change.worse_readout is not None:
        cal = device.qubit(change.worse_readout)
        target = entry(change.worse_readout)
        target.pop("readout_error_0to1", None)
        target.pop("readout_error_1to0", None)
        target["readout_error"] = min(MAX_ERROR, cal.readout_error * change.readout_factor)
    canonical = device_from_json(json.dumps(data)).canonical_json()
    options["device"] = canonical
    return dataclasses.replace(point, noise_options=tuple(sorted(options.items())))


def perturbed_circuit(point: Point, change: Perturbation) -> stim.Circuit:
    """The noisy circuit of ``point`` under ``change`` (device numbers and the extra correlated error)."""
    changed = perturbed_point(point, change)
    model = noise_model(changed)
    ideal = ideal_circuit(changed, model)
    circuit = model.decorate(ideal)
    if change.correlated is None:
        return circuit
    names = model.qubit_names(ideal) or {}
    number = {name: q for q, name in names.items()}
    a, b = (number[name] for name in change.correlated)
    layer = next(i for i, layer in enumerate(ideal.layers)
                 if layer.kind == "measure" and layer.round == change.correlated_round)
    chunks = str(circuit).split("\nTICK\n")
    chunks[layer] = f"E({change.correlated_p!r}) X{a} X{b}\n" + chunks[layer]
    return stim.Circuit("\nTICK\n".join(chunks))


def sample_records(circuit: stim.Circuit, shots: int, seed: int) -> np.ndarray:
    """``shots`` measurement records of ``circuit`` (bool, one row per shot), from stim's sampler."""
    return np.asarray(circuit.compile_sampler(seed=seed).sample(shots), dtype=bool)
