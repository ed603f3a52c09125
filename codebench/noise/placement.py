"""Placing a code patch on a device's own qubits, and ranking the placements.

**Embeddings.** The code's interaction graph has its qubits as nodes and one edge per pair that
shares a two-qubit gate anywhere in the memory circuit. A placement maps the code's qubits one to
one onto usable device qubits so that every edge lands on a usable coupler: a subgraph
monomorphism of the interaction graph into the usable coupling graph, found by a backtracking
search that places the code's qubits in a connected order (each next qubit among the common
neighbours of its placed partners). On a lattice this finds the translations and the lattice's
rotations and reflections of the patch, and any other way the graph fits; ``tests/test_placement.py``
checks the set against a brute-force enumeration, networkx's VF2 matcher (Cordella, Foggia, Sansone, Vento, IEEE TPAMI 26,
1367 (2004)) and, for the rotated surface code on a square grid, against translations x the eight
symmetries of the square.

**Proxy of the logical error** (:func:`logical_proxy`), from the placed circuit's detector error
model (rounds = min(d, 3), both memory bases of the family; three rounds hold every kind of
mechanism, first round, middle round and final readout, and a qubit's numbers are the same in every
round, so more rounds repeat the same comparison at a cost growing with d): each graphlike mechanism is an edge between
its detectors (or a detector and the boundary) with weight w = ln((1 - p) / p), parallel mechanisms
merged. A logical failure path runs from boundary to boundary and flips the observable; W_e, the
weight of the lightest such path through mechanism e, comes from two shortest-path searches on the
graph doubled by observable parity (Dijkstra). The proxy is the sum over mechanisms of
exp(-W_e / 2): a decoder that matches to the lightest correction fails once about half of a path's
mechanisms fire, so a path of weight W fails as exp(-W / 2) to leading order (Dennis, Kitaev,
Landahl, Preskill, J. Math. Phys. 43, 4452 (2002), Sec. IV; combinatorial factors are the same for
every placement of one code and are left out). Summing over every mechanism, not only over the
lightest paths, lets a bad qubit count wherever it sits: a noisy measure qubit's timelike
mechanisms lie on no lightest path, but make the paths through them cheaper.
It is a ranking, not a rate: ``codebench placements --sample`` samples the rates, and the tests
check that the ranking of a clean placement and one with a 10x worse qubit agrees with sampling.
Mechanisms touching three or more detectors after decomposition are left out.

**Many embeddings.** A path-like code (repetition) fits a large grid in very many ways: at most
:data:`MAX_EMBEDDINGS` are enumerated (in the matcher's fixed order), and when more than
:data:`MAX_RANKED` are found, the proxy is computed for the :data:`MAX_RANKED` candidates nearest the
chosen end (best, worst or median) of a cheap pre-score: the sum of the placed qubits' and couplers'
error numbers (:func:`rank`'s ``cheap``).
"""

from __future__ import annotations

import dataclasses
import heapq
import math
from dataclasses import dataclass
from typing import Callable, Iterable, Sequence

import stim

from codebench.circuits import GateSet
from codebench.codes.base import CodeFamily
from codebench.noise.geometry import Geometry

#: Most embeddings enumerated, and most ranked by the detector-error-model proxy.
MAX_EMBEDDINGS = 20_000
MAX_RANKED = 64
#: Rounds of the circuits the proxy reads: min(d, PROXY_ROUNDS).
PROXY_ROUNDS = 3

Placement = tuple[str, ...]


@dataclass(frozen=True)
class Ranked:
    """One candidate placement: device qubit of each code qubit, and its proxy."""

    qubits: Placement
    proxy: float
    weight: float
    paths: int


def interaction_graph(family: CodeFamily, distance: int, gate_set: GateSet) -> tuple[tuple[int, ...],
                                                                                     list[tuple[int, int]]]:
    """(code qubits, pairs that share a two-qubit gate in any basis' memory circuit), sorted."""
    pairs: set[tuple[int, int]] = set()
    qubits: tuple[int, ...] = ()
    for basis in family.bases:
        ideal = family.ideal_circuit(distance, 1, basis, gate_set)
        qubits = ideal.qubits
        for layer in ideal.layers:
            if layer.kind == "gate2":
                for op in layer.ops:
                    for a, b in zip(op.targets[::2], op.targets[1::2]):
                        pairs.add((min(a, b), max(a, b)))
    return qubits, sorted(pairs)


