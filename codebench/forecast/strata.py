"""Stratified sampling of one point: which numbers of faults w to sample, how many shots each, and running them.

The plan depends only on the device, the options, the seed and the counts
already drawn (never on timings), so a forecast gives the same numbers on any
machine load and any number of workers.

1. **Scan**: every w below the onset k0 = (d + 1) / 2 (a decoder that fails
   with fewer faults shows it there, and the onset is lowered), then a grid of
   w from k0 upwards (steps of 25%, up to mu + 6 sigma of W or 8 k0,
   whichever is larger; doubled up to three times while no failure is seen),
   ``SCAN_SHOTS`` shots each.
2. **Provisional spectrum**: :func:`codebench.forecast.rare_events.fit_spectrum`
   (two terms) on the scan; contributions P(W = w) f(w) locate the window of w
   that holds 99% of P_L.
3. **Strata**: every w of that window (thinned to at most ``MAX_WINDOW``
   values) plus the scan's w above it up to where f reaches 5% (they pin the
   spectrum's shape). Each stratum runs to ``FAILURE_TARGET`` failures or a
   common shot cap, the largest cap (at most twice the shots the provisional
   f(w) expects for the target) whose expected work (shots x detectors) fits
   in the distance's share of the budget. Strata expected to show fewer than
   ``MIN_EXPECTED`` failures at that cap are dropped from the bottom (the
   cap grows as they go) except the highest of them, which bounds f just
   below the measured range: the budget goes to the lowest w that can be
   measured, and the rarer ones keep their scan counts.

Every stratum's batches follow one fixed schedule (1,024, 2,048, 4,096, then
8,192 shots) with seeds from (seed, point, w, batch index), and a stratum's
counts are always a prefix of that schedule counted in batch order, so the scan's
shots are reused by step 3 and a larger budget only adds batches.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable

import numpy as np

from codebench.build import noisy_circuit
from codebench.decoders import get_decoder
from codebench.engine.executors import Executor
from codebench.engine.fault_sampling import FaultTable, fault_batch_seed
from codebench.forecast.rare_events import (
    StratifiedEstimate,
    fit_spectrum,
    log_symmetric,
    poisson_binomial,
    stratified_estimate,
    upper_bound_without_failures,
)
from codebench.forecast.tables import find_reusable, save_table
from codebench.records import BatchResult, BatchTask, Point

__all__ = ["FAILURE_TARGET", "PointStrata", "StrataRun", "plan_window", "sample_point"]

SCAN_SHOTS = 1024
FAILURE_TARGET = 100
MAX_WINDOW = 16
SCAN_STEP = 1.25
BATCH_SCHEDULE = (1024, 2048, 4096)
STEADY_BATCH = 8192
#: Spectrum fraction up to which strata above the dominant window are kept.
SHAPE_LIMIT = 0.05
#: Failures a stratum must be expected to show at the common cap to be sampled beyond the scan.
MIN_EXPECTED = 5
#: Most shots one stratum takes, whatever the budget (its batch bookkeeping stays small).
MAX_STRATUM_SHOTS = 20_000_000


def schedule_prefix(shots: int) -> list[int]:
    """Batch sizes of a stratum's first ``shots`` shots (whole batches, at least one).

    >>> schedule_prefix(7168), schedule_prefix(20000)
    ([1024, 2048, 4096], [1024, 2048, 4096, 8192])
    """
    sizes: list[int] = []
    total = 0
    index = 0
    while True:
        size = BATCH_SCHEDULE[index] if index < len(BATCH_SCHEDULE) else STEADY_BATCH
        if sizes and total + size > shots:
            return sizes
        sizes.append(size)
        total += size
        index += 1


#: Batch index of a stratum's batches: w in the high bits, so results name their stratum.
STRATUM_SHIFT = 32


@dataclass
class Stratum:
    """The batches of one w that have come back, and how many of them the plan counts."""

    faults: int
    batches: dict[int, BatchResult] = field(default_factory=dict)
    used: int = 0

    def prefix(self, sizes: list[int], target: int) -> tuple[int, bool]:
        """Batches counted under this schedule and target (batch order), and whether that is final."""
        failures = 0
        for index in range(len(sizes)):
            result = self.batches.get(index)
            if result is None:
                return index, False
            failures += result.failures
            if failures >= target:
                return index + 1, True
        return len(sizes), True

    def totals(self) -> tuple[int, int, float]:
        """Shots, failures and seconds of the counted batches."""
        chosen = [self.batches[i] for i in range(self.used)]
        return (sum(r.shots for r in chosen), sum(r.failures for r in chosen), sum(r.seconds for r in chosen))


@dataclass
class StrataRun:
    """Runs exactly-w batches of one point on an executor, in batch order, reusing what was drawn."""

    point_key: str
    params: dict[str, Any]
    seed: int
    executor: Executor
    stopped: Callable[[], bool]
    detectors: int
    strata: dict[int, Stratum] = field(default_factory=dict)

    def run(self, plan: dict[int, int], target: int | None) -> None:
        """Sample every stratum w of ``plan`` up to ``plan[w]`` shots, stopping early at ``target`` failures."""
        limit = target if target is not None else 1 << 62
        schedules = {w: schedule_prefix(shots) for w, shots in plan.items()}
        for w in plan:
            self.strata.setdefault(w, Stratum(w))
        in_flight: set[tuple[int, int]] = set()
        while not self.stopped():
            for w, sizes in schedules.items():
                stratum = self.strata[w]
                if stratum.prefix(sizes, limit)[1]:
                    continue
                mine = sum(1 for v, _ in in_flight if v == w)
                for index, size in enumerate(sizes):
                    if len(in_flight) >= self.executor.capacity or mine >= 2:
                        break
                    if index in stratum.batches or (w, index) in in_flight:
                        continue
                    seed = fault_batch_seed(self.seed, self.point_key, w, index, size)
                    self.executor.submit(BatchTask(self.point_key, self.params, (w << STRATUM_SHIFT) | index,
                                                   size, seed, faults=w))
                    in_flight.add((w, index))
                    mine += 1
            if not in_flight:
                break
            finished = self.executor.completed(timeout=1.0)
            for result in finished:
                w, index = result.batch_index >> STRATUM_SHIFT, result.batch_index & ((1 << STRATUM_SHIFT) - 1)
                in_flight.discard((w, index))
                self.strata[w].batches[index] = result
        if in_flight:  # stopped early: those batches are not waited for, and never come back
            self.executor.abandon()
        for w, sizes in schedules.items():
            self.strata[w].used = self.strata[w].prefix(sizes, limit)[0]

    def table(self) -> dict[int, tuple[int, int]]:
        """``{w: (shots, failures)}`` over the counted batches of every stratum."""
        out = {}
        for w, stratum in sorted(self.strata.items()):
            shots, failures, _ = stratum.totals()
            if shots:
                out[w] = (shots, failures)
        return out

    def counted_work(self) -> float:
        """Shots x detectors of the counted batches: what the budget is charged (batches that finished past
        a stratum's target are not counted, so the charge never depends on timing)."""
        return float(sum(n for n, _ in self.table().values())) * self.detectors


def scan_grid(onset: int, top: int) -> list[int]:
    """w values of the scan: onset, then steps of 25% up to ``top``.

    >>> scan_grid(3, 12)
    [3, 4, 5, 6, 8, 10, 12]
    """
    grid = [onset]
    while grid[-1] < top:
        grid.append(min(top, max(grid[-1] + 1, int(round(grid[-1] * SCAN_STEP)))))
    return grid


def plan_window(pmf: np.ndarray, spectrum_f: np.ndarray, onset: int) -> tuple[int, int]:
    """Smallest range [a, b] of w >= onset holding 99% of sum P(W = w) f(w)."""
    contributions = pmf * spectrum_f
    contributions[:onset] = 0.0
    total = contributions.sum()
    if total <= 0:
        return onset, onset
    cumulative = np.cumsum(contributions) / total
    a = int(np.searchsorted(cumulative, 0.005))
    b = int(np.searchsorted(cumulative, 0.995))
    return max(a, onset), max(b, onset)


def water_fill(expected: dict[int, float], work_per_shot: float, share: float) -> int:
    """Largest common shot cap c with sum_w min(expected_w, c) x work_per_shot <= share (at least SCAN_SHOTS)."""
    def spend(cap: float) -> float:
        return sum(min(e, cap) for e in expected.values()) * work_per_shot

    lo = float(SCAN_SHOTS)
    hi = min(float(MAX_STRATUM_SHOTS), max(float(SCAN_SHOTS), max(expected.values(), default=SCAN_SHOTS)))
    if spend(hi) <= share:
        return int(hi)
    for _ in range(60):
        mid = math.sqrt(lo * hi)
        lo, hi = (mid, hi) if spend(mid) <= share else (lo, mid)
    return int(lo)


@dataclass
class PointStrata:
    """What stratified sampling of one point gave: the counts per w, P(W = w), and the estimate."""

    table: dict[int, tuple[int, int]]
    pmf: np.ndarray
    tail: float
    mean_faults: float
    mechanisms: int
    observables: int
    work: float
    estimate: StratifiedEstimate | None
    upper_bound: float | None
    reused_from: str | None = None
    odds_spread: float | None = None


def sample_point(point: Point, seed: int, executor: Executor, share: float, say: Callable[[str], None],
                 stopped: Callable[[], bool] = lambda: False, library: Path | None = None,
                 source: str = "") -> PointStrata:
    """Stratified sampling and estimate of one point (any noise model) within ``share`` counted work.

    The detector error model is the one the engine's workers build for the
    point (decomposed when its decoder wants that), so the exactly-w shots are
    decoded by the same compiled decoder. With ``library`` (a folder), a
    stored f(w) table of proportional odds is reused and topped up, and the
    table is stored for later what-ifs (:mod:`codebench.forecast.tables`).
    """
    decoder_cls = get_decoder(point.decoder)
    table = FaultTable.from_dem(noisy_circuit(point).detector_error_model(decompose_errors=decoder_cls.wants_decomposed))
    run = StrataRun(point.key(seed), point.params(), seed, executor, stopped, table.num_detectors)
    structure = table.structure_digest()
    decoder_params = {"decoder": point.decoder, "options": dict(point.decoder_options), "code": point.code,
                      "distance": point.distance, "rounds": point.rounds, "basis": point.basis}
    reused = find_reusable(library, structure, decoder_params, seed, table.probabilities) if library else None
    if reused is not None:
        saved, spread = reused
        run.point_key = saved.seed_key
        run.strata = {w: Stratum(w, dict(batches)) for w, batches in saved.batches.items()}
        say(f"d = {point.distance}: reusing the f(w) table of {saved.source or 'an earlier forecast'} "
            f"(odds proportional within {spread:.2%})")
    pmf, tail, log_e = plan_and_sample(run, table.probabilities, point.distance, share, say)
    if library is not None:
        save_table(library, structure, decoder_params, seed, run.point_key,
                   saved.probabilities if reused is not None else table.probabilities,
                   {w: s.batches for w, s in run.strata.items()}, saved.source if reused is not None else source)
    counts = run.table()
    mean = float(table.probabilities.sum())
    estimate = None
    upper = None
    if any(k for _, k in counts.values()):
        estimate = stratified_estimate(pmf, tail, counts, point.distance, table.num_observables, seed=seed,
                                       log_e=log_e)
    else:
        upper = upper_bound_without_failures(pmf, tail, counts)
    return PointStrata(counts, pmf, tail, mean, int(table.probabilities.size), table.num_observables,
                       run.counted_work(), estimate, upper, None if reused is None else (reused[0].source or "earlier"),
                       None if reused is None else reused[1])


def plan_and_sample(run: StrataRun, probabilities: np.ndarray, distance: int, share: float,
                    say: Callable[[str], None]) -> tuple[np.ndarray, float, np.ndarray]:
    """Scan, choose the strata, sample them; returns P(W = w) (w = 0..w_max), its tail bound, and
    ln e_w of the odds (:func:`codebench.forecast.rare_events.log_symmetric`) over the same w."""
    mean = float(probabilities.sum())
    sigma = math.sqrt(float(np.sum(probabilities * (1 - probabilities))))
    onset = (distance + 1) // 2
    top = max(int(math.ceil(mean + 6 * sigma)) + 1, 8 * onset)
    n_mech = probabilities.size
    for _ in range(4):
        top = min(top, n_mech)
        # Below the onset too: a decoder that fails with fewer than (d + 1) / 2 faults shows it there.
        grid = list(range(1, onset)) + scan_grid(onset, top)
        say(f"d = {distance}: scanning w = {grid[0]}..{grid[-1]} ({len(grid)} strata, {SCAN_SHOTS:,} shots each)")
        run.run({w: SCAN_SHOTS for w in grid}, None)
        if run.stopped() or any(f for _, f in run.table().values()) or top >= n_mech:
            break
        top *= 2
    table = run.table()
    w_max = int(min(n_mech, max(max(table, default=onset), math.ceil(mean + 12 * sigma) + 10)))
    pmf, tail = poisson_binomial(probabilities, w_max)
    log_e = log_symmetric(probabilities, w_max)
    failing = {w: v for w, v in table.items() if v[1] > 0}
    if not failing or run.stopped():
        return pmf, tail, log_e
    ws = np.array(sorted(table), dtype=np.int64)
    fit = fit_spectrum(ws, [table[w][0] for w in ws], [table[w][1] for w in ws],
                       min(onset, min(failing)), 2, 0.5, log_e=log_e)
    all_w = np.arange(w_max + 1)
    f_all = fit(all_w)
    a, b = plan_window(pmf, f_all, fit.k0)
    window = list(range(a, b + 1))
    if len(window) > MAX_WINDOW:
        step = math.ceil(len(window) / MAX_WINDOW)
        window = sorted(set(window[::step]) | {b})
    above = [w for w in table if w > b and fit(np.array([w]))[0] <= max(SHAPE_LIMIT, float(f_all[b]))]
    strata = sorted(set(window) | set(above))
    # Twice the expected shots: the failure target, not the cap, should usually end a stratum.
    f_of = {w: max(float(fit(np.array([w]))[0]), 1e-300) for w in strata}
    left = max(0.0, share - run.counted_work())
    cap = water_fill({w: 2 * FAILURE_TARGET / f_of[w] for w in strata}, run.detectors, left)
    # Strata too rare to show MIN_EXPECTED failures at the cap add little but zeros: drop them from the
    # bottom, so the budget goes to the lowest strata that can be measured (the spectrum's fit then
    # extrapolates from as close to the rare w as the budget allows).
    dropped: list[int] = []
    while len(strata) > 1 and f_of[strata[0]] * cap < MIN_EXPECTED:
        dropped.append(strata.pop(0))
        cap = water_fill({w: 2 * FAILURE_TARGET / f_of[w] for w in strata + dropped[-1:]}, run.detectors, left)
    # The highest dropped stratum stays: its count (few or no failures) bounds f just below the measured w.
    strata = sorted(strata + dropped[-1:])
    say(f"d = {distance}: {len(strata)} strata w = {strata[0]}..{strata[-1]} (P_L dominated by w = {a}..{b}), "
        f"up to {FAILURE_TARGET} failures or {cap:,} shots each")
    run.run({w: cap for w in strata}, FAILURE_TARGET)
    return pmf, tail, log_e
