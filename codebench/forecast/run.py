"""The forecast: per basis and distance, choose a method, sample, estimate; then Lambda, targets, break-even.

Method per distance (``auto``), decided from counts only:

1. A pilot at the device's own noise (s = 1): ``PILOT_SHOTS`` shots, stopping
   at ``PILOT_FAILURES`` failures.
2. **direct** when ``DIRECT_MIN_FAILURES`` failures at the pilot's rate (its
   Wilson lower bound, so a lucky pilot does not oversell direct sampling) fit
   in the distance's share of the counted work; the point is then sampled to
   ``DIRECT_FAILURES`` failures or the share.
3. **stratified** otherwise (:mod:`codebench.forecast.strata`).

``--method direct|stratified|extrapolated`` forces one method; the raised-noise
power law (``extrapolated``) is never chosen by ``auto``: it assumes the
power law holds between the raised scales and the device's own noise, where
the stratified estimate assumes nothing of the kind wherever it samples the
dominant fault counts (its coverage is measured at d = 3 and 5 far below
threshold only; see the README).

The work budget (:mod:`codebench.forecast.plan`) is split equally over the
remaining (basis, distance) pairs, each getting what earlier ones left.

Several bases (``--basis both``): each basis is forecast on its own and the
logical qubit fails in a round when either basis fails: eps = 1 - (1 - eps_Z)(1 - eps_X)
(independent bases, common practice); its interval combines the ends of the
two intervals (conservative) and its var(ln eps) comes from the delta method.

Round duration: :meth:`codebench.noise.device.DeviceNoise.round_duration_ns`
of the memory circuit. The logical error per second is eps / round duration.
Decoder speed: ``decode_us_per_round`` from the pilot at s = 1 on one worker.
Break-even: :func:`codebench.forecast.breakeven.break_even`.
"""

from __future__ import annotations

import json
import math
import os
import sys
import tempfile
import time
from dataclasses import dataclass
from pathlib import Path
from typing import Callable, Mapping, Sequence

from codebench.codes import CODE_FAMILIES
from codebench.decoders import get_decoder
from codebench.engine.executors import Executor, make_executor
from codebench.engine.local import leave_if_a_worker_imports_main
from codebench.errors import ConfigError, OutputError, RunFault, not_allowed
from codebench.files import make_folder
from codebench.forecast import strata as strata_plan
from codebench.forecast.breakeven import break_even
from codebench.forecast.details import MethodDetails
from codebench.forecast.estimators import (
    Estimate,
    constant_lambda_problem,
    direct_estimate,
    lambda_summary,
    stratified_row,
    targets,
)
from codebench.forecast.extrapolation import sample_raised, scale_cap
from codebench.forecast.plan import HARD_LIMIT, WorkBudget
from codebench.forecast.request import (
    DEFAULT_DISTANCES,
    DEFAULT_SEED,
    DEFAULT_TARGETS,
    ForecastRequest,
    parse_bases,
)
from codebench.forecast.result import (
    BudgetSummary,
    DistanceForecast,
    ForecastResult,
    plain,
)
from codebench.forecast.sampling import Sample, Sampler
from codebench.forecast.whatif import improve_device, place_device
from codebench.layout import Basis
from codebench.noise.calibration import Device, load_device
from codebench.noise.device import DeviceNoise
from codebench.results.export import decode_us_per_round
from codebench.stats import wilson_interval

__all__ = ["CAUTIONS", "forecast", "run_forecast"]

CAUTIONS = (
    "A model-based projection: it uses only the numbers in the device file and the circuit-level "
    "noise model derived from them.",
    "Not modelled: leakage, crosstalk, correlated and burst errors, non-Markovian noise, and drift of "
    "the calibration over time.",
    "Defer to measured logical-qubit experiments on the device wherever they exist.",
)

PILOT_SHOTS = 7168               # 1024 + 2048 + 4096: a prefix of the batch schedule, reused later
PILOT_FAILURES = 10
DIRECT_MIN_FAILURES = 100
DIRECT_FAILURES = 1000
#: Most shots a direct point takes, whatever the budget (the engine lists a point's batches up front).
MAX_DIRECT_SHOTS = 1_000_000_000


@dataclass
class Context:
    """What every basis of one forecast shares."""

    request: ForecastRequest
    device: Device
    store: Path
    device_file: Path
    executor: Executor
    budget: WorkBudget
    notes: list[str]
    placed: dict[int, tuple[str, ...]]


