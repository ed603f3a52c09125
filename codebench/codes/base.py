"""The code-family interface and its registry."""

from __future__ import annotations

from abc import ABC, abstractmethod
from typing import ClassVar

from codebench.circuits import GateSet, IdealCircuit, build_memory
from codebench.layout import Basis, Layout


class CodeFamily(ABC):
    """A family of codes indexed by distance.

    Subclasses set ``name`` and implement :meth:`layout`; they register with
    :func:`codebench.codes.register`.
    """

    name: ClassVar[str]
    bases: ClassVar[tuple[Basis, ...]] = ("Z", "X")
    #: The decoder this family needs by default (a forecast's choice when none is named).
    default_decoder: ClassVar[str] = "mwpm"

    @abstractmethod
    def distance_problem(self, distance: int) -> str | None:
        """``None`` if ``distance`` is allowed, else what is allowed (for messages)."""

    @abstractmethod
    def layout(self, distance: int, basis: Basis) -> Layout:
        """The layout used for a memory experiment in ``basis``."""

    def qubit_count(self, distance: int) -> int:
        """Physical qubits the code needs at ``distance``."""
        return len(self.layout(distance, self.bases[0]).qubits)

    def ideal_circuit(self, distance: int, rounds: int, basis: Basis, gate_set: GateSet) -> IdealCircuit:
        """The noiseless memory experiment; families with their own round structure override it."""
        return build_memory(self.layout(distance, basis), rounds, basis, gate_set)