def _search(geometry: Geometry, qubits: Sequence[int], pairs: Sequence[tuple[int, int]],
            limit: int) -> list[Placement]:
    """Backtracking search for placements, code qubits taken in a connected order."""
    adj: dict[str, set[str]] = {q: set() for q in geometry.nodes if q not in geometry.dead_qubits}
    for a, b in geometry.usable_edges():
        adj[a].add(b)
        adj[b].add(a)
    need: dict[int, set[int]] = {q: set() for q in qubits}
    for i, j in pairs:
        need[i].add(j)
        need[j].add(i)
    if len(qubits) > len(adj) or not qubits:
        return []
    order = [max(qubits, key=lambda q: (len(need[q]), -q))]
    while len(order) < len(qubits):
        seen = set(order)
        order.append(max((q for q in qubits if q not in seen), key=lambda q: (len(need[q] & seen), len(need[q]), -q)))
    hosts = sorted(adj)
    found: list[Placement] = []
    place: dict[int, str] = {}
    used: set[str] = set()

    def extend(i: int) -> bool:
        if i == len(order):
            found.append(tuple(place[q] for q in qubits))
            return len(found) >= limit
        q = order[i]
        anchors = [place[n] for n in need[q] if n in place]
        options = set(adj[anchors[0]]) if anchors else set(hosts)
        for a in anchors[1:]:
            options &= adj[a]
        for c in sorted(options - used):
            if len(adj[c]) < len(need[q]):
                continue
            place[q] = c
            used.add(c)
            stop = extend(i + 1)
            del place[q]
            used.discard(c)
            if stop:
                return True
        return False

    extend(0)
    return sorted(found)


def embeddings(geometry: Geometry, qubits: Sequence[int], pairs: Sequence[tuple[int, int]],
               limit: int = MAX_EMBEDDINGS) -> list[Placement]:
    """Every placement (device qubit per code qubit, in ``qubits`` order), up to ``limit``, sorted."""
    return _search(geometry, qubits, pairs, limit)


def fits(geometry: Geometry, qubits: Sequence[int], pairs: Sequence[tuple[int, int]]) -> bool:
    """Whether at least one placement exists."""
    return bool(_search(geometry, qubits, pairs, 1))


def largest_fitting(geometry: Geometry, family: CodeFamily, gate_set: GateSet, below: int) -> int | None:
    """The largest allowed distance under ``below`` whose patch fits (``None``: not even the smallest)."""
    best = None
    for d in range(2, below):
        if family.distance_problem(d) is not None:
            continue
        if not fits(geometry, *interaction_graph(family, d, gate_set)):
            break
        best = d
    return best


def unplaced_problem(geometry: Geometry, family: CodeFamily, distance: int, gate_set: GateSet) -> str:
    """The one-line reason a patch does not fit, naming the largest distance that does."""
    usable = len([q for q in geometry.nodes if q not in geometry.dead_qubits])
    qubits, pairs = interaction_graph(family, distance, gate_set)
    need = len(qubits)
    unusable = len(geometry.dead_qubits) + len(geometry.dead_pairs)
    largest = largest_fitting(geometry, family, gate_set, distance)
    # Blame the unusable marks only when the patch would fit without them.
    whole = dataclasses.replace(geometry, dead_qubits=frozenset(), dead_pairs=frozenset())
    blame = unusable and fits(whole, qubits, pairs)
    reason = (f"{need} qubits needed, {usable} usable" if need > usable
              else f"no region of {need} usable qubits with every coupler the code needs"
                   + (f" ({unusable} qubits / couplers are marked unusable)" if blame else
                      " (not even with every qubit and coupler usable)" if unusable else ""))
    fits_text = (f"the largest distance that fits is {largest}" if largest is not None
                 else f"no distance of {family.name} fits")
    return f"{family.name} d={distance} does not fit on the device ({reason}); {fits_text}."


# --------------------------------------------------------------------------- the proxy


def _graph_of(dem: stim.DetectorErrorModel) -> tuple[int, dict[tuple[int, int, int], float]]:
    """Edges (u, v, observable parity) -> merged probability; the boundary is node ``num_detectors``."""
    boundary = dem.num_detectors
    edges: dict[tuple[int, int, int], float] = {}
    for inst in dem.flattened():
        if inst.type != "error":
            continue
        p = inst.args_copy()[0]
        parts: list[list[stim.DemTarget]] = [[]]
        for target in inst.targets_copy():
            if target.is_separator():
                parts.append([])
            else:
                parts[-1].append(target)
        for part in parts:
            dets = sorted(t.val for t in part if t.is_relative_detector_id())
            flips = sum(1 for t in part if t.is_logical_observable_id()) % 2
            if not dets or len(dets) > 2:
                continue
            key = (dets[0], dets[1] if len(dets) == 2 else boundary, flips)
            q = edges.get(key, 0.0)
            edges[key] = q * (1 - p) + p * (1 - q)
    return boundary, edges