def forecast(
    device: Device | str | os.PathLike[str],
    *,
    code: str = "rotated_surface",
    distances: Sequence[int] = DEFAULT_DISTANCES,
    basis: str | Sequence[str] = "Z",
    decoder: str | None = None,
    targets: Sequence[float] = DEFAULT_TARGETS,
    budget_seconds: float = 60.0,
    work: float | None = None,
    workers: int | None = None,
    seed: int = DEFAULT_SEED,
    out: str | os.PathLike[str] | None = None,
    improve: Mapping[str, float] | None = None,
    method: str | Mapping[int, str] = "auto",
    progress: bool = False,
    executor_factory: Callable[[int], Executor] | None = None,
    placement: str | Sequence[str] | None = None,
) -> ForecastResult:
    """Forecast a device's logical qubit; see :class:`ForecastRequest` for the parameters.

    ``basis`` is ``"Z"``, ``"X"``, ``"Z,X"`` or ``"both"``. Returns a
    :class:`~codebench.forecast.result.ForecastResult`: per distance the
    per-round rate with its interval and method, Lambda, the target
    distances, break-even, the budget and notes; its ``to_json()`` is the
    document of ``forecast.json`` (plain JSON types, see the README).
    """
    leave_if_a_worker_imports_main()
    family = CODE_FAMILIES.get(code)
    bases = parse_bases(basis, family.bases if family is not None else ("Z", "X"))
    request = ForecastRequest(device=device, code=code, distances=tuple(distances), bases=bases, decoder=decoder,
                              targets=tuple(targets), budget_seconds=budget_seconds, work=work, workers=workers,
                              seed=seed, out=out, improve=dict(improve or {}), method=method, progress=progress,
                              executor_factory=executor_factory,
                              placement=placement if placement is None or isinstance(placement, str)
                              else tuple(placement))
    return run_forecast(request)


def placements(device: Device, code: str, distances: Sequence[int]) -> dict[int, tuple[str, ...]]:
    """The device qubits each distance's patch sits on (hand-written layouts and automatic placements);
    raises :class:`~codebench.errors.DeviceFileError` when a patch does not fit the coupling graph."""
    model = DeviceNoise(1.0, device=device.canonical_json())
    family = CODE_FAMILIES[code]
    out = {}
    for d in distances:
        qubits = model.placement(code, d)
        if qubits is None:
            continue
        if not isinstance(device.placement, str) and device.layout_map(code, d) is None:
            # An explicit list names one patch's qubits: it fits one distance, checked before anything runs.
            model.checked_map(family.ideal_circuit(d, 1, family.bases[0], model.circuit_gate_set()), qubits)
        out[d] = qubits
    return out


def _placement_lines(device: Device, request: ForecastRequest, placed: dict[int, tuple[str, ...]]) -> None:
    """Progress lines: the device qubits of each distance, or that the defaults apply."""
    for d, qubits in placed.items():
        print(f"forecast: d = {d} on device qubits {', '.join(qubits)}", file=sys.stderr, flush=True)
    unused = [d for d in request.distances if d not in placed]
    if device.qubits and unused:
        print(f"forecast: the device file lists per-qubit numbers but neither a [coupling] graph nor a [[layouts]] "
              f"entry for {request.code} d = {', '.join(map(str, unused))}: its defaults apply there",
              file=sys.stderr, flush=True)


