"""The rotated surface code [[d^2, 1, d]] for odd d >= 3.

Data qubits sit at odd coordinates (2i+1, 2j+1), measure qubits at even ones.
Logical Z runs along the top row (x varies), logical X along the left column.
The two-qubit-gate order per plaquette is the N/Z pair (Z checks touch
NW, SW, NE, SE; X checks NW, NE, SW, SE): the last two data qubits a measure
qubit touches, where a single measure-qubit fault spreads to two data errors,
then lie perpendicular to the logical of the same type, so hook errors do not
lower the circuit distance (Tomita & Svore, PRA 90, 062320 (2014), Fig. 2;
checked in tests with stim's shortest_graphlike_error).
"""

from __future__ import annotations

from codebench.codes.base import CodeFamily
from codebench.layout import Basis, Check, Layout, Role

# Offsets (dx, dy) from a measure qubit to its data qubits, in gate order.
# y grows downwards; NW = (-1, -1).
_Z_ORDER = ((-1, -1), (-1, 1), (1, -1), (1, 1))
_X_ORDER = ((-1, -1), (1, -1), (-1, 1), (1, 1))


class RotatedSurface(CodeFamily):
    name = "rotated_surface"

    def distance_problem(self, distance: int) -> str | None:
        return None if distance >= 3 and distance % 2 == 1 else "an odd integer >= 3"

    def qubit_count(self, distance: int) -> int:
        """d^2 data plus d^2 - 1 measure qubits (closed form; projections ask for large d)."""
        return 2 * distance * distance - 1

    def layout(self, distance: int, basis: Basis) -> Layout:
        d = distance
        index: dict[tuple[int, int], int] = {}
        roles: dict[int, Role] = {}

        def add(pos: tuple[int, int], role: Role) -> None:
            index[pos] = len(index)
            roles[index[pos]] = role

        for y in range(1, 2 * d, 2):
            for x in range(1, 2 * d, 2):
                add((x, y), "data")
        plaquettes: list[tuple[tuple[int, int], Basis]] = []
        for y in range(0, 2 * d + 1, 2):
            for x in range(0, 2 * d + 1, 2):
                kind: Basis = "X" if (x + y) % 4 == 0 else "Z"
                inside_x = 0 < x < 2 * d
                inside_y = 0 < y < 2 * d
                # X checks may touch the top/bottom boundary, Z checks the left/right one.
                if kind == "X" and not inside_x:
                    continue
                if kind == "Z" and not inside_y:
                    continue
                if not (inside_x or inside_y):
                    continue
                plaquettes.append(((x, y), kind))
        checks = []
        for pos, kind in plaquettes:
            add(pos, "measure")
            order = _Z_ORDER if kind == "Z" else _X_ORDER
            schedule = tuple(index.get((pos[0] + dx, pos[1] + dy)) for dx, dy in order)
            checks.append(Check(basis=kind, measure=index[pos], schedule=schedule))
        coords = {q: (float(p[0]), float(p[1])) for p, q in index.items()}
        logical_z = tuple(index[(x, 1)] for x in range(1, 2 * d, 2))
        logical_x = tuple(index[(1, y)] for y in range(1, 2 * d, 2))
        layout = Layout(self.name, d, coords, roles, tuple(checks), logical_x, logical_z)
        layout.validate()
        return layout
