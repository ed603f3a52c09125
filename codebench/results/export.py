"""Results table: one row per point, rebuilt from the store's batch rows."""

from __future__ import annotations

import math
from pathlib import Path

import pandas as pd

from codebench.files import write_atomically
from codebench.noise import NOISE_MODELS
from codebench.options import options_text
from codebench.records import BatchSchedule, Point
from codebench.results.pairing import paired_counts
from codebench.results.store import UNLISTED, MeasuredResult, Store, StoredPoint
from codebench.results.tally import tally, usable_batches
from codebench.stats import binomial_interval, per_round

#: The fixed columns, in order; more follow them.
COLUMNS = [
    "study", "code", "distance", "rounds", "basis", "noise", "p", "decoder",
    "shots", "failures", "seconds", "failure_rate", "failure_rate_low", "failure_rate_high",
    "per_round_rate", "per_round_low", "per_round_high", "qubits", "detectors",
]
EXTRA_COLUMNS = [
    "decode_seconds", "decode_us_per_round", "batches", "complete", "interval", "noise_options", "decoder_options",
    "source", "in_sweep_file", "point_id",
]
#: The key of ``frame.attrs`` holding the decoders' paired counts (:class:`~codebench.results.pairing.PairedCounts`
#: as JSON records) of a results table.
PAIRS_ATTR = "decoder_pairs"
#: Values of the ``source`` column: sampled by codebench, or decoded from records measured on a device.
SOURCES = ("simulated", "measured")
#: Added to the decoder column of a measured point decoded with weights learned from its data.
DATA_WEIGHTS = " (data weights)"


def _options_column(noise: str, options: dict[str, str]) -> str:
    """Noise options as ``name=value`` text, as the model shows them (a device by its name and content digest)."""
    model = NOISE_MODELS.get(noise)
    return options_text(model.display_options(options) if model is not None else options)


def decode_us_per_round(decode_seconds: float, shots: int, rounds: int) -> float:
    """Decoding wall time per shot per round, in microseconds, on one worker (NaN without shots).

    >>> decode_us_per_round(2.0, 1000, 5)
    400.0
    """
    if shots <= 0 or rounds <= 0:
        return float("nan")
    return decode_seconds / shots / rounds * 1e6


def speed_verdict(decode_us: float, round_us: float) -> str:
    """``keeps up`` when a round decodes in at most the round's duration, else ``falls behind by Nx``.

    >>> speed_verdict(0.5, 1.0), speed_verdict(3.0, 1.2)
    ('keeps up', 'falls behind by 2.5x')
    """
    ratio = decode_us / round_us
    return "keeps up" if ratio <= 1.0 else f"falls behind by {ratio:.3g}x"


def _per_round(total: float, rounds: int) -> float:
    return float("nan") if math.isnan(total) else per_round(total, rounds)


def results_frame(store: Store, interval: str = "wilson", unlisted: bool = False) -> pd.DataFrame:
    """The results table of the store's latest run, then its measured points (column ``source``).

    ``unlisted``: also the stored points the latest run's sweep file no longer lists (the file was
    edited), under the study ``(not in the sweep file)``, counted by the latest run's stopping rule.

    ``failure_rate`` is failures / shots with a 95% interval by ``interval``
    (``wilson``, ``jeffreys`` or ``clopper_pearson``; named in the
    ``interval`` column); the
    per-round columns map the rate and both interval ends through
    eps = (1 - (1 - 2 P)^(1/rounds)) / 2, which is monotone, so the interval
    carries over exactly. ``decode_us_per_round`` is ``decode_seconds`` per
    shot per round in microseconds: the decoder's wall time on one worker,
    to compare with the duration of a syndrome round.
    """
    measured = store.measured()
    simulated = store.has_sweep() or not measured
    members = _members(store, unlisted) if simulated else []
    rows = _simulated_rows(store, members, interval) if simulated else []
    rows.extend(_measured_row(result, interval) for result in measured)
    frame = pd.DataFrame(rows, columns=COLUMNS + EXTRA_COLUMNS)
    # Decoders of one physical point decoded the same shots: their shot-by-shot counts travel with
    # the table (plain records, so pandas can compare and copy them), for analyze and the figures.
    frame.attrs[PAIRS_ATTR] = SharedRecords(counts.to_json() for counts in paired_counts(store, members)
                                            ) if members else SharedRecords()
    return frame


