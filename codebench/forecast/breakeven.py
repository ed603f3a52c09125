"""Break-even: the logical qubit's error per round against one idle physical qubit over the same round."""

from __future__ import annotations

from typing import Protocol, Sequence

import numpy as np

from codebench.forecast.result import BreakEven, BreakEvenRow
from codebench.noise.calibration import Device
from codebench.noise.device import twirled_idle


class RatedDistance(Protocol):
    """What break-even reads of a distance (a :class:`~codebench.forecast.result.DistanceForecast` has it)."""

    @property
    def distance(self) -> int: ...

    @property
    def per_round_rate(self) -> float | None: ...

    @property
    def high(self) -> float | None: ...

__all__ = ["RatedDistance", "break_even", "idle_error"]


def idle_error(t_us: float, t1_us: float, t2_us: float) -> float:
    """px + py + pz of the twirled idle channel over ``t_us`` (Tomita & Svore, PRA 90, 062320 (2014), Eqs. 9-10).

    >>> round(idle_error(1.0, 100.0, 100.0), 9)
    0.007462625
    """
    return float(sum(twirled_idle(t_us, t1_us, t2_us)))


def break_even(device: Device, round_us: float, rows: Sequence[RatedDistance],
               usable: Sequence[str] | None = None) -> BreakEven:
    """Each distance's per-round rate against the best and the median idle qubit of ``device`` over ``round_us``.

    The qubits compared: ``usable`` where given (a device with a coupling graph: its usable qubits, each
    with its own numbers or the defaults), else the listed qubits, else the defaults.
    """
    listed = ([(q, device.qubit(q)) for q in usable] if usable else list(device.qubits.items())) \
        or [("defaults", device.defaults)]
    errors = {qid: idle_error(round_us, cal.t1_us, cal.t2_us) for qid, cal in listed}
    best_id = min(errors, key=lambda q: errors[q])
    best = errors[best_id]
    median = float(np.median(list(errors.values())))
    per_distance = []
    for row in rows:
        eps, high = row.per_round_rate, row.high
        if eps is None:
            verdict = "unknown"
        elif eps < best:
            verdict = "beats the best idle qubit"
        elif eps < median:
            verdict = "beats the median idle qubit"
        else:
            verdict = "does not"
        per_distance.append(BreakEvenRow(
            distance=row.distance, per_round_rate=eps, verdict=verdict,
            beats_best=None if eps is None else bool(eps < best),
            beats_median=None if eps is None else bool(eps < median),
            beats_best_at_95=None if high is None else bool(high < best),
            beats_median_at_95=None if high is None else bool(high < median),
            ratio_to_best=None if eps is None else eps / best,
            ratio_to_median=None if eps is None else eps / median,
        ))
    return BreakEven(
        round_duration_us=round_us, idle_error_best=best, idle_error_median=median, best_qubit=best_id,
        best_qubit_t1_us=dict(listed)[best_id].t1_us, best_qubit_t2_us=dict(listed)[best_id].t2_us,
        qubits_considered=len(errors), distances=tuple(per_distance),
    )
