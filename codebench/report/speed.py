"""The decoder-speed table: decoding time per round, and whether it keeps up with the circuit's round.

A round duration exists only for noise models that declare a clock
(:attr:`~codebench.noise.base.NoiseModel.has_round_duration`); it comes from
the point's own circuit (:func:`codebench.build.ideal_circuit`).
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import pandas as pd

from codebench.api import STORE_NAME
from codebench.build import ideal_circuit, noise_model
from codebench.errors import CodebenchError
from codebench.noise import NOISE_MODELS
from codebench.report.blocks import (
    DASH,
    Badge,
    Cell,
    Table,
    finite,
    g,
    integer,
    row_dicts,
)
from codebench.results.export import speed_verdict
from codebench.results.store import Store


def has_clock(noise: str) -> bool:
    """Whether noise model ``noise`` gives its circuits a physical round duration (False when unknown)."""
    model = NOISE_MODELS.get(noise)
    return model is not None and model.has_round_duration


def round_durations_us(folder: Path, frame: pd.DataFrame) -> dict[str, float]:
    """Duration of one syndrome round, in microseconds, of every point (by key) whose noise model has a clock.

    From :meth:`~codebench.noise.base.NoiseModel.round_duration_ns` of the point's own circuit, read from
    ``folder``'s store; points of other noise models have no duration and are left out.
    """
    path = Path(folder) / STORE_NAME
    if frame.empty or "noise" not in frame.columns or "point_id" not in frame.columns or not path.exists():
        return {}
    timed = frame["noise"].astype(str).map(has_clock).astype(bool)
    wanted = set(frame.loc[timed, "point_id"].astype(str))
    if not wanted:
        return {}
    try:
        with Store(path, create=False) as store:
            members = store.members()
    except CodebenchError:
        return {}
    out: dict[str, float] = {}
    for member, _ in members:
        if member.key not in wanted:
            continue
        try:
            model = noise_model(member.point)
            nanoseconds = model.round_duration_ns(ideal_circuit(member.point, model))
        except (CodebenchError, KeyError, ValueError):
            continue
        if nanoseconds is not None:
            out[member.key] = nanoseconds / 1000.0
    return out


def speed_table(frame: pd.DataFrame, durations: dict[str, float]) -> Table:
    """Decoding time per round, per decoder and distance; with a round duration, the verdict."""
    table = Table(
        "decoder-speed", "Decoder speed",
        "Decoding wall time per shot per round on one worker (decode_seconds / shots / rounds), per decoder "
        "and distance: the mean over the points' shots and the slowest point. With device noise it is "
        "compared with the device's round duration: the decoder keeps up when it decodes a round in at most "
        "the time the round takes (one core, no pipelining across workers; a real-time decoder must also "
        "keep its latency bounded).",
        ["decoder", "code", "noise", "d", "p", "shots", "\u00b5s / round", "slowest point", "round (\u00b5s)",
         "verdict"],
        numeric={3, 5, 6, 7, 8}, empty="no decode timings")
    if frame.empty or "decode_seconds" not in frame.columns:
        return table
    groups: dict[tuple[Any, ...], list[dict[str, Any]]] = {}
    for item in row_dicts(frame):
        shots = finite(item.get("shots")) or 0.0
        if shots <= 0:
            continue
        clocked = has_clock(str(item.get("noise")))
        round_us = durations.get(str(item.get("point_id"))) if clocked else None
        # Points with a round duration are compared one rate at a time; other points pool over p.
        key = (str(item.get("decoder", "")), str(item.get("code", "")), str(item.get("noise", "")),
               int(item.get("distance") or 0), str(item.get("noise_options", "")) if clocked else "",
               float(item.get("p") or 0.0) if clocked else None, round_us)
        groups.setdefault(key, []).append(item)
    for key in sorted(groups, key=lambda k: (k[0], k[1], k[2], k[4], k[3], k[5] or 0.0)):
        decoder, code, noise, distance, _, _, round_us = key
        items = groups[key]
        seconds = sum(finite(i.get("decode_seconds")) or 0.0 for i in items)
        shot_rounds = sum((finite(i.get("shots")) or 0.0) * (finite(i.get("rounds")) or 0.0) for i in items)
        mean = seconds / shot_rounds * 1e6 if shot_rounds else None
        slowest = max((finite(i.get("decode_us_per_round")) for i in items), key=lambda v: v or 0.0,
                      default=None)
        rates = sorted({float(i["p"]) for i in items if finite(i.get("p")) is not None})
        p_text = g(rates[0]) if len(rates) == 1 else f"{g(rates[0])}\u2013{g(rates[-1])}" if rates else DASH
        verdict: Cell = DASH
        if round_us is not None and mean is not None and round_us > 0:
            text = speed_verdict(mean, round_us)
            verdict = Badge(text, "ok" if text == "keeps up" else "bad")
        table.rows.append([decoder, code, noise, str(distance), p_text,
                           integer(sum(finite(i.get("shots")) or 0.0 for i in items)), g(mean, 3), g(slowest, 3),
                           g(round_us, 4) if round_us is not None else DASH, verdict])
    return table
