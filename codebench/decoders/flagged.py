"""Flag-conditioned matching (``flag_matching``) for circuits with flag qubits.

A flag detector (fourth coordinate equal to :data:`codebench.circuits.FLAG_MARK`)
does not take part in matching. Instead each shot's raised flags R select
the error mechanisms allowed in that shot, following the flag-decoding idea of
Chamberland, Zhu, Yoder, Hertzberg, Cross, PRX 10, 011022 (2020):

* mechanisms that raise no flag keep their probability (they form the base
  graph, the only graph a flag-free shot needs);
* a mechanism whose flag set F is contained in R is added, with its
  probability given R (below);
* a mechanism that needs an unraised flag is dropped (conditioned on that
  flag not firing, it is second order).

Probability given R. Mechanisms with the same flag set G form a class that
fires G with probability P_G (odd number of them occurring). R must be
the XOR of the fired classes; the posterior that class G fired is
pi_G = P_G Z_{-G}(R xor G) / Z(R), where Z sums the probability of every
combination of classes whose flags XOR to R (Z_{-G} leaves G out). It is
computed exactly, with one forward and one backward pass over the 2^k flag
subsets, for each connected cluster of raised flags (k <= 10; larger
clusters use a per-flag share). Within a fired class, mechanism e is the one
that occurred with probability p_e / sum of the class's p; so
q_e = pi_G p_e / sum_G p. Mechanisms that raise only flags (a flag's own
readout error, say) soak up their share and add no edge.

Graph pieces. The model should be decomposed (``wants_decomposed``): a
flagged mechanism whose non-flag detectors number at most two becomes one
edge; otherwise the non-flag parts of stim's graphlike components are used
(observable-only parts are folded into the next part). A flagged mechanism
with no non-flag detector but an observable flips the prediction when its
posterior exceeds 1/2. Where an added edge meets an existing one the two are
merged as independent causes (XOR of probabilities), keeping the observable of
the likelier cause.

Batches. Shots are grouped by flag pattern (``np.unique`` on the packed
flag bits); each group is decoded by ``pymatching``'s ``decode_batch``. The
flag-free pattern uses the base graph. A pattern seen before, or shared by
several shots of a batch, gets its own compiled graph, kept in an LRU cache
of :attr:`FlagMatching.cache_size` patterns; a pattern seen once is decoded
on a scratch graph whose changed edges are put back afterwards (rebuilding a
graph costs more than re-weighting one). Both graphs hold the same edges in
the same order, so a shot decodes the same either way. Without flag
detectors the decoder is plain matching on the model.
"""

from __future__ import annotations

import math
from collections import OrderedDict
from dataclasses import dataclass
from functools import lru_cache
from typing import Any, ClassVar

import numpy as np
import pymatching
import stim

from codebench.circuits import FLAG_MARK
from codebench.decoders.base import Decoder

#: Weight of a flagged edge that a pattern does not allow (never worth using; far above any real path).
ABSENT_WEIGHT = 1000.0
#: Bound on the edges held by cached per-pattern graphs together (about 200 bytes each once compiled).
MAX_CACHED_EDGES = 2_000_000
#: Largest cluster of raised flags whose class posteriors are computed exactly (2^k states).
MAX_EXACT_FLAGS = 10
_P_CLIP = 1e-12


Slot = tuple[int, int]  # (detector, other detector or -1 for the boundary)
Update = tuple[Slot, frozenset[int], float, float]  # slot, observables, weight, probability


def _xor_prob(a: float, b: float) -> float:
    """Probability that exactly one of two independent events happens."""
    return a * (1 - b) + b * (1 - a)


def _weight(p: float) -> float:
    p = min(max(p, _P_CLIP), 1 - _P_CLIP)
    return math.log((1 - p) / p)


@lru_cache(maxsize=1024)
def _obs_set(mask: int) -> frozenset[int]:
    return frozenset(i for i in range(mask.bit_length()) if mask >> i & 1)


