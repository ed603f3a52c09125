"""Device calibration files: read, validate, and turn into per-qubit numbers.

A device file (TOML or JSON) in codebench's own schema::

    name = "LQ-7 (current generation)"
    native_2q = "cz"                    # cz | cx

    [defaults]                          # used where no per-qubit / per-pair value is given
    t1_us = 100.0
    t2_us = 90.0                        # T2 <= 2 T1
    gate_1q_error = 5e-4                # average gate infidelity r
    gate_2q_error = 7e-3
    readout_error = 1.5e-2              # or readout_error_0to1 and readout_error_1to0
    reset_error = 2e-3

    [durations]
    gate_1q_ns = 25.0
    gate_2q_ns = 40.0
    measure_ns = 600.0
    reset_ns = 200.0

    [[qubits]]                          # optional, any of the defaults' keys per qubit
    id = "q0"
    t1_us = 120.0

    [[pairs]]                           # optional
    qubits = ["q0", "q1"]
    gate_2q_error = 6e-3

    [coupling]                          # optional: the device's coupling graph
    edges = [["q0", "q1"], ["q1", "q2"]]  # or lattice = "square", rows = 7, columns = 7 (ids q<r>_<c>;
                                        # a [[qubits]] entry's site = "q2_3" gives that qubit its id)

    [[layouts]]                         # optional: code qubit i sits on device qubit qubits[i]
    code = "repetition"
    distance = 3
    qubits = ["q0", "q1", "q2", "q3", "q4"]

    [model]
    gate_error_includes_decoherence = true

Every problem raises :class:`~codebench.errors.DeviceFileError` with one line
naming the file, the key path, the value and what is allowed.
"""

from __future__ import annotations

import hashlib
import json
import math
import tomllib
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from codebench.codes import CODE_FAMILIES
from codebench.errors import DeviceFileError, not_allowed
from codebench.noise.geometry import (
    Geometry,
    named_sites,
    pair_marks,
    parse_coupling,
    qubit_marks,
    zz_rate,
)

QUBIT_KEYS = ("t1_us", "t2_us", "gate_1q_error", "readout_error", "readout_error_0to1",
              "readout_error_1to0", "reset_error")
DEFAULT_KEYS = QUBIT_KEYS + ("gate_2q_error",)
DURATION_KEYS = ("gate_1q_ns", "gate_2q_ns", "measure_ns", "reset_ns")
TOP_KEYS = ("name", "native_2q", "defaults", "durations", "qubits", "pairs", "coupling", "layouts", "model",
            "placement")
PAIR_KEYS = ("qubits", "gate_2q_error", "gate_2q_ns", "usable", "link", "zz_khz")
PLACEMENT_CHOICES = ("best", "worst", "median")
_PROBABILITY = "a probability in [0, 0.5]"


@dataclass(frozen=True)
class QubitCalibration:
    """Numbers of one device qubit (times in microseconds)."""

    t1_us: float
    t2_us: float
    gate_1q_error: float
    readout_error: float
    reset_error: float


@dataclass(frozen=True)
class Device:
    """A validated device. ``data`` is the canonical content (what a point key hashes)."""

    name: str
    native_2q: str
    defaults: QubitCalibration
    gate_2q_error: float
    durations_ns: dict[str, float]
    qubits: dict[str, QubitCalibration]
    pairs: dict[frozenset[str], float]
    edges: frozenset[frozenset[str]] | None
    layouts: dict[tuple[str, int], tuple[str, ...]]
    gate_error_includes_decoherence: bool
    data: dict[str, Any]
    #: Coupling graph, usable marks and per-coupler numbers (empty for a device without a graph).
    geometry: Geometry = Geometry()
    #: Which placement of a code the device's circuits use when no [[layouts]] entry gives one:
    #: "best" | "worst" | "median" by the logical-error proxy, or an explicit list of device qubits.
    placement: str | tuple[str, ...] = "best"

    def canonical_json(self) -> str:
        return json.dumps(self.data, sort_keys=True, separators=(",", ":"))

    def digest(self) -> str:
        return hashlib.sha256(self.canonical_json().encode()).hexdigest()[:12]

    def file_digest(self) -> str:
        """:meth:`digest` of the device as its file gives it: without the ``[[layouts]]`` entries a placement
        wrote (``chosen_by``), so every distance placed on one device file shows the same digest."""
        data = dict(self.data)
        given = [entry for entry in data.get("layouts", []) if "chosen_by" not in entry]
        if given:
            data["layouts"] = given
        else:
            data.pop("layouts", None)
        return hashlib.sha256(json.dumps(data, sort_keys=True, separators=(",", ":")).encode()).hexdigest()[:12]

    def qubit(self, device_qubit: str | None) -> QubitCalibration:
        if device_qubit is None:
            return self.defaults
        return self.qubits.get(device_qubit, self.defaults)

    def coupler_ns(self, a: str | None, b: str | None) -> float:
        """Duration of the two-qubit gate on the coupler a-b (its own where given, else the default)."""
        if a is None or b is None:
            return self.durations_ns["gate_2q_ns"]
        return self.geometry.pair_ns.get(frozenset((a, b)), self.durations_ns["gate_2q_ns"])

    def pair_error(self, a: str | None, b: str | None) -> float:
        if a is None or b is None:
            return self.gate_2q_error
        return self.pairs.get(frozenset((a, b)), self.gate_2q_error)

    def layout_map(self, code: str, distance: int) -> tuple[str, ...] | None:
        return self.layouts.get((code, distance))

    def all_qubits(self) -> list[QubitCalibration]:
        """Every listed qubit, or the defaults when the file lists none."""
        return list(self.qubits.values()) or [self.defaults]


