"""The layout type shared by every code family.

A layout says where each qubit sits, what it is for, which checks the
syndrome-extraction round measures (and in which order each check touches its
data qubits), and which data qubits carry the logical operators. It knows
nothing of noise or of circuits.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

Basis = Literal["X", "Z"]
Role = Literal["data", "measure", "flag"]


@dataclass(frozen=True)
class Check:
    """One stabilizer measured through one measure qubit.

    ``schedule[k]`` is the data qubit the measure qubit couples to in
    two-qubit-gate layer ``k`` of a round, or ``None`` when it rests in that
    layer. The order matters: it decides where hook errors land.
    """

    basis: Basis
    measure: int
    schedule: tuple[int | None, ...]

    @property
    def support(self) -> tuple[int, ...]:
        return tuple(q for q in self.schedule if q is not None)


@dataclass(frozen=True)
class Layout:
    """Qubits, roles, checks and logicals of one code at one distance."""

    family: str
    distance: int
    coords: dict[int, tuple[float, float]]
    roles: dict[int, Role]
    checks: tuple[Check, ...]
    logical_x: tuple[int, ...]
    logical_z: tuple[int, ...]

    @property
    def qubits(self) -> tuple[int, ...]:
        return tuple(sorted(self.coords))

    @property
    def data_qubits(self) -> tuple[int, ...]:
        return tuple(q for q in self.qubits if self.roles[q] == "data")

    @property
    def measure_qubits(self) -> tuple[int, ...]:
        return tuple(q for q in self.qubits if self.roles[q] == "measure")

    @property
    def num_steps(self) -> int:
        return max(len(c.schedule) for c in self.checks)

    def checks_of(self, basis: Basis) -> tuple[Check, ...]:
        return tuple(c for c in self.checks if c.basis == basis)

    def logical(self, basis: Basis) -> tuple[int, ...]:
        """Data qubits whose ``basis`` readout gives the logical observable."""
        return self.logical_z if basis == "Z" else self.logical_x

    def validate(self) -> None:
        """Check internal consistency; raises ``ValueError`` on a broken layout."""
        for check in self.checks:
            if self.roles.get(check.measure) != "measure":
                raise ValueError(f"check on qubit {check.measure} is not a measure qubit")
            for q in check.support:
                if self.roles.get(q) != "data":
                    raise ValueError(f"check {check.measure} touches non-data qubit {q}")
        for step in range(self.num_steps):
            used = [c.schedule[step] for c in self.checks if step < len(c.schedule)]
            busy = [q for q in used if q is not None]
            if len(busy) != len(set(busy)):
                raise ValueError(f"layer {step} uses a data qubit twice")