def class_posteriors(masks: list[int], probs: list[float], k: int) -> list[float] | None:
    """P(class i fired | the flags XOR to all k bits), classes independent with probabilities ``probs``.

    ``masks[i]`` is class i's flag set as a k-bit mask. ``None`` when no combination gives all k bits.

    >>> [round(x, 6) for x in class_posteriors([0b01, 0b10, 0b11], [0.01, 0.01, 0.001], 2)]
    [0.0925, 0.0925, 0.9075]
    """
    size = 1 << k
    full = size - 1
    idx = np.arange(size)
    n = len(masks)
    forward = np.zeros((n + 1, size))
    forward[0, 0] = 1.0
    for i, (g, p) in enumerate(zip(masks, probs)):
        forward[i + 1] = (1 - p) * forward[i] + p * forward[i][idx ^ g]
    backward = np.zeros((n + 1, size))
    backward[n, 0] = 1.0
    for i in range(n - 1, -1, -1):
        g, p = masks[i], probs[i]
        backward[i] = (1 - p) * backward[i + 1] + p * backward[i + 1][idx ^ g]
    total = forward[n, full]
    if not total > 0:
        return None
    out = []
    for i, (g, p) in enumerate(zip(masks, probs)):
        without = float(np.dot(forward[i], backward[i + 1][idx ^ (full ^ g)]))
        out.append(min(1.0, float(p * without / total)))
    return out


@dataclass(frozen=True)
class _Mechanism:
    flags: frozenset[int]
    probability: float
    parts: tuple[tuple[Slot, int], ...]  # graphlike pieces without flags: (slot, observable mask)
    observable_only: int  # observable mask when no non-flag detector is hit


@dataclass(frozen=True)
class _PatternPlan:
    updates: tuple[Update, ...]
    flip: int  # observable mask to flip in every shot of the pattern


def _slot(dets: list[int]) -> Slot:
    dets = sorted(dets)
    return (dets[0], dets[1]) if len(dets) == 2 else (dets[0], -1)


def _parse(targets: list[stim.DemTarget], flag_set: set[int]) -> tuple[frozenset[int], set[int], int, list[tuple[set[int], int]]]:
    """Flags, non-flag detectors, observables (all XOR-ed) and per-component (detectors, observables)."""
    flags: set[int] = set()
    dets: set[int] = set()
    obs = 0
    comps: list[tuple[set[int], int]] = [(set(), 0)]
    for t in targets:
        if t.is_separator():
            comps.append((set(), 0))
        elif t.is_relative_detector_id():
            if t.val in flag_set:
                flags ^= {t.val}
            else:
                dets ^= {t.val}
                comps[-1][0].symmetric_difference_update({t.val})
        elif t.is_logical_observable_id():
            obs ^= 1 << t.val
            d, o = comps[-1]
            comps[-1] = (d, o ^ (1 << t.val))
    return frozenset(flags), dets, obs, comps


def _pieces(dets: set[int], obs: int, comps: list[tuple[set[int], int]]) -> tuple[tuple[Slot, int], ...]:
    """Graphlike pieces of a flagged mechanism's non-flag part."""
    if not dets:
        return ()
    if len(dets) <= 2:
        return ((_slot(list(dets)), obs),)
    pieces: list[tuple[list[int], int]] = []
    pending = 0
    for cd, co in comps:
        if not cd:
            pending ^= co
            continue
        ordered = sorted(cd)
        # More than two detectors left means the model was not decomposed: split into pairs (crude).
        for n in range(0, len(ordered), 2):
            pieces.append((ordered[n : n + 2], co if n == 0 else 0))
    if pending:
        chunk, o = pieces[0]
        pieces[0] = (chunk, o ^ pending)
    return tuple((_slot(c), o) for c, o in pieces)