class _Reader:
    """Validation with the file name in front of every message."""

    def __init__(self, source: str) -> None:
        self.source = source

    def fail(self, path: str, value: Any, allowed: str) -> DeviceFileError:
        return DeviceFileError(f"{self.source}: " + not_allowed(path, value, allowed))

    def keys(self, table: Any, path: str, allowed: tuple[str, ...]) -> dict[str, Any]:
        if not isinstance(table, dict):
            raise self.fail(path, table, "a table")
        for key in table:
            if key not in allowed:
                where = f"{path}.{key}" if path else key
                raise DeviceFileError(f"{self.source}: {where} is not a known key; allowed keys: {', '.join(allowed)}.")
        return table

    def number(self, value: Any, path: str, allowed: str, ok: Any) -> float:
        if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value) or not ok(value):
            raise self.fail(path, value, allowed)
        return float(value)

    def probability(self, value: Any, path: str) -> float:
        return self.number(value, path, _PROBABILITY, lambda v: 0 <= v <= 0.5)

    def positive(self, value: Any, path: str, unit: str) -> float:
        return self.number(value, path, f"a positive number ({unit})", lambda v: v > 0)

    def qubit_values(self, table: dict[str, Any], path: str, base: dict[str, float] | None) -> dict[str, float]:
        out = dict(base or {})
        for key in ("t1_us", "t2_us"):
            if key in table:
                out[key] = self.positive(table[key], f"{path}.{key}", "microseconds")
        for key in ("gate_1q_error", "reset_error", "gate_2q_error"):
            if key in table:
                out[key] = self.probability(table[key], f"{path}.{key}")
        if "readout_error" in table and ("readout_error_0to1" in table or "readout_error_1to0" in table):
            raise DeviceFileError(f"{self.source}: {path} gives readout_error and the conditional readout "
                                  "errors; give one or the other.")
        if "readout_error" in table:
            out["readout_error"] = self.probability(table["readout_error"], f"{path}.readout_error")
        conditional = [k for k in ("readout_error_0to1", "readout_error_1to0") if k in table]
        if conditional:
            if len(conditional) != 2:
                raise DeviceFileError(f"{self.source}: {path} needs both readout_error_0to1 and readout_error_1to0.")
            p01 = self.number(table["readout_error_0to1"], f"{path}.readout_error_0to1", "a probability in [0, 1]",
                              lambda v: 0 <= v <= 1)
            p10 = self.number(table["readout_error_1to0"], f"{path}.readout_error_1to0", "a probability in [0, 1]",
                              lambda v: 0 <= v <= 1)
            # Symmetric flip = mean of the two conditional errors (common practice).
            out["readout_error"] = self.probability((p01 + p10) / 2, f"{path}.readout_error (mean of 0to1 and 1to0)")
        if "t1_us" in out and "t2_us" in out and out["t2_us"] > 2 * out["t1_us"] * (1 + 1e-12):
            raise self.fail(f"{path}.t2_us", out["t2_us"], f"at most 2 T1 = {2 * out['t1_us']:g} us (T2 <= 2 T1)")
        return out


