"""``codebench placements``: the candidate placements of a code on a device, ranked, optionally sampled.

Each candidate is ranked by the detector-error-model proxy of
:mod:`codebench.noise.placement` (both memory bases, rounds = d, the device's own numbers). With
``sample``, the shown candidates are also sampled directly: ``shots`` shots of the rounds = d memory
in the code's first basis, decoded with the family's default decoder, failures turned into a
per-round rate with a 95% Wilson interval (:mod:`codebench.stats`). Seeds are derived from the
given seed and the candidate's rank, so a run is reproducible.
"""

from __future__ import annotations

import math
import sys
from dataclasses import dataclass
from pathlib import Path
from typing import Mapping, Sequence

import numpy as np

from codebench.codes import CODE_FAMILIES
from codebench.decoders import get_decoder
from codebench.errors import ConfigError, DeviceFileError, not_allowed
from codebench.forecast.whatif import improve_device, place_device
from codebench.noise.calibration import Device, load_device
from codebench.noise.device import DeviceNoise
from codebench.noise.placement import Ranked
from codebench.stats import per_round, wilson_interval

__all__ = ["COLOUR_KEYS", "PlacementRow", "PlacementsReport", "placements_report", "placements_text",
           "sampled_failures"]

#: Per-qubit numbers the chip figure can colour by, with their units.
COLOUR_KEYS = {"t1_us": "T1 (us)", "t2_us": "T2 (us)", "readout_error": "readout error (probability)",
               "gate_1q_error": "one-qubit gate error (average infidelity)",
               "reset_error": "reset error (probability)"}


@dataclass(frozen=True)
class PlacementRow:
    """One shown candidate: its rank (1 = best), the proxy, and a sampled rate where asked."""

    rank: int
    qubits: tuple[str, ...]
    proxy: float
    weight: float
    shots: int = 0
    failures: int = 0
    per_round: float | None = None
    low: float | None = None
    high: float | None = None


@dataclass(frozen=True)
class PlacementsReport:
    device: Device
    code: str
    distance: int
    candidates: int
    found: int
    rows: tuple[PlacementRow, ...]
    chosen: tuple[str, ...]
    choice: str


