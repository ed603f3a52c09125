"""A device's geometry: its qubits' places, its couplers, what is usable, and per-coupler numbers.

Read from the device file by :func:`parse_geometry` (called by
:func:`~codebench.noise.calibration.parse_device`). Two ways to give the coupling graph:

``[coupling] edges = [["q0", "q1"], ...]`` lists the couplers (qubit coordinates, where wanted for
the chip figure, go into each ``[[qubits]]`` entry as ``x`` and ``y``), or a generator::

    [coupling]
    lattice = "square"        # square | heavy_hex
    rows = 7
    columns = 7

``square``: qubit ``q{r}_{c}`` at (x, y) = (c, r), coupled to its four nearest neighbours. The rotated
surface code sits on it as a diamond (its data and measure qubits alternate along rows and columns),
so distance d needs a 2d - 1 by 2d - 1 square of the lattice (common practice for square-grid chips).
``heavy_hex``: ``rows`` chains of ``columns`` qubits ``q{r}_{c}`` at (c, 2r), each coupled to its chain
neighbours, and a bridge qubit ``b{r}_{c}`` at (c, 2r + 1) between chain r and r + 1 at every column
c = 0, 4, 8, ... (r even) or c = 2, 6, 10, ... (r odd), coupled to the two qubits above and below it:
the heavy-hexagon lattice (Chamberland et al., PRX 10, 011022 (2020), Fig. 1), with maximum degree 3.
A ``[[qubits]]`` entry may give a lattice qubit the lab's own name: ``id = "a0"`` with ``site = "q6_4"``
(then the qubit is ``a0`` everywhere in the file, and ``q6_4`` is no longer an id).

Marks (all optional): ``usable = false`` on a ``[[qubits]]`` entry (a dead or out-of-spec qubit) or on a
``[[pairs]]`` entry (a broken coupler); per coupler ``gate_2q_error``, ``gate_2q_ns`` (its own gate
duration), ``link = true`` (an inter-module link: ``--improve link_error=F`` scales its error) and
``zz_khz`` (its residual ZZ rate; ``[defaults] zz_khz`` for every other coupler, 0 = off).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Callable

LATTICES = ("square", "heavy_hex")
#: Largest rows / columns of a generated lattice (10,000 qubits on a square one).
MAX_SIDE = 100


@dataclass(frozen=True)
class Geometry:
    """The coupling graph of a device, what is usable on it, and its per-coupler numbers.

    ``nodes`` is empty for a device without a coupling graph (then nothing else applies).
    """

    nodes: tuple[str, ...] = ()
    edges: frozenset[frozenset[str]] = frozenset()
    coords: dict[str, tuple[float, float]] = field(default_factory=dict)
    dead_qubits: frozenset[str] = frozenset()
    dead_pairs: frozenset[frozenset[str]] = frozenset()
    pair_ns: dict[frozenset[str], float] = field(default_factory=dict)
    links: frozenset[frozenset[str]] = frozenset()
    zz_khz: dict[frozenset[str], float] = field(default_factory=dict)
    zz_default_khz: float = 0.0

    @property
    def has_graph(self) -> bool:
        return bool(self.nodes)

    def usable_edges(self) -> list[tuple[str, str]]:
        """Couplers between usable qubits that are themselves usable, in a fixed order."""
        out = []
        for edge in self.edges:
            a, b = sorted(edge)
            if edge not in self.dead_pairs and a not in self.dead_qubits and b not in self.dead_qubits:
                out.append((a, b))
        return sorted(out)

    def zz_of(self, pair: frozenset[str]) -> float:
        return self.zz_khz.get(pair, self.zz_default_khz)


def generate_lattice(kind: str, rows: int, columns: int) -> tuple[list[str], dict[str, tuple[float, float]],
                                                                   set[frozenset[str]]]:
    """(qubit ids, coordinates, couplers) of a generated lattice (see the module docstring).

    >>> ids, coords, edges = generate_lattice("square", 2, 3)
    >>> ids, len(edges)
    (['q0_0', 'q0_1', 'q0_2', 'q1_0', 'q1_1', 'q1_2'], 7)
    >>> ids, coords, edges = generate_lattice("heavy_hex", 3, 5)
    >>> [q for q in ids if q.startswith("b")], len(edges)
    (['b0_0', 'b0_4', 'b1_2'], 18)
    """
    ids: list[str] = []
    coords: dict[str, tuple[float, float]] = {}
    edges: set[frozenset[str]] = set()
    spacing = 1 if kind == "square" else 2
    for r in range(rows):
        for c in range(columns):
            q = f"q{r}_{c}"
            ids.append(q)
            coords[q] = (float(c), float(spacing * r))
            if c:
                edges.add(frozenset((q, f"q{r}_{c - 1}")))
            if r and kind == "square":
                edges.add(frozenset((q, f"q{r - 1}_{c}")))
    if kind == "heavy_hex":
        for r in range(rows - 1):
            for c in range(0 if r % 2 == 0 else 2, columns, 4):
                b = f"b{r}_{c}"
                ids.append(b)
                coords[b] = (float(c), float(2 * r + 1))
                edges |= {frozenset((b, f"q{r}_{c}")), frozenset((b, f"q{r + 1}_{c}"))}
    return ids, coords, edges


Fail = Callable[[str, Any, str], Exception]
Generated = tuple[list[str], dict[str, tuple[float, float]], list[Any]]


def parse_coupling(coupling: dict[str, Any], fail: Fail, unknown_key: Callable[[str], Exception]
                   ) -> Generated | None:
    """A generated lattice's (ids, coords, edges as lists), or ``None`` when ``[coupling]`` lists edges."""
    for key in coupling:
        if key not in ("edges", "lattice", "rows", "columns"):
            raise unknown_key(key)
    if "lattice" not in coupling:
        for key in ("rows", "columns"):
            if key in coupling:
                raise fail(f"coupling.{key}", coupling[key], "only with coupling.lattice")
        return None
    if "edges" in coupling:
        raise fail("coupling.edges", "...", "either edges or a lattice, not both")
    kind = coupling["lattice"]
    if kind not in LATTICES:
        raise fail("coupling.lattice", kind, "one of " + ", ".join(repr(k) for k in LATTICES))
    sides = []
    for key in ("rows", "columns"):
        value = coupling.get(key)
        if isinstance(value, bool) or not isinstance(value, int) or not 1 <= value <= MAX_SIDE:
            raise fail(f"coupling.{key}", value, f"an integer in [1, {MAX_SIDE}] (required with a lattice)")
        sides.append(value)
    ids, coords, edges = generate_lattice(kind, sides[0], sides[1])
    return ids, coords, [sorted(e) for e in sorted(edges, key=sorted)]