def run_forecast(request: ForecastRequest) -> ForecastResult:
    """Run a checked :class:`ForecastRequest`; the result as in :func:`forecast`."""
    request = request.checked()
    source = "<device>"
    if isinstance(request.device, Device):
        base = request.device
    else:
        source = str(request.device)
        base = load_device(Path(request.device))
    device = place_device(improve_device(base, request.improve, source), request.placement, source)
    placed = placements(device, request.code, request.distances)  # a patch that does not fit stops here
    count = request.workers or os.cpu_count() or 1
    tmp: tempfile.TemporaryDirectory[str] | None = None
    out_dir: Path | None = None
    if request.out is not None:
        out_dir = Path(request.out)
        if out_dir.exists() and not out_dir.is_dir():
            raise ConfigError(not_allowed("--out", str(out_dir), "a folder (or a path that does not exist yet)"))
        store = out_dir / "store"
    else:
        tmp = tempfile.TemporaryDirectory(prefix="codebench-forecast-")
        store = Path(tmp.name)
    try:
        try:
            make_folder(store)
        except OutputError as exc:
            if out_dir is None:
                raise
            raise ConfigError(not_allowed("--out", str(out_dir), f"a folder codebench can write "
                                          f"({str(exc).rstrip('.')})")) from None
        device_file = (store / "device.json").resolve()
        device_file.write_text(device.canonical_json() + "\n")
        budget = WorkBudget.from_request(request.budget_seconds, request.work,
                                         get_decoder(request.decoder_name).relative_cost)
        started = time.perf_counter()
        factory = request.executor_factory or make_executor
        executor = factory(count)  # ours: closed below, whatever happens
        context = Context(request, device, store, device_file, executor, budget, [], placed)
        if request.progress:
            _placement_lines(device, request, placed)
            print(f"forecast: plan of {budget.total:.3g} detector-shots of work, about "
                  f"{budget.estimated_seconds(count):.0f} s on {count} worker(s) at the reference rate",
                  file=sys.stderr, flush=True)
        try:
            per_basis: dict[str, list[Sampled]] = {
                basis: _forecast_basis(context, basis, index) for index, basis in enumerate(request.bases)}
        finally:
            executor.close(wait=False)
        wall = time.perf_counter() - started  # reported, never planned with
        if all(row.estimate.shots == 0 for rows in per_basis.values() for row in rows):
            raise RunFault(
                f"the hard time limit ({HARD_LIMIT:g} x --budget-seconds) ended the forecast before any distance "
                f"was sampled (decoder {request.decoder_name!r} costs about "
                f"{get_decoder(request.decoder_name).relative_cost:g}x matching per detector-shot): give a larger "
                "--budget-seconds, or --work for a plan without a time limit")
        result = _assemble(context, per_basis, source if not isinstance(request.device, Device) else None, wall)
        if out_dir is not None:
            from codebench.forecast.render import write_outputs

            write_outputs(result, out_dir)
    finally:
        if tmp is not None:
            tmp.cleanup()
    json.dumps(result.to_json(), allow_nan=False)  # the promise of plain, finite JSON
    return result


# ---------------------------------------------------------------------------
# one basis


@dataclass(frozen=True)
class Sampled:
    """One basis's estimate of one distance, before the result is assembled.

    ``pilot_only``: the hard time limit came first; the pilot's counts, no decoder timing.
    """

    distance: int
    estimate: Estimate
    reason: str
    decode_us_per_round: float | None
    pilot_only: bool = False


def _forecast_basis(context: Context, basis: Basis, index: int) -> list[Sampled]:
    request = context.request
    ds = list(request.distances)
    sampler = Sampler(context.store, context.device_file, request.code, basis, request.decoder_name, request.seed,
                      context.executor, context.budget, request.progress)
    sampler.say(f"basis {basis}: pilot at scale 1 for d = {', '.join(map(str, ds))}")
    sampler.run("pilot", {d: [1.0] for d in ds}, PILOT_FAILURES, PILOT_SHOTS)
    rows = []
    pairs_left = len(ds) * (len(request.bases) - index)
    for i, d in enumerate(ds):
        share = context.budget.share(pairs_left - i)
        one = sampler.samples.get((d, 1.0))
        detectors = one.detectors if one is not None else 0
        if one is None or context.budget.expired():
            context.budget.cut_short.append(f"{basis}:d={d}")
            rows.append(_cut_short(d, one))
            continue
        method, reason = _choose(request.method_of(d), one, share)
        if method == "direct":
            shots = min(MAX_DIRECT_SHOTS, max(one.shots, int(share / max(1, detectors)) + one.shots))
            sampler.say(f"d = {d}: direct sampling, up to {DIRECT_FAILURES} failures or {shots:,} shots")
            sampler.run(f"d{d}-direct", {d: [1.0]}, DIRECT_FAILURES, shots)
            estimate = direct_estimate(sampler.samples[(d, 1.0)])
        elif method == "extrapolated":
            estimate = sample_raised(sampler, d, share, scale_cap(context.device), detectors)
        else:
            estimate = _stratified(context, sampler, d, share)
        if context.budget.expired():
            estimate = estimate.flagged("cut short by the hard time limit: fewer shots than planned, wider interval")
            context.budget.cut_short.append(f"{basis}:d={d}")
        rows.append(Sampled(d, estimate, reason, _decode_speed(d, sampler)))
    return rows