def parse_device(data: Any, source: str = "<dict>") -> Device:
    """Validate a parsed device table; raises :class:`DeviceFileError`."""
    r = _Reader(source)
    top = r.keys(data, "", TOP_KEYS)
    name = top.get("name")
    if not isinstance(name, str) or not name.strip():
        raise r.fail("name", name, "a non-empty string")
    native = top.get("native_2q", "cz")
    if native not in ("cz", "cx"):
        raise r.fail("native_2q", native, "'cz' or 'cx'")
    if "defaults" not in top:
        raise DeviceFileError(f"{source}: defaults is required (a table with {', '.join(DEFAULT_KEYS[:4])}, ...).")
    defaults_table = r.keys(top["defaults"], "defaults", DEFAULT_KEYS + ("zz_khz",))
    defaults = r.qubit_values(defaults_table, "defaults", None)
    for key in ("t1_us", "t2_us", "gate_1q_error", "gate_2q_error", "readout_error", "reset_error"):
        if key not in defaults:
            raise DeviceFileError(f"{source}: defaults.{key} is required.")
    durations_table = r.keys(top.get("durations"), "durations", DURATION_KEYS)
    durations: dict[str, float] = {}
    for key in DURATION_KEYS:
        if key not in durations_table:
            raise DeviceFileError(f"{source}: durations.{key} is required (nanoseconds).")
        durations[key] = r.positive(durations_table[key], f"durations.{key}", "nanoseconds")

    generated = None
    if "coupling" in top:
        coupling_table = r.keys(top["coupling"], "coupling", ("edges", "lattice", "rows", "columns"))
        generated = parse_coupling(coupling_table, r.fail, lambda key: r.fail(f"coupling.{key}", key, "a key"))
    raw_qubits = top.get("qubits", [])
    if not isinstance(raw_qubits, list):
        raise r.fail("qubits", raw_qubits, "an array of tables ([[qubits]])")
    if generated is not None:
        generated = named_sites(generated, raw_qubits, r.fail)
    lattice_ids = set(generated[0]) if generated is not None else set()

    qubits: dict[str, QubitCalibration] = {}
    for i, entry in enumerate(raw_qubits):
        path = f"qubits[{i}]"
        table = r.keys(entry, path, ("id",) + QUBIT_KEYS + ("x", "y", "usable", "site"))
        qid = table.get("id")
        if not isinstance(qid, str) or not qid:
            raise r.fail(f"{path}.id", qid, "a non-empty string")
        if "site" in table and generated is None:
            raise r.fail(f"{path}.site", table["site"], "a site only on a generated lattice ([coupling] lattice = ...)")
        if generated is not None and qid not in lattice_ids:
            raise r.fail(f"{path}.id", qid, f"a qubit of the {top['coupling']['lattice']} lattice (q<row>_<column>"
                         + (", b<row>_<column> for bridges" if top["coupling"]["lattice"] == "heavy_hex" else "")
                         + ", or a name with site = one of them)")
        if qid in qubits:
            raise r.fail(f"{path}.id", qid, "an id no earlier qubit uses")
        values = r.qubit_values(table, path, {k: v for k, v in defaults.items() if k != "gate_2q_error"})
        qubits[qid] = _calibration(values)

    def known(qid: Any, path: str) -> str:
        if generated is not None and (not isinstance(qid, str) or qid not in lattice_ids):
            raise r.fail(path, qid, "the id of a qubit of the [coupling] lattice")
        if not isinstance(qid, str) or (qubits and generated is None and qid not in qubits):
            raise r.fail(path, qid, "the id of a qubit listed under [[qubits]]" if qubits else "a qubit id")
        return qid

    pairs: dict[frozenset[str], float] = {}
    pair_entry: dict[frozenset[str], int] = {}
    marks: dict[frozenset[str], dict[str, Any]] = {}
    raw_pairs = top.get("pairs", [])
    if not isinstance(raw_pairs, list):
        raise r.fail("pairs", raw_pairs, "an array of tables ([[pairs]])")
    for i, entry in enumerate(raw_pairs):
        path = f"pairs[{i}]"
        table = r.keys(entry, path, PAIR_KEYS)
        ends = table.get("qubits")
        if not isinstance(ends, list) or len(ends) != 2 or ends[0] == ends[1]:
            raise r.fail(f"{path}.qubits", ends, "a list of two different qubit ids")
        a, b = known(ends[0], f"{path}.qubits[0]"), known(ends[1], f"{path}.qubits[1]")
        if len(table) == 1:
            raise DeviceFileError(f"{source}: {path}.gate_2q_error is required.")
        if frozenset((a, b)) in pair_entry:
            raise r.fail(f"{path}.qubits", ends, "a pair no earlier [[pairs]] entry gives")
        if "gate_2q_error" in table:
            pairs[frozenset((a, b))] = r.probability(table["gate_2q_error"], f"{path}.gate_2q_error")
        marks[frozenset((a, b))] = pair_marks(table, path, r.fail, r.positive)
        pair_entry[frozenset((a, b))] = i

    edges: frozenset[frozenset[str]] | None = None
    if generated is not None:
        edges = frozenset(frozenset(e) for e in generated[2])
    elif "coupling" in top:
        raw_edges = top["coupling"].get("edges")
        if not isinstance(raw_edges, list):
            raise r.fail("coupling.edges", raw_edges, "a list of [qubit, qubit] pairs")
        found = set()
        for i, edge in enumerate(raw_edges):
            if not isinstance(edge, list) or len(edge) != 2 or edge[0] == edge[1]:
                raise r.fail(f"coupling.edges[{i}]", edge, "a pair of two different qubit ids")
            found.add(frozenset((known(edge[0], f"coupling.edges[{i}][0]"), known(edge[1], f"coupling.edges[{i}][1]"))))
        edges = frozenset(found)
    if edges is not None:
        for pair, i in pair_entry.items():
            if pair not in edges:
                raise r.fail(f"pairs[{i}].qubits", raw_pairs[i]["qubits"], "an edge of [coupling]")
    else:
        for pair, i in pair_entry.items():
            if marks[pair]:
                raise r.fail(f"pairs[{i}]", sorted(marks[pair]), "coupler marks (usable, link, gate_2q_ns, "
                             "zz_khz) only on a device with a [coupling] graph")
    geometry = _geometry(generated, edges, raw_qubits, qubits, marks,
                         zz_rate(defaults_table.get("zz_khz", 0.0), "defaults.zz_khz", r.fail), r)
    placement = _placement(top.get("placement", "best"), known, r)

    layouts: dict[tuple[str, int], tuple[str, ...]] = {}
    raw_layouts = top.get("layouts", [])
    if not isinstance(raw_layouts, list):
        raise r.fail("layouts", raw_layouts, "an array of tables ([[layouts]])")
    for i, entry in enumerate(raw_layouts):
        path = f"layouts[{i}]"
        table = r.keys(entry, path, ("code", "distance", "qubits", "chosen_by"))
        if "chosen_by" in table and table["chosen_by"] not in PLACEMENT_CHOICES + ("placement",):
            raise r.fail(f"{path}.chosen_by", table["chosen_by"], "best, worst, median or placement (how "
                         "codebench chose the qubits; leave it out of hand-written layouts)")
        code, distance, mapped = table.get("code"), table.get("distance"), table.get("qubits")
        if not isinstance(code, str) or code not in CODE_FAMILIES:
            raise r.fail(f"{path}.code", code, "one of " + ", ".join(repr(c) for c in CODE_FAMILIES))
        if isinstance(distance, bool) or not isinstance(distance, int):
            raise r.fail(f"{path}.distance", distance, f"an integer (a distance of {code})")
        problem = CODE_FAMILIES[code].distance_problem(distance)
        if problem is not None:
            raise r.fail(f"{path}.distance", distance, f"{problem} for {code}")
        if (code, distance) in layouts:
            raise r.fail(f"{path}.distance", distance, f"a distance no earlier {code} layout uses")
        if not isinstance(mapped, list) or not mapped:
            raise r.fail(f"{path}.qubits", mapped, "a list of device qubit ids, one per code qubit")
        ids = tuple(known(q, f"{path}.qubits[{j}]") for j, q in enumerate(mapped))
        if len(set(ids)) != len(ids):
            raise r.fail(f"{path}.qubits", mapped, "distinct device qubits")
        # Checked here, not when a circuit is built, so nothing is written before the message.
        needed = CODE_FAMILIES[code].qubit_count(distance)
        if len(ids) != needed:
            raise r.fail(f"{path}.qubits", f"{len(ids)} qubits",
                         f"{needed} device qubits, one per qubit of {code} d={distance}")
        layouts[(code, distance)] = ids

    model = r.keys(top.get("model", {}), "model", ("gate_error_includes_decoherence",))
    includes = model.get("gate_error_includes_decoherence", True)
    if not isinstance(includes, bool):
        raise r.fail("model.gate_error_includes_decoherence", includes, "true or false")

    return Device(
        name=name.strip(), native_2q=native, defaults=_calibration(defaults),
        gate_2q_error=defaults["gate_2q_error"], durations_ns=durations, qubits=qubits, pairs=pairs,
        edges=edges, layouts=layouts, gate_error_includes_decoherence=includes, data=_plain(top),
        geometry=geometry, placement=placement,
    )


