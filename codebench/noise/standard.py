"""Published noise models, each defined exactly.

All channels are stim's: ``DEPOLARIZE1(p)`` applies X, Y or Z each with
probability p/3; ``DEPOLARIZE2(p)`` one of the 15 non-identity two-qubit
Paulis each with p/15; ``X_ERROR``/``Z_ERROR`` flip with probability p.
"""

from __future__ import annotations

from typing import ClassVar

from codebench.circuits import GateSet, IdealCircuit, Layer, NoiseOp
from codebench.noise.base import NoiseModel, flip_for, idle_qubits
from codebench.options import OptionSpec


def _data_channel(model: NoiseModel, ideal: IdealCircuit) -> str:
    """Flips that a memory in ``ideal.basis`` protects against, or full depolarization."""
    if model.chosen["data_errors"] == "depolarize":
        return "DEPOLARIZE1"
    return "X_ERROR" if ideal.basis == "Z" else "Z_ERROR"


#: How a data qubit is hit: a flip that the memory's basis detects, or a depolarizing channel.
DATA_ERRORS = OptionSpec("choice", "flip", "flip: X (Z) flips for a Z (X) memory; depolarize: DEPOLARIZE1(p)",
                         choices=("flip", "depolarize"))


class CodeCapacity(NoiseModel):
    """Code-capacity noise: data errors once, perfect syndrome extraction.

    Each data qubit suffers an error with probability p right after the reset
    layer of the first round: an X flip for a Z-basis memory, a Z flip for an
    X-basis memory (``data_errors = "flip"``, the default), or
    ``DEPOLARIZE1(p)`` (``data_errors = "depolarize"``). Everything else is
    perfect. (Dennis, Kitaev, Landahl, Preskill, J. Math. Phys. 43, 4452 (2002).)
    """

    name = "code_capacity"
    option_specs: ClassVar[dict[str, OptionSpec]] = {"data_errors": DATA_ERRORS}
    acts_once = True

    def layer_noise(self, layer: Layer, ideal: IdealCircuit) -> tuple[list[NoiseOp], list[NoiseOp]]:
        if layer.opens_round and layer.round == 0:
            return [], [(_data_channel(self, ideal), ideal.layout.data_qubits, [self.p])]
        return [], []


class Phenomenological(NoiseModel):
    """Phenomenological noise: data errors before every round, noisy measurement results.

    At the start of every round (after the measure qubits' reset) each data
    qubit gets the data channel of :class:`CodeCapacity` with probability p,
    and every measurement result (syndrome and final data readout) flips with
    probability p. Gates and resets are perfect. (Dennis, Kitaev, Landahl,
    Preskill, J. Math. Phys. 43, 4452 (2002); Wang, Harrington, Preskill,
    Ann. Phys. 303, 31 (2003).)
    """

    name = "phenomenological"
    option_specs: ClassVar[dict[str, OptionSpec]] = {"data_errors": DATA_ERRORS}

    def layer_noise(self, layer: Layer, ideal: IdealCircuit) -> tuple[list[NoiseOp], list[NoiseOp]]:
        if layer.opens_round and layer.round < ideal.rounds:
            return [], [(_data_channel(self, ideal), ideal.layout.data_qubits, [self.p])]
        if layer.kind == "measure":
            return [(flip_for(op.gate), op.targets, [self.p]) for op in layer.ops], []
        return [], []


class CircuitDepolarizing(NoiseModel):
    """Standard circuit-level depolarizing noise (CX gate set).

    ``DEPOLARIZE1(p)`` after one-qubit gates and on every qubit idle in a
    layer; ``DEPOLARIZE2(p)`` after two-qubit gates; a flip with probability
    p after resets and before measurements (in the basis of the operation).
    (Fowler et al., PRA 86, 032324 (2012); Stephens,
    PRA 89, 022321 (2014).)
    """

    name = "circuit_depolarizing"
    gate_set: ClassVar[GateSet] = "cx"

    def layer_noise(self, layer: Layer, ideal: IdealCircuit) -> tuple[list[NoiseOp], list[NoiseOp]]:
        p = self.p
        before: list[NoiseOp] = []
        after: list[NoiseOp] = [("DEPOLARIZE1", idle_qubits(layer, ideal), [p])]
        for op in layer.ops:
            if layer.kind == "gate1":
                after.append(("DEPOLARIZE1", op.targets, [p]))
            elif layer.kind == "gate2":
                after.append(("DEPOLARIZE2", op.targets, [p]))
            elif layer.kind == "reset":
                after.append((flip_for(op.gate), op.targets, [p]))
            else:
                before.append((flip_for(op.gate), op.targets, [p]))
        return before, after


class SI1000(NoiseModel):
    """The superconducting-inspired SI1000 model (CZ gate set).

    ``DEPOLARIZE2(p)`` after CZ; ``DEPOLARIZE1(p/10)`` after one-qubit gates
    and on qubits idle in gate layers; reset flip 2p; measurement flip 5p;
    ``DEPOLARIZE1(2p)`` on qubits idle during a measurement or reset layer.
    Resets and measurements are in the Z basis only. (Gidney, Newman, Fowler,
    Broughton, Quantum 5, 605 (2021), Table 2.)
    """

    name = "si1000"
    gate_set: ClassVar[GateSet] = "cz"
    p_max: ClassVar[float] = 0.1  # the measurement flip 5p must stay <= 0.5

    def layer_noise(self, layer: Layer, ideal: IdealCircuit) -> tuple[list[NoiseOp], list[NoiseOp]]:
        p = self.p
        idle = idle_qubits(layer, ideal)
        before: list[NoiseOp] = []
        after: list[NoiseOp] = []
        if layer.kind in ("reset", "measure"):
            after.append(("DEPOLARIZE1", idle, [2 * p]))
        else:
            after.append(("DEPOLARIZE1", idle, [p / 10]))
        for op in layer.ops:
            if layer.kind == "gate1":
                after.append(("DEPOLARIZE1", op.targets, [p / 10]))
            elif layer.kind == "gate2":
                after.append(("DEPOLARIZE2", op.targets, [p]))
            elif layer.kind == "reset":
                after.append((flip_for(op.gate), op.targets, [2 * p]))
            else:
                before.append((flip_for(op.gate), op.targets, [5 * p]))
        return before, after