class SharedRecords(tuple[dict[str, object], ...]):
    """Read-only records riding in ``frame.attrs``: pandas deep-copies attrs on every derived frame
    (a filter, an ``assign``), which for a list of dicts made each such step about ten times slower.
    These records are never changed, so every copy is the same object."""

    def __copy__(self) -> SharedRecords:
        return self

    def __deepcopy__(self, memo: dict[int, object]) -> SharedRecords:
        return self


def _members(store: Store, unlisted: bool) -> list[tuple[StoredPoint, str]]:
    return store.members() + ([(point, UNLISTED) for point in store.unlisted()] if unlisted else [])


def _rates(point: Point, failures: int, shots: int, interval: str) -> dict[str, float]:
    """The failure rate and per-round rate of a point, with their 95% intervals."""
    rate = failures / shots if shots else float("nan")
    low, high = binomial_interval(failures, shots, interval) if shots else (float("nan"), float("nan"))
    return {"failure_rate": rate, "failure_rate_low": low, "failure_rate_high": high,
            "per_round_rate": _per_round(rate, point.rounds), "per_round_low": _per_round(low, point.rounds),
            "per_round_high": _per_round(high, point.rounds)}


def _identity_columns(study: str, point: Point) -> dict[str, object]:
    return {"study": study, "code": point.code, "distance": point.distance, "rounds": point.rounds,
            "basis": point.basis, "noise": point.noise, "p": point.p, "decoder": point.decoder}


def _simulated_rows(store: Store, members: list[tuple[StoredPoint, str]], interval: str) -> list[dict[str, object]]:
    stopping = store.stopping()
    stored = store.all_batches()
    rows: list[dict[str, object]] = []
    for member, study in members:
        point = member.point
        sizes = BatchSchedule(stopping.shot_budget, member.batch_cap)
        t = tally(sizes, usable_batches(sizes, stored.get(member.key, [])), stopping)
        rows.append({
            **_identity_columns(study, point),
            "shots": t.shots, "failures": t.failures, "seconds": t.seconds,
            **_rates(point, t.failures, t.shots, interval),
            "qubits": member.qubits, "detectors": member.detectors,
            "decode_seconds": t.decode_seconds,
            "decode_us_per_round": decode_us_per_round(t.decode_seconds, t.shots, point.rounds),
            "batches": t.batches, "complete": t.finished, "interval": interval,
            "noise_options": _options_column(point.noise, dict(point.noise_options)),
            "decoder_options": options_text(dict(point.decoder_options)),
            "source": "simulated", "in_sweep_file": study != UNLISTED, "point_id": member.key,
        })
    return rows


def _measured_row(result: MeasuredResult, interval: str) -> dict[str, object]:
    """A measured point's row: its decoder column says which weights decoded it (``mwpm (data weights)``)."""
    point = result.point
    row = {
        **_identity_columns(result.study, point),
        "shots": result.shots, "failures": result.failures, "seconds": 0.0,
        **_rates(point, result.failures, result.shots, interval),
        "qubits": result.qubits, "detectors": result.detectors,
        "decode_seconds": result.decode_seconds,
        "decode_us_per_round": decode_us_per_round(result.decode_seconds, result.shots, point.rounds),
        "batches": 0, "complete": True, "interval": interval,
        "noise_options": _options_column(point.noise, dict(point.noise_options)),
        "decoder_options": options_text(dict(point.decoder_options)),
        "source": "measured", "in_sweep_file": False, "point_id": result.key,
    }
    if result.weights == "data":
        row["decoder"] = f"{point.decoder}{DATA_WEIGHTS}"
    return row


def write_csv(frame: pd.DataFrame, path: str | Path) -> Path:
    """Write ``frame`` atomically (a crash never leaves half a CSV, a failure no stray file)."""
    return write_atomically(path, lambda handle: frame.to_csv(handle, index=False, float_format="%.10g"))