def _geometry(generated: Any, edges: frozenset[frozenset[str]] | None, raw_qubits: list[Any],
              qubits: dict[str, QubitCalibration], marks: dict[frozenset[str], dict[str, Any]],
              zz_default: float, r: _Reader) -> Geometry:
    """The device's :class:`Geometry` from the parsed coupling graph, qubit entries and pair marks."""
    coords, dead = qubit_marks(raw_qubits, generated is not None, r.fail)
    if edges is None:
        if coords or dead:
            raise r.fail("qubits", "x / y / usable", "qubit coordinates and usable marks only on a device with "
                         "a [coupling] graph")
        return Geometry(zz_default_khz=zz_default)
    if generated is not None:
        nodes = list(generated[0])
        coords = dict(generated[1])
    else:
        nodes = list(qubits)
        for edge in sorted(edges, key=sorted):
            nodes += [q for q in sorted(edge) if q not in nodes]
    return Geometry(
        nodes=tuple(nodes), edges=edges, coords=coords, dead_qubits=frozenset(dead),
        dead_pairs=frozenset(p for p, m in marks.items() if m.get("usable") is False),
        pair_ns={p: m["gate_2q_ns"] for p, m in marks.items() if "gate_2q_ns" in m},
        links=frozenset(p for p, m in marks.items() if m.get("link")),
        zz_khz={p: m["zz_khz"] for p, m in marks.items() if "zz_khz" in m}, zz_default_khz=zz_default,
    )


