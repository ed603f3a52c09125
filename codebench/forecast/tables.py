"""f(w) tables kept beside a forecast's store, so what-ifs whose mechanisms scale together reuse them.

Given exactly w faults, the law of the fault set depends on the odds
r_i = p_i / (1 - p_i) only up to one common factor
(:mod:`codebench.engine.fault_sampling`). A table of exactly-w batches drawn
for one device therefore serves any device whose detector error model has the
same mechanisms (same detectors and observables each) and odds proportional
to the first's within :data:`codebench.forecast.rare_events.REUSE_TOLERANCE`
(``--improve noise=FACTOR``, every error scaled together, is the usual case:
the spread is about |FACTOR - 1| times the largest mechanism probability).
P(W = w) is recomputed exactly for the new device. Two approximations remain,
both stated in the forecast's row: odds proportional only within the
tolerance, and the reused batches were decoded with the first device's edge
weights (new batches use the new weights).

A table is a JSON file ``strata/<structure>-<setting>-<seed key>.json`` with
the odds beside it as ``.npy``; its batches are identified by the seed key of
the point that first drew them, so reusing them and topping them up stays a
deterministic function of the inputs. Reused batches count towards the
distance's share of the budget like new ones (the budget buys evidence).
"""

from __future__ import annotations

import hashlib
import json
import os
import tempfile
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from codebench.forecast.rare_events import REUSE_TOLERANCE, odds_spread
from codebench.records import BatchResult

__all__ = ["SavedTable", "find_reusable", "save_table"]


@dataclass
class SavedTable:
    """A stored f(w) table: the seed key its batches were drawn under, its probabilities and its batches."""

    seed_key: str
    probabilities: np.ndarray
    batches: dict[int, dict[int, BatchResult]]
    source: str


def _setting(decoder_params: dict[str, Any], seed: int) -> str:
    text = json.dumps({"seed": seed, **decoder_params}, sort_keys=True)
    return hashlib.sha256(text.encode()).hexdigest()[:12]


def _stem(structure: str, decoder_params: dict[str, Any], seed: int, seed_key: str) -> str:
    return f"{structure}-{_setting(decoder_params, seed)}-{seed_key}"


def find_reusable(folder: Path, structure: str, decoder_params: dict[str, Any], seed: int,
                  probabilities: np.ndarray) -> tuple[SavedTable, float] | None:
    """The stored table with the same mechanisms, decoder and seed whose odds spread is smallest (within tolerance)."""
    if not folder.is_dir():
        return None
    best: tuple[SavedTable, float] | None = None
    for path in sorted(folder.glob(f"{structure}-{_setting(decoder_params, seed)}-*.json")):
        try:
            data = json.loads(path.read_text())
            stored = np.load(path.with_suffix(".npy"))
        except (OSError, ValueError):
            continue  # a damaged or half-written table is simply not reused
        spread = odds_spread(stored, probabilities)
        if spread <= REUSE_TOLERANCE and (best is None or spread < best[1]):
            batches = {int(w): {int(i): BatchResult(data["seed_key"], int(i), int(v[0]), int(v[1]), float(v[2]),
                                                    float(v[3])) for i, v in per_w.items()}
                       for w, per_w in data["batches"].items()}
            best = (SavedTable(data["seed_key"], stored, batches, data.get("source", "")), spread)
    return best


def save_table(folder: Path, structure: str, decoder_params: dict[str, Any], seed: int, seed_key: str,
               probabilities: np.ndarray, batches: dict[int, dict[int, BatchResult]], source: str) -> None:
    """Write (or replace) a table atomically: the odds first, then the JSON that names them."""
    folder.mkdir(parents=True, exist_ok=True)
    stem = _stem(structure, decoder_params, seed, seed_key)
    npy = folder / f"{stem}.npy"
    if not npy.exists():
        fd, tmp = tempfile.mkstemp(dir=folder, suffix=".npy")
        with os.fdopen(fd, "wb") as handle:
            np.save(handle, probabilities)
        os.replace(tmp, npy)
    data = {"seed_key": seed_key, "source": source,
            "batches": {str(w): {str(i): [r.shots, r.failures, r.seconds, r.decode_seconds] for i, r in per_w.items()}
                        for w, per_w in sorted(batches.items())}}
    fd, tmp = tempfile.mkstemp(dir=folder, suffix=".json")
    with os.fdopen(fd, "w") as handle:
        json.dump(data, handle)
    os.replace(tmp, folder / f"{stem}.json")