class _FlagGraphs:
    """Everything compiled from one detector error model."""

    def __init__(self, dem: stim.DetectorErrorModel, cache_size: int) -> None:
        self.num_detectors = dem.num_detectors
        self.num_observables = dem.num_observables
        self.width = (self.num_observables + 7) // 8
        coords = dem.get_detector_coordinates()
        self.flag_ids = np.array(
            sorted(d for d, c in coords.items() if len(c) >= 4 and c[3] == FLAG_MARK), dtype=np.int64
        )
        flag_set = set(int(f) for f in self.flag_ids)
        base = stim.DetectorErrorModel()
        self.mechanisms: list[_Mechanism] = []
        self.by_flag: dict[int, list[int]] = {}
        for inst in dem.flattened():
            if not isinstance(inst, stim.DemInstruction):
                continue
            if inst.type != "error" or not flag_set:
                base.append(inst)
                continue
            targets = inst.targets_copy()
            if not any(t.is_relative_detector_id() and t.val in flag_set for t in targets):
                base.append(inst)
                continue
            flags, dets, obs, comps = _parse(targets, flag_set)
            if not flags:  # flags cancel between components: an ordinary mechanism
                base.append(inst)
                continue
            mech = _Mechanism(flags, inst.args_copy()[0], _pieces(dets, obs, comps), 0 if dets else obs)
            for f in flags:
                self.by_flag.setdefault(f, []).append(len(self.mechanisms))
            self.mechanisms.append(mech)
        if self.num_detectors and base.num_detectors < self.num_detectors:
            base.append("detector", [], [stim.target_relative_detector_id(self.num_detectors - 1)])
        if self.num_observables and base.num_observables < self.num_observables:
            base.append("logical_observable", [], [stim.target_logical_observable_id(self.num_observables - 1)])
        self.base_dem = base
        self.base = self._fresh_base()
        self.keep_bool = np.ones(self.num_detectors, dtype=bool)
        self.keep_bool[self.flag_ids] = False
        self.keep_packed = np.packbits(self.keep_bool, bitorder="little")
        # Edges that flagged mechanisms can add, with their base values (absent if the base lacks them).
        slots = sorted({slot for m in self.mechanisms for slot, _ in m.parts})
        self.base_value: dict[Slot, tuple[frozenset[int], float, float]] = {}
        self.absent: list[Slot] = []
        for slot in slots:
            data = self._edge_data(self.base, slot)
            if data is None:
                self.absent.append(slot)
            else:
                self.base_value[slot] = data
        edges = self.base.num_edges + len(self.absent)
        self.cache_size = max(1, min(cache_size, MAX_CACHED_EDGES // max(1, edges)))
        self.graphs: OrderedDict[bytes, pymatching.Matching] = OrderedDict()
        self.plans: OrderedDict[bytes, _PatternPlan] = OrderedDict()
        self.seen: OrderedDict[bytes, None] = OrderedDict()
        self._scratch: pymatching.Matching | None = None

    # graphs ------------------------------------------------------------

    def _fresh_base(self) -> pymatching.Matching:
        graph = pymatching.Matching.from_detector_error_model(self.base_dem)
        graph.ensure_num_fault_ids(self.num_observables)
        return graph

    @staticmethod
    def _edge_data(graph: pymatching.Matching, slot: Slot) -> tuple[frozenset[int], float, float] | None:
        u, v = slot
        if v < 0:
            if not graph.has_boundary_edge(u):
                return None
            data = graph.get_boundary_edge_data(u)
        else:
            if not graph.has_edge(u, v):
                return None
            data = graph.get_edge_data(u, v)
        weight = float(data["weight"])
        p = float(data["error_probability"])
        if not 0 <= p <= 1:
            p = 1 / (1 + math.exp(weight))
        return frozenset(data["fault_ids"]), weight, p

    @staticmethod
    def _set(graph: pymatching.Matching, slot: Slot, obs: frozenset[int], weight: float, p: float, how: str) -> None:
        u, v = slot
        if v < 0:
            graph.add_boundary_edge(u, fault_ids=set(obs), weight=weight, error_probability=p, merge_strategy=how)
        else:
            graph.add_edge(u, v, fault_ids=set(obs), weight=weight, error_probability=p, merge_strategy=how)

    def _with_absent(self) -> pymatching.Matching:
        graph = self._fresh_base()
        for slot in self.absent:
            self._set(graph, slot, frozenset(), ABSENT_WEIGHT, -1.0, "disallow")
        return graph

    def _apply(self, graph: pymatching.Matching, updates: tuple[Update, ...]) -> None:
        for slot, obs, weight, p in updates:
            self._set(graph, slot, obs, weight, p, "replace")

    def _restore(self, graph: pymatching.Matching, updates: tuple[Update, ...]) -> None:
        for slot, _, _, _ in updates:
            if slot in self.base_value:
                obs, weight, p = self.base_value[slot]
                self._set(graph, slot, obs, weight, p, "replace")
            else:
                self._set(graph, slot, frozenset(), ABSENT_WEIGHT, -1.0, "replace")

    # patterns ----------------------------------------------------------

    def plan(self, key: bytes, raised: list[int]) -> _PatternPlan:
        plan = self.plans.get(key)
        if plan is not None:
            self.plans.move_to_end(key)
            return plan
        plan = self._make_plan(raised)
        self.plans[key] = plan
        while len(self.plans) > 16 * self.cache_size:
            self.plans.popitem(last=False)
        return plan

    def _make_plan(self, raised: list[int]) -> _PatternPlan:
        rset = frozenset(raised)
        candidates = sorted({e for f in raised for e in self.by_flag.get(f, ())})
        classes: dict[frozenset[int], list[int]] = {}
        for e in candidates:
            if self.mechanisms[e].flags <= rset:
                classes.setdefault(self.mechanisms[e].flags, []).append(e)
        fire: dict[frozenset[int], float] = {}
        for g, members in classes.items():
            keep = 1.0
            for e in members:
                keep *= 1 - 2 * self.mechanisms[e].probability
            fire[g] = (1 - keep) / 2
        posterior = self._posteriors(fire)
        contributions: dict[Slot, dict[int, float]] = {}
        flip_prob: dict[int, float] = {}
        for g, members in classes.items():
            total = sum(self.mechanisms[e].probability for e in members)
            if total <= 0 or posterior.get(g, 0.0) <= 0:
                continue
            for e in members:
                mech = self.mechanisms[e]
                q = posterior[g] * mech.probability / total
                for slot, obs in mech.parts:
                    groups = contributions.setdefault(slot, {})
                    groups[obs] = _xor_prob(groups.get(obs, 0.0), q)
                if mech.observable_only:
                    flip_prob[mech.observable_only] = _xor_prob(flip_prob.get(mech.observable_only, 0.0), q)
        updates: list[Update] = []
        for slot in sorted(contributions):
            groups = dict(contributions[slot])
            if slot in self.base_value:
                base_obs, _, base_p = self.base_value[slot]
                mask = sum(1 << i for i in base_obs)
                groups[mask] = _xor_prob(groups.get(mask, 0.0), base_p)
            p = 0.0
            for value in groups.values():
                p = _xor_prob(p, value)
            best = max(sorted(groups), key=lambda m: groups[m])
            updates.append((slot, _obs_set(best), _weight(p), min(max(p, _P_CLIP), 1 - _P_CLIP)))
        flip = 0
        for mask, prob in flip_prob.items():
            if prob > 0.5:
                flip ^= mask
        return _PatternPlan(tuple(updates), flip)

    @staticmethod
    def _posteriors(fire: dict[frozenset[int], float]) -> dict[frozenset[int], float]:
        """pi_G for every class, cluster by cluster of raised flags linked by classes."""
        parent: dict[int, int] = {}

        def find(x: int) -> int:
            while parent.setdefault(x, x) != x:
                parent[x] = parent[parent[x]]
                x = parent[x]
            return x

        for g in fire:
            first = min(g)
            for f in g:
                parent[find(f)] = find(first)
        clusters: dict[int, list[frozenset[int]]] = {}
        for g in sorted(fire, key=sorted):
            clusters.setdefault(find(min(g)), []).append(g)
        out: dict[frozenset[int], float] = {}
        for members in clusters.values():
            flags = sorted(set().union(*members))
            bit = {f: i for i, f in enumerate(flags)}
            exact = None
            if len(flags) <= MAX_EXACT_FLAGS:
                masks = [sum(1 << bit[f] for f in g) for g in members]
                exact = class_posteriors(masks, [fire[g] for g in members], len(flags))
            if exact is None:
                # Too many linked flags, or no exact explanation: each class gets, for its
                # least-shared flag, its share of that flag's total firing probability.
                share = {f: sum(fire[g] for g in members if f in g) for f in flags}
                exact = [min(fire[g] / share[f] for f in g) for g in members]
            out.update(zip(members, exact))
        return out

    def graph_for(self, key: bytes, plan: _PatternPlan, shots: int) -> tuple[pymatching.Matching, bool]:
        """A compiled graph for the pattern, and whether it is the scratch graph (restore afterwards)."""
        graph = self.graphs.get(key)
        if graph is not None:
            self.graphs.move_to_end(key)
            return graph, False
        if shots > 1 or key in self.seen:
            graph = self._with_absent()
            self._apply(graph, plan.updates)
            self.graphs[key] = graph
            while len(self.graphs) > self.cache_size:
                self.graphs.popitem(last=False)
            return graph, False
        self.seen[key] = None
        while len(self.seen) > 16 * self.cache_size:
            self.seen.popitem(last=False)
        if self._scratch is None:
            self._scratch = self._with_absent()
        self._apply(self._scratch, plan.updates)
        return self._scratch, True

    # decoding ----------------------------------------------------------

    def _run(self, graph: pymatching.Matching, events: np.ndarray, bit_packed: bool) -> np.ndarray:
        pred = graph.decode_batch(events, bit_packed_shots=bit_packed, bit_packed_predictions=bit_packed)
        want = self.width if bit_packed else self.num_observables
        if pred.shape[1] != want:
            fixed = np.zeros((pred.shape[0], want), dtype=pred.dtype)
            n = min(want, pred.shape[1])
            fixed[:, :n] = pred[:, :n]
            pred = fixed
        return np.asarray(pred, dtype=np.uint8)

    def decode(self, events: np.ndarray, bit_packed: bool) -> np.ndarray:
        events = np.asarray(events)
        shots = events.shape[0]
        if not len(self.flag_ids):
            out = self._run(self.base, events, bit_packed)
            return out if bit_packed else out.astype(bool)
        if bit_packed:
            events = events.astype(np.uint8, copy=False)
            raised = (events[:, self.flag_ids >> 3] >> (self.flag_ids & 7).astype(np.uint8)) & 1
            masked = np.ascontiguousarray(events & self.keep_packed[: events.shape[1]])
        else:
            events = events.astype(bool, copy=False)
            raised = events[:, self.flag_ids].astype(np.uint8)
            masked = np.ascontiguousarray(events & self.keep_bool)
        width = self.width if bit_packed else self.num_observables
        out = np.zeros((shots, width), dtype=np.uint8)
        keys = np.packbits(raised, axis=1, bitorder="little")
        patterns, inverse = np.unique(keys, axis=0, return_inverse=True)
        inverse = inverse.reshape(-1)
        order = np.argsort(inverse, kind="stable")
        bounds = np.concatenate(([0], np.cumsum(np.bincount(inverse, minlength=len(patterns)))))
        for k, pattern in enumerate(patterns):
            rows = order[bounds[k] : bounds[k + 1]]
            key = pattern.tobytes()
            group = masked[rows]
            if not pattern.any():
                out[rows] = self._run(self.base, group, bit_packed)
                continue
            plan = self.plan(key, [int(f) for f in self.flag_ids[np.flatnonzero(raised[rows[0]])]])
            if plan.updates:
                graph, scratch = self.graph_for(key, plan, len(rows))
                try:
                    pred = self._run(graph, group, bit_packed)
                finally:
                    if scratch:
                        self._restore(graph, plan.updates)
            else:
                pred = self._run(self.base, group, bit_packed)
            if plan.flip:
                if bit_packed:
                    pred ^= np.frombuffer(plan.flip.to_bytes(self.width, "little"), dtype=np.uint8)
                else:
                    pred ^= np.array([plan.flip >> i & 1 for i in range(self.num_observables)], dtype=np.uint8)
            out[rows] = pred
        return out if bit_packed else out.astype(bool)


class FlagMatching(Decoder):
    """Matching conditioned on each shot's raised flags (see the module docstring)."""

    name = "flag_matching"
    relative_cost = 250.0  # 16 at d = 3: most shots at d >= 5 raise a flag pattern of their own
    wants_decomposed: ClassVar[bool] = True
    #: Raised-flag patterns that keep their own compiled graph (least recently used dropped first).
    cache_size: ClassVar[int] = 256

    def __init__(self, **options: Any) -> None:
        super().__init__(**options)
        self._graphs: _FlagGraphs | None = None

    def compile(self, dem: stim.DetectorErrorModel) -> None:
        self._graphs = _FlagGraphs(dem, self.cache_size)

    def decode_batch(self, detection_events: np.ndarray, *, bit_packed: bool = True) -> np.ndarray:
        if self._graphs is None:
            raise RuntimeError("compile() the decoder before decoding")
        return self._graphs.decode(detection_events, bit_packed)

    @property
    def num_flags(self) -> int:
        """Flag detectors found in the compiled model."""
        if self._graphs is None:
            raise RuntimeError("compile() the decoder first")
        return len(self._graphs.flag_ids)

    def __getstate__(self) -> dict[str, Any]:
        # pymatching graphs do not pickle; workers recompile from the model.
        return {"options": self.options}

    def __setstate__(self, state: dict[str, Any]) -> None:
        self.options = state["options"]
        self._graphs = None