def _placement(value: Any, known: Any, r: _Reader) -> str | tuple[str, ...]:
    allowed = "'best', 'worst', 'median' or a list of device qubit ids (one per code qubit)"
    if isinstance(value, str):
        if value not in PLACEMENT_CHOICES:
            raise r.fail("placement", value, allowed)
        return value
    if not isinstance(value, list) or not value:
        raise r.fail("placement", value, allowed)
    ids = tuple(known(q, f"placement[{j}]") for j, q in enumerate(value))
    if len(set(ids)) != len(ids):
        raise r.fail("placement", value, "distinct device qubits")
    return ids


def _calibration(values: dict[str, float]) -> QubitCalibration:
    return QubitCalibration(values["t1_us"], values["t2_us"], values["gate_1q_error"], values["readout_error"],
                            values["reset_error"])


def _plain(value: Any) -> Any:
    """JSON-safe copy (TOML dates and the like become strings)."""
    return json.loads(json.dumps(value, sort_keys=True, default=str))


def load_device(path: str | Path) -> Device:
    """Read and validate the device file at ``path`` (``.toml`` or ``.json``)."""
    file = Path(path)
    source = str(path)
    if file.is_dir():
        raise DeviceFileError(f"device file {source!r} is a folder; give a device file (TOML or JSON).")
    if not file.is_file():
        raise DeviceFileError(f"device file {source!r} does not exist.")
    try:
        raw = file.read_bytes().decode("utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise DeviceFileError(f"device file {source!r} cannot be read: {exc}".replace("\n", " ")) from None
    try:
        data = json.loads(raw) if file.suffix.lower() == ".json" else tomllib.loads(raw)
    except (json.JSONDecodeError, tomllib.TOMLDecodeError) as exc:
        kind = "JSON" if file.suffix.lower() == ".json" else "TOML"
        raise DeviceFileError(f"{source}: not valid {kind}: {exc}".replace("\n", " ")) from None
    return parse_device(data, source)


def device_from_json(text: str) -> Device:
    """Rebuild a device from :meth:`Device.canonical_json` (what points carry to workers)."""
    return parse_device(json.loads(text), "<point>")