def named_sites(generated: Generated, entries: list[Any], fail: Fail) -> Generated:
    """The generated lattice with the ``site`` of each ``[[qubits]]`` entry renamed to the entry's ``id``.

    >>> ids, coords, edges = named_sites(parse_coupling({"lattice": "square", "rows": 1, "columns": 3},
    ...     None, None), [{"id": "a0", "site": "q0_1"}], None)
    >>> ids, coords["a0"], edges
    (['q0_0', 'a0', 'q0_2'], (1.0, 0.0), [['a0', 'q0_0'], ['a0', 'q0_2']])
    """
    ids, coords, edges = generated
    name: dict[str, str] = {}
    for i, table in enumerate(entries):
        if not isinstance(table, dict) or "site" not in table:
            continue
        path = f"qubits[{i}]"
        site, qid = table["site"], table.get("id")
        if not isinstance(site, str) or site not in coords or site in name:
            raise fail(f"{path}.site", site, "a qubit of the lattice (q<row>_<column>) no earlier entry names")
        if not isinstance(qid, str) or not qid or (qid in coords and qid != site) or qid in name.values():
            raise fail(f"{path}.id", qid, "a name no other lattice qubit and no earlier entry has")
        name[site] = qid
    if not name:
        return generated
    renamed = [name.get(q, q) for q in ids]
    return (renamed, {name.get(q, q): xy for q, xy in coords.items()},
            [sorted(name.get(q, q) for q in edge) for edge in edges])


def qubit_marks(entries: list[dict[str, Any]], generated: bool, fail: Fail
                ) -> tuple[dict[str, tuple[float, float]], set[str]]:
    """Coordinates (``x``, ``y``) and ``usable = false`` marks of the ``[[qubits]]`` entries."""
    coords: dict[str, tuple[float, float]] = {}
    dead: set[str] = set()
    for i, table in enumerate(entries):
        path = f"qubits[{i}]"
        qid = table["id"]
        given = [k for k in ("x", "y") if k in table]
        if given and generated:
            raise fail(f"{path}.{given[0]}", table[given[0]], "no coordinate: the lattice places its qubits")
        if len(given) == 1:
            raise fail(path, f"only {given[0]}", "both x and y (the qubit's place on the chip), or neither")
        if given:
            for k in ("x", "y"):
                v = table[k]
                if isinstance(v, bool) or not isinstance(v, (int, float)) or v != v or abs(v) > 1e9:
                    raise fail(f"{path}.{k}", v, "a finite number (a coordinate on the chip)")
            coords[qid] = (float(table["x"]), float(table["y"]))
        if "usable" in table:
            if not isinstance(table["usable"], bool):
                raise fail(f"{path}.usable", table["usable"], "true or false")
            if not table["usable"]:
                dead.add(qid)
    return coords, dead


def pair_marks(table: dict[str, Any], path: str, fail: Fail, positive: Callable[[Any, str, str], float],
               ) -> dict[str, Any]:
    """The coupler keys of one ``[[pairs]]`` entry besides its error: usable, link, gate_2q_ns, zz_khz."""
    out: dict[str, Any] = {}
    for key in ("usable", "link"):
        if key in table:
            if not isinstance(table[key], bool):
                raise fail(f"{path}.{key}", table[key], "true or false")
            out[key] = table[key]
    if "gate_2q_ns" in table:
        out["gate_2q_ns"] = positive(table["gate_2q_ns"], f"{path}.gate_2q_ns", "nanoseconds")
    if "zz_khz" in table:
        out["zz_khz"] = zz_rate(table["zz_khz"], f"{path}.zz_khz", fail)
    return out


def zz_rate(value: Any, path: str, fail: Fail) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not 0 <= value <= 10_000:
        raise fail(path, value, "a ZZ rate in kHz in [0, 10000]")
    return float(value)
