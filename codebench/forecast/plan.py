"""The forecast's budget in counted work, so the plan never depends on timings.

Counted work is shots x detectors: what a batch costs to sample and decode
grows with both, and neither depends on the machine or its load. The planner
(which distances get which method, how many shots or failures each) reads
only counts and this work, so the same device, options and seed give the
same numbers on an idle or a busy machine and on 1 or 2 workers. Pool
start-up is not work and is never charged to a point.

``--budget-seconds`` is turned into work by the fixed ``WORK_PER_SECOND``
(measured once on a 2-core reference machine with ``scripts/bench_rare_events.py``;
the same constant everywhere, deliberately not re-measured per run), divided
by the decoder's declared ``relative_cost`` (its decoding time per
detector-shot against matching, also measured once), and the
time that work should take on this machine is printed before sampling. The
seconds also set a hard stop at ``HARD_LIMIT`` times the budget: sampling ends
there whatever the plan, the counts so far are kept, and the forecast names
the distances cut short (their intervals are wider but still valid, as every
stopping rule used depends only on counts in batch order).
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field

__all__ = ["HARD_LIMIT", "WORK_PER_SECOND", "WorkBudget"]

#: Detector-shots per second of sampling and matching on a 2-core reference machine (2 workers).
WORK_PER_SECOND = 1.5e8
#: Sampling stops at this multiple of ``--budget-seconds``, whatever the plan.
HARD_LIMIT = 3.0


@dataclass
class WorkBudget:
    """Counted work to spend, what is spent, and the wall-clock hard stop (``None``: none)."""

    total: float
    deadline: float | None = None
    spent: float = 0.0
    cut_short: list[str] = field(default_factory=list)
    #: Counted work per second on the reference machine with this forecast's decoder.
    rate: float = WORK_PER_SECOND

    @classmethod
    def from_request(cls, seconds: float, work: float | None, relative_cost: float = 1.0) -> WorkBudget:
        """``work`` when given (no hard stop: tests and reproducible runs), else seconds x the rate of the
        decoder (WORK_PER_SECOND / its relative cost)."""
        rate = WORK_PER_SECOND / max(relative_cost, 1e-9)
        if work is not None:
            return cls(float(work), rate=rate)
        return cls(float(seconds) * rate, deadline=time.monotonic() + HARD_LIMIT * float(seconds), rate=rate)

    def left(self) -> float:
        return max(0.0, self.total - self.spent)

    def share(self, remaining_parts: int) -> float:
        """An equal share of what is left among ``remaining_parts`` (what one does not use goes to the next)."""
        return self.left() / max(1, remaining_parts)

    def charge(self, work: float) -> None:
        self.spent += work

    def expired(self) -> bool:
        return self.deadline is not None and time.monotonic() > self.deadline

    def estimated_seconds(self, workers: int) -> float:
        """Wall time the whole budget would take on ``workers`` workers at the reference rate."""
        return self.total / (self.rate * max(1, workers) / 2.0)