def _shown(ranked: Sequence[Ranked], top: int) -> list[int]:
    """Indices shown: the ``top`` best, the median and the worst."""
    picks = list(range(min(top, len(ranked))))
    for extra in ((len(ranked) - 1) // 2, len(ranked) - 1):
        if extra not in picks:
            picks.append(extra)
    return picks


#: Choices made by ranking; any other ``choice`` names where an explicit placement came from.
RANKED_CHOICES = ("best", "worst", "median")


def placements_report(device_file: str | Path | Device, code: str, distance: int, *, top: int = 10,
                      sample: bool = False, shots: int = 20_000, seed: int = 1,
                      improve: Mapping[str, float] | None = None,
                      placement: str | Sequence[str] | None = None, progress: bool = False) -> PlacementsReport:
    """Rank the placements of ``code`` at ``distance`` on the device (see the module docstring)."""
    if code not in CODE_FAMILIES:
        raise ConfigError(not_allowed("--code", code, "one of " + ", ".join(repr(c) for c in CODE_FAMILIES)))
    family = CODE_FAMILIES[code]
    problem = family.distance_problem(distance)
    if problem is not None:
        raise ConfigError(not_allowed("--distance", distance, f"{problem} for {code}"))
    source = str(device_file) if not isinstance(device_file, Device) else "<device>"
    base = device_file if isinstance(device_file, Device) else load_device(device_file)
    device = place_device(improve_device(base, dict(improve or {}), source), placement, source)
    if not device.geometry.has_graph:
        raise DeviceFileError(f"{source}: [coupling] is missing; placements need the device's coupling graph "
                              "(edges, or lattice with rows and columns).")
    model = DeviceNoise(1.0, device=device.canonical_json())
    if progress:
        print(f"placements: ranking the placements of {code} d={distance} on {device.name}", file=sys.stderr,
              flush=True)
    ranked = model.ranked_placements(code, distance)
    chosen = model.placement(code, distance) or ranked[0].qubits
    rows = []
    gate_set = model.circuit_gate_set()
    ideal = family.ideal_circuit(distance, distance, family.bases[0], gate_set)
    model.checked_map(ideal, chosen)  # an explicit or hand-written placement must fit the chip too
    shown = _shown(ranked, top)
    for n, index in enumerate(shown):
        r = ranked[index]
        if sample and progress:
            print(f"placements: sampling {n + 1} of {len(shown)} ({shots:,} shots)", file=sys.stderr, flush=True)
        row = PlacementRow(index + 1, r.qubits, r.proxy, r.weight)
        if sample:
            circuit = model.decorate_on(ideal, r.qubits)
            failures = sampled_failures(circuit, family.default_decoder, shots, seed * 1_000_003 + index)
            low, high = wilson_interval(failures, shots)
            row = PlacementRow(index + 1, r.qubits, r.proxy, r.weight, shots, failures,
                               per_round(failures / shots, distance), per_round(low, distance),
                               per_round(high, distance))
        rows.append(row)
    if device.layout_map(code, distance) is not None:
        choice = "the [[layouts]] entry"
    else:
        choice = device.placement if isinstance(device.placement, str) else "the placement list"
    return PlacementsReport(device, code, distance, len(ranked), model.placements_found(code, distance),
                            tuple(rows), chosen, choice)


def sampled_failures(circuit: object, decoder_name: str, shots: int, seed: int) -> int:
    """Logical failures in ``shots`` shots of ``circuit`` decoded with ``decoder_name`` (stim sampler, seeded)."""
    import stim

    assert isinstance(circuit, stim.Circuit)
    decoder = get_decoder(decoder_name)()
    dem = circuit.detector_error_model(decompose_errors=decoder.wants_decomposed)
    decoder.compile(dem)
    dets, obs = circuit.compile_detector_sampler(seed=seed).sample(shots, separate_observables=True,
                                                                   bit_packed=True)
    predicted = decoder.decode_batch(dets, bit_packed=True)
    return int(np.count_nonzero((predicted[:, 0] ^ obs[:, 0]) & 1))


def placements_text(report: PlacementsReport) -> str:
    """The report as a terminal table."""
    dev = report.device
    usable = len([q for q in dev.geometry.nodes if q not in dev.geometry.dead_qubits])
    lines = [
        f"Placements of {report.code} d={report.distance} on {dev.name}: {report.found} found on "
        f"{usable} usable of {len(dev.geometry.nodes)} qubits"
        + (f", {report.candidates} ranked (those nearest the {report.choice if report.choice in RANKED_CHOICES else 'best'} end of the summed error numbers)"
           if report.candidates < report.found else ""),
        "proxy: sum over error mechanisms of exp(-W/2), W the weight (nats) of the lightest logical failure "
        "through each, both bases; lower is better",
        "",
    ]
    sampled = any(r.shots for r in report.rows)
    header = ["rank", "proxy", "W", *(["per round", "95% interval"] if sampled else []), "device qubits"]
    table = [header]
    for r in report.rows:
        cells = [str(r.rank), f"{r.proxy:.4g}", f"{r.weight:.2f}" if math.isfinite(r.weight) else "inf"]
        if sampled:
            cells += [f"{r.per_round:.3g}" if r.per_round is not None else "-",
                      f"[{r.low:.2g}, {r.high:.2g}]" if r.low is not None and r.high is not None else "-"]
        shown = ", ".join(r.qubits[:6]) + (f", ... ({len(r.qubits)})" if len(r.qubits) > 6 else "")
        table.append(cells + [shown])
    widths = [max(len(row[i]) for row in table) for i in range(len(header))]
    for n, row in enumerate(table):
        lines.append("  ".join(cell.ljust(w) for cell, w in zip(row, widths)).rstrip())
        if n == 0:
            lines.append("  ".join("-" * w for w in widths))
    lines += ["", f"chosen ({report.choice if report.choice in RANKED_CHOICES else 'given by ' + report.choice}): "
                  f"{', '.join(report.chosen)}"]
    if sampled:
        lines.append(f"sampled: {report.rows[0].shots:,} shots each of the rounds = d memory in the "
                     f"{CODE_FAMILIES[report.code].bases[0]} basis, decoder "
                     f"{CODE_FAMILIES[report.code].default_decoder}")
    return "\n".join(lines)