def _choose(forced: str, pilot: Sample, share: float) -> tuple[str, str]:
    """The method for one distance, and why."""
    if forced != "auto":
        return forced, f"{forced} forced"
    low, _ = wilson_interval(pilot.failures, pilot.shots)
    if pilot.failures and low > 0:
        need = DIRECT_MIN_FAILURES / low * pilot.detectors
        if need <= share:
            return "direct", (f"{DIRECT_MIN_FAILURES} failures at the pilot's rate (lower bound {low:.3g}) need "
                              f"{need:.3g} detector-shots; the share is {share:.3g}")
        return "stratified", (f"{DIRECT_MIN_FAILURES} failures by direct sampling need {need:.3g} detector-shots; "
                              f"the share is {share:.3g}")
    return "stratified", f"no failures in the pilot's {pilot.shots:,} shots"


def _stratified(context: Context, sampler: Sampler, distance: int, share: float) -> Estimate:
    """Exactly-w sampling of the point at s = 1 and the stratified estimate."""
    from codebench.config import parse_sweep

    request = context.request
    point = parse_sweep({"name": "stratified", "seed": request.seed, "study": [sampler.study(distance, [1.0])]},
                        source="forecast").points[0]
    label = context.device.name + (" with --improve " + ",".join(f"{k}={v:g}" for k, v in request.improve.items())
                                   if request.improve else "")
    result = strata_plan.sample_point(point, request.seed, context.executor, share, sampler.say,
                                      context.budget.expired,
                                      library=context.store / "strata", source=label)
    context.budget.charge(result.work)
    estimate = stratified_row(result.estimate, result.table, distance, result.mean_faults, result.upper_bound,
                              mechanisms=result.mechanisms, reused_from=result.reused_from)
    if result.reused_from is not None:
        estimate = estimate.flagged(f"f(w) table reused from {result.reused_from} (odds proportional within "
                                    f"{result.odds_spread:.2%}; its batches were decoded with that device's weights)")
    return estimate


def _cut_short(distance: int, pilot: Sample | None) -> Sampled:
    estimate = direct_estimate(pilot) if pilot is not None else Estimate("not sampled", "direct", None, None, None,
                                                                         0, 0)
    shots = f"{pilot.shots:,} shots" if pilot is not None else "no shots"
    return Sampled(distance, estimate.flagged(f"cut short by the hard time limit before its own sampling: {shots}"),
                   "time limit reached before this distance", None, pilot_only=True)


def _decode_speed(distance: int, sampler: Sampler) -> float | None:
    at_one = sampler.samples.get((distance, 1.0))
    return (None if at_one is None or at_one.shots == 0 else
            decode_us_per_round(at_one.decode_seconds, at_one.shots, at_one.rounds))


# ---------------------------------------------------------------------------
# the result


def _row(distance: int, round_us: float, qubits: int, *, rate: float | None, low: float | None,
         high: float | None, method: str, kind: str, shots: int, failures: int, flags: tuple[str, ...],
         details: MethodDetails | None, log_rate: float | None, log_var: float | None, reason: str | None,
         decode_us: float | None, pilot_only: bool) -> DistanceForecast:
    """A distance's row, with its qubits, round duration and per-second rates."""
    per_s = 1e6 / round_us
    return DistanceForecast(
        distance=distance, rounds=distance, per_round_rate=rate, low=low, high=high, method=method,
        method_kind=kind, shots=shots, failures=failures, flags=flags, details=details, log_rate=log_rate,
        log_rate_variance=log_var, reason=reason, decode_us_per_round=decode_us, qubits=qubits,
        round_duration_us=round_us,
        per_second_rate=None if rate is None else rate * per_s,
        per_second_low=None if low is None else low * per_s,
        per_second_high=None if high is None else high * per_s,
        keeps_up=None if decode_us is None else bool(decode_us <= round_us),
        pilot_only=pilot_only,
    )


def _basis_row(sampled: Sampled, round_us: float, qubits: int) -> DistanceForecast:
    e = sampled.estimate
    return _row(sampled.distance, round_us, qubits, rate=e.rate, low=e.low, high=e.high, method=e.method,
                kind=e.kind, shots=e.shots, failures=e.failures, flags=e.flags, details=e.details,
                log_rate=e.log_rate, log_var=e.log_var, reason=sampled.reason,
                decode_us=sampled.decode_us_per_round, pilot_only=sampled.pilot_only)


def _either_fails(values: Sequence[float | None]) -> float | None:
    """1 - prod(1 - v): the chance that any of independent events of probabilities ``values`` happens."""
    if any(v is None for v in values):
        return None
    return 1 - math.prod(1 - v for v in values if v is not None)


