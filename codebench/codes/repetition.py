"""The repetition code on a line: data and measure qubits alternate.

A Z-basis memory uses the bit-flip code (Z Z checks, protects against X
errors); an X-basis memory uses the phase-flip code (X X checks, protects
against Z errors). Any d >= 2.
"""

from __future__ import annotations

from codebench.codes.base import CodeFamily
from codebench.layout import Basis, Check, Layout, Role


class Repetition(CodeFamily):
    name = "repetition"

    def distance_problem(self, distance: int) -> str | None:
        return None if distance >= 2 else "an integer >= 2"

    def qubit_count(self, distance: int) -> int:
        """d data plus d - 1 measure qubits."""
        return 2 * distance - 1

    def layout(self, distance: int, basis: Basis) -> Layout:
        coords: dict[int, tuple[float, float]] = {}
        roles: dict[int, Role] = {}
        for i in range(2 * distance - 1):
            coords[i] = (float(i), 0.0)
            roles[i] = "data" if i % 2 == 0 else "measure"
        checks = tuple(
            Check(basis=basis, measure=m, schedule=(m - 1, m + 1))
            for m in range(1, 2 * distance - 1, 2)
        )
        data = tuple(range(0, 2 * distance - 1, 2))
        # The protected observable is carried by a single data qubit; the
        # conjugate logical is the product over all of them.
        single = (0,)
        logical_z, logical_x = (single, data) if basis == "Z" else (data, single)
        layout = Layout(self.name, distance, coords, roles, checks, logical_x, logical_z)
        layout.validate()
        return layout
