"""How much worse may the links between chips be? A surface-code patch across a seam of links.

The device (:func:`seam_device`): a (2d - 1) x (2d - 1) square grid, exactly one distance-d
rotated-surface diamond, so every placement straddles the seam between its two middle columns,
whose couplers are marked ``link = true`` with error ``ratio`` x the bulk two-qubit error.
Noise is made to resemble uniform circuit-level depolarizing noise of strength p in the bulk:
one-qubit gate infidelity 2p/3 (DEPOLARIZE1(p)), two-qubit 4p/5 (DEPOLARIZE2(p)), readout and reset
flips p, and T1 = T2 so long that idling adds nothing; link gates get DEPOLARIZE2(ratio x p).

Comparison: Ramette, Sinclair, Breuckmann, Vuletic, npj Quantum Information 10, 58 (2024) find that
a surface code tolerates interface noise about 14 times the bulk noise with little effect on
threshold and sub-threshold behaviour, and a threshold near 1% bulk with about 10% interface error.
Differences from their model: no idle errors here; our patch's schedule and CZ + H compilation; the
seam is a column of couplers through the middle of a rotated patch (about d of its gates per
round), and mwpm decodes with the true link probabilities. Compare the trend, not the numbers.
"""

from __future__ import annotations

import sys
from dataclasses import dataclass
from typing import Any, Sequence

from codebench.codes import CODE_FAMILIES
from codebench.forecast.placements import sampled_failures
from codebench.noise.calibration import Device, parse_device
from codebench.noise.device import DeviceNoise
from codebench.stats import per_round, wilson_interval

__all__ = ["LinkRow", "link_tolerance", "seam_device"]


def seam_device(distance: int, p: float, ratio: float) -> Device:
    """The two-chip test device of the module docstring."""
    side = 2 * distance - 1
    left = distance - 2
    pairs: list[dict[str, Any]] = [{"qubits": [f"q{r}_{left}", f"q{r}_{left + 1}"], "link": True,
                                    "gate_2q_error": min(0.5, ratio * 4 * p / 5)} for r in range(side)]
    return parse_device({
        "name": f"seam d={distance}", "native_2q": "cz",
        "defaults": {"t1_us": 1e12, "t2_us": 1e12, "gate_1q_error": 2 * p / 3, "gate_2q_error": 4 * p / 5,
                     "readout_error": p, "reset_error": p},
        "durations": {"gate_1q_ns": 25.0, "gate_2q_ns": 40.0, "measure_ns": 500.0, "reset_ns": 200.0},
        "coupling": {"lattice": "square", "rows": side, "columns": side},
        "pairs": pairs,
    })


@dataclass(frozen=True)
class LinkRow:
    distance: int
    ratio: float
    links_used: int
    shots: int
    failures: int
    per_round: float
    low: float
    high: float


def link_tolerance(distances: Sequence[int], ratios: Sequence[float], p: float, shots: int, seed: int = 1,
                   progress: bool = False) -> list[LinkRow]:
    """Per-round logical error of the Z memory (rounds = d) for each distance and link-to-bulk ratio."""
    family = CODE_FAMILIES["rotated_surface"]
    rows = []
    for d in distances:
        for ratio in ratios:
            device = seam_device(d, p, ratio)
            model = DeviceNoise(1.0, device=device.canonical_json())
            placed = model.placement("rotated_surface", d)
            assert placed is not None
            ideal = family.ideal_circuit(d, d, "Z", "cz")
            circuit = model.decorate_on(ideal, placed)
            used = sum(1 for pair in device.geometry.links if pair <= set(placed))
            if progress:
                print(f"links: d = {d}, link error {ratio:g} x bulk: {shots:,} shots", file=sys.stderr, flush=True)
            k = sampled_failures(circuit, "mwpm", shots, seed + 1000 * d + int(100 * ratio))
            low, high = wilson_interval(k, shots)
            rows.append(LinkRow(d, ratio, used, shots, k, per_round(k / shots, d), per_round(low, d),
                                per_round(high, d)))
    return rows
