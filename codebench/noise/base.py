"""The noise-model interface and its registry.

A noise model knows nothing of code families: it sees the layers of an
:class:`~codebench.circuits.IdealCircuit` and says which noise channels go
before and after each one. Constructors only store parameters;
:meth:`NoiseModel.get_params` returns exactly what identifies the model in a
point key.
"""

from __future__ import annotations

from abc import ABC, abstractmethod
from typing import Any, ClassVar

import stim

from codebench.circuits import GateSet, IdealCircuit, Layer, NoiseOp, build_memory, render
from codebench.codes.layout import Basis, Layout


class NoiseModel(ABC):
    """Turns an ideal layered circuit into a noisy stim circuit."""

    name: ClassVar[str]
    gate_set: ClassVar[GateSet] = "cx"
    #: Largest allowed base rate ``p`` (every channel probability must stay valid).
    p_max: ClassVar[float] = 0.5
    #: Allowed options: name -> allowed values.
    options: ClassVar[dict[str, tuple[str, ...]]] = {}

    def __init__(self, p: float, **options: str) -> None:
        self.p = float(p)
        self.chosen = {k: options.get(k, allowed[0]) for k, allowed in self.options.items()}

    def get_params(self) -> dict[str, Any]:
        return {"noise": self.name, "p": self.p, "noise_options": dict(self.chosen)}

    @abstractmethod
    def layer_noise(self, layer: Layer, ideal: IdealCircuit) -> tuple[list[NoiseOp], list[NoiseOp]]:
        """Channels to add before and after ``layer``."""

    def decorate(self, ideal: IdealCircuit) -> stim.Circuit:
        """The noisy stim circuit for ``ideal``."""
        return render(ideal, self.layer_noise)

    def circuit_gate_set(self) -> GateSet:
        """The gate set circuits are compiled to (a device may choose its own)."""
        return self.gate_set

    def ideal_circuit(self, layout: Layout, rounds: int, basis: Basis) -> IdealCircuit:
        """The noiseless layered memory experiment in this model's gate set."""
        return build_memory(layout, rounds, basis, self.circuit_gate_set())

    def memory_circuit(self, layout: Layout, rounds: int, basis: Basis) -> stim.Circuit:
        """Build the ideal memory experiment in this model's gate set and decorate it."""
        return self.decorate(self.ideal_circuit(layout, rounds, basis))


def idle_qubits(layer: Layer, ideal: IdealCircuit) -> list[int]:
    """Qubits of the circuit that ``layer`` does not act on."""
    busy = layer.qubits
    return [q for q in ideal.qubits if q not in busy]


def flip_for(gate: str) -> str:
    """The Pauli channel that flips the result of a reset or measurement ``gate``."""
    return "Z_ERROR" if gate.endswith("X") else "X_ERROR"


def targets_of(layer: Layer, gates: tuple[str, ...]) -> list[int]:
    return [q for op in layer.ops if op.gate in gates for q in op.targets]