def _either_basis(per_basis: Mapping[str, Sequence[DistanceForecast]]) -> list[DistanceForecast]:
    """The logical qubit fails in a round when either basis does (module docstring)."""
    bases = list(per_basis)
    out = []
    for rows in zip(*per_basis.values()):
        first = rows[0]
        rate = _either_fails([r.per_round_rate for r in rows])
        high = _either_fails([r.high for r in rows])
        low = 1 - math.prod(1 - v for v in [r.low or 0.0 for r in rows])
        log_var = None
        if rate and all(r.log_rate_variance is not None for r in rows):
            log_var = sum((r.per_round_rate or 0.0) ** 2 * (r.log_rate_variance or 0.0) for r in rows) / rate**2
        out.append(_row(
            first.distance, first.round_duration_us, first.qubits, rate=rate, low=low, high=high,
            method="either basis fails: " + "; ".join(f"{b}: {r.method}" for b, r in zip(bases, rows)),
            kind="combined", shots=sum(r.shots for r in rows), failures=sum(r.failures for r in rows),
            flags=tuple(f for r in rows for f in r.flags), details=None,
            log_rate=None if not rate else math.log(rate), log_var=log_var, reason=None,
            decode_us=max((r.decode_us_per_round or 0.0) for r in rows) or None, pilot_only=False))
    return out


def _assemble(context: Context, sampled: dict[str, list[Sampled]], device_file: str | None,
              wall_seconds: float) -> ForecastResult:
    request = context.request
    family = CODE_FAMILIES[request.code]
    notes = context.notes
    model = DeviceNoise(1.0, device=context.device.canonical_json())
    durations = {d: model.round_duration_ns(family.ideal_circuit(d, d, request.bases[0],
                                                                 model.circuit_gate_set())) / 1000.0
                 for d in request.distances}
    per_basis = {basis: [_basis_row(s, durations[s.distance], family.qubit_count(s.distance)) for s in rows]
                 for basis, rows in sampled.items()}
    rows = per_basis[request.bases[0]] if len(per_basis) == 1 else _either_basis(per_basis)
    fit, pairs = lambda_summary(rows)
    problem = constant_lambda_problem(fit)
    if fit is not None and fit.lam <= 1:
        notes.append(f"Lambda = {fit.lam:.3g} <= 1: the device is not below threshold for this code and "
                     "decoder; growing the distance does not reach the targets.")
    if problem is not None:
        notes.append(f"no target distances: a constant Lambda is not supported ({problem}).")
    target_rows = targets(request.code, fit, request.targets, max(request.distances))
    for reason in dict.fromkeys(t.not_projected for t in target_rows if t.not_projected and problem is None):
        held = sum(t.not_projected == reason for t in target_rows)
        which = "no target is" if held == len(target_rows) else f"{held} of {len(target_rows)} targets are"
        notes.append(f"{which} projected: {reason}.")
    if any(t.extrapolation for t in target_rows):
        notes.append(f"target distances beyond d = {max(request.distances)} extrapolate the Lambda fit; treat them "
                     "as order-of-magnitude projections.")
    for row in rows:
        for flag in row.flags:
            notes.append(f"d = {row.distance}: {flag}.")
    if context.budget.cut_short:
        notes.append("the hard time limit cut short " + ", ".join(context.budget.cut_short)
                     + "; their intervals reflect the fewer shots (rerun with the same --out to resume).")
    round_us = durations[max(request.distances)]
    result = ForecastResult(
        device=context.device.name, device_file=device_file, device_digest=context.device.digest(),
        improve=dict(request.improve), code=request.code, bases=tuple(request.bases),
        decoder=request.decoder_name, seed=int(request.seed), round_duration_us=round_us,
        distances=tuple(rows),
        per_basis={b: tuple(r) for b, r in per_basis.items()} if len(per_basis) > 1 else None,
        lambda_fit=fit, lambda_pairs=tuple(pairs), constant_lambda=problem is None,
        targets=tuple(target_rows),
        break_even=break_even(context.device, round_us, rows,
                              [q for q in context.device.geometry.nodes if q not in context.device.geometry.dead_qubits]),
        budget=BudgetSummary(
            seconds=float(request.budget_seconds), work=context.budget.total, work_spent=context.budget.spent,
            hard_limit_reached=bool(context.budget.cut_short), cut_short=tuple(context.budget.cut_short),
            methods={str(d): request.method_of(d) for d in request.distances}, wall_seconds=wall_seconds),
        cautions=tuple(CAUTIONS),
        notes=tuple(notes),
        placements={str(d): q for d, q in context.placed.items()},
    )
    return plain(result)