def _distances(adjacency: dict[int, list[tuple[int, int, float]]], start: tuple[int, int]) -> dict[tuple[int, int], float]:
    """Dijkstra on the graph doubled by observable parity: lightest weight from ``start`` to every (node, parity)."""
    dist: dict[tuple[int, int], float] = {start: 0.0}
    heap: list[tuple[float, tuple[int, int]]] = [(0.0, start)]
    done: set[tuple[int, int]] = set()
    while heap:
        d, node = heapq.heappop(heap)
        if node in done:
            continue
        done.add(node)
        for v, flip, w in adjacency.get(node[0], []):
            nxt = (v, node[1] ^ flip)
            if d + w < dist.get(nxt, math.inf):
                dist[nxt] = d + w
                heapq.heappush(heap, (d + w, nxt))
    return dist


def logical_proxy(dem: stim.DetectorErrorModel) -> tuple[float, float, int]:
    """(proxy, W, N) of a detector error model (see the module docstring).

    W_e is the weight of the lightest logical failure path through mechanism e; the proxy is the sum
    of exp(-W_e / 2) over every mechanism, W the smallest W_e and N how many mechanisms share it.
    Three mechanisms of probability 0.1 in a chain from boundary to boundary, the first flipping the
    observable: the only logical failure is all three (W_e = 3 ln 9 for each; proxy 3 / 27):

    >>> dem = stim.DetectorErrorModel('''
    ... error(0.1) D0 L0
    ... error(0.1) D0 D1
    ... error(0.1) D1
    ... ''')
    >>> proxy, weight, paths = logical_proxy(dem)
    >>> round(proxy, 12), round(weight, 9) == round(3 * math.log(9), 9), paths
    (0.111111111111, True, 3)
    """
    boundary, edges = _graph_of(dem)
    adjacency: dict[int, list[tuple[int, int, float]]] = {}
    weighted: list[tuple[int, int, int, float]] = []
    for (u, v, flip), p in edges.items():
        if p <= 0:
            continue
        w = math.log((1 - p) / p) if p < 0.5 else 0.0
        adjacency.setdefault(u, []).append((v, flip, w))
        adjacency.setdefault(v, []).append((u, flip, w))
        weighted.append((u, v, flip, w))
    start = _distances(adjacency, (boundary, 0))
    goal = _distances(adjacency, (boundary, 1))
    through = []
    for u, v, flip, w in weighted:
        best = math.inf
        for a, b in ((u, v), (v, u)):
            for parity in (0, 1):
                best = min(best, start.get((a, parity), math.inf) + w + goal.get((b, parity ^ flip), math.inf))
        if math.isfinite(best):
            through.append(best)
    if not through:
        return 0.0, math.inf, 0
    weight = min(through)
    paths = sum(1 for t in through if t <= weight * (1 + 1e-9))
    return math.fsum(math.exp(-t / 2) for t in through), weight, paths


def rank(candidates: Sequence[Placement], circuits: Callable[[Placement], Iterable[stim.Circuit]],
         cheap: Callable[[Placement], float], choice: str) -> list[Ranked]:
    """Candidates ranked best first by the proxy summed over ``circuits(candidate)``.

    Beyond :data:`MAX_RANKED` candidates only those nearest ``choice`` by ``cheap`` are ranked.
    """
    pool = list(candidates)
    if len(pool) > MAX_RANKED:
        pool.sort(key=lambda c: (cheap(c), c))
        if choice == "worst":
            pool = pool[-MAX_RANKED:]
        elif choice == "median":
            mid = len(pool) // 2
            pool = pool[max(0, mid - MAX_RANKED // 2):mid + MAX_RANKED // 2]
        else:
            pool = pool[:MAX_RANKED]
    ranked = []
    # Placements whose circuits are the same (on a chip of equal qubits, every one) share one proxy.
    seen: dict[tuple[str, ...], tuple[float, float, int]] = {}
    for candidate in pool:
        built = list(circuits(candidate))
        text = tuple(str(circuit) for circuit in built)
        if text not in seen:
            total, weight, paths = 0.0, math.inf, 0
            for circuit in built:
                dem = circuit.detector_error_model(decompose_errors=True, ignore_decomposition_failures=True)
                proxy, w, n = logical_proxy(dem)
                total += proxy
                if w < weight:
                    weight, paths = w, n
                elif w == weight:
                    paths += n
            seen[text] = (total, weight, paths)
        ranked.append(Ranked(candidate, *seen[text]))
    ranked.sort(key=lambda r: (r.proxy, r.qubits))
    return ranked


def pick(ranked: Sequence[Ranked], choice: str) -> Ranked:
    """The best, worst or median of ``ranked`` (best first)."""
    if choice == "worst":
        return ranked[-1]
    if choice == "median":
        return ranked[(len(ranked) - 1) // 2]
    return ranked[0]
