"""Measured points beside the simulated points of the same experiment.

Each measured row (``source = measured``) is paired with the simulated row of the same code, distance,
rounds, basis, noise model and options, rate and decoder (a data-weighted measured row with the
decoder's simulated row): both per-round logical errors with their 95% intervals, and their ratio.
A measured point without a simulated twin is listed alone.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import pandas as pd

from codebench.analysis.families import with_source
from codebench.results.export import DATA_WEIGHTS

_TWIN = ("code", "distance", "rounds", "basis", "noise", "noise_options", "p")


def _number(value: Any) -> float | None:
    number = float(value)
    return number if math.isfinite(number) else None


@dataclass(frozen=True)
class MeasuredComparison:
    """A measured point and its simulated twin (``None`` fields when there is none)."""

    study: str
    code: str
    distance: int
    rounds: int
    basis: str
    noise: str
    p: float
    decoder: str
    shots: int
    failures: int
    per_round: float | None
    per_round_low: float | None
    per_round_high: float | None
    simulated_per_round: float | None = None
    simulated_low: float | None = None
    simulated_high: float | None = None

    @property
    def ratio(self) -> float | None:
        """Measured over simulated per-round error."""
        if self.per_round is None or not self.simulated_per_round:
            return None
        return self.per_round / self.simulated_per_round

    def to_json(self) -> dict[str, Any]:
        return {"study": self.study, "code": self.code, "distance": self.distance, "rounds": self.rounds,
                "basis": self.basis, "noise": self.noise, "p": self.p, "decoder": self.decoder,
                "shots": self.shots, "failures": self.failures, "quantity": "per-round logical error",
                "measured": self.per_round, "measured_low": self.per_round_low,
                "measured_high": self.per_round_high, "simulated": self.simulated_per_round,
                "simulated_low": self.simulated_low, "simulated_high": self.simulated_high, "ratio": self.ratio}


def compare_measured(frame: pd.DataFrame) -> tuple[MeasuredComparison, ...]:
    """One comparison per measured row of a results table (none for a table without measured rows)."""
    if frame.empty or "source" not in frame.columns:
        return ()
    frame = with_source(frame)
    if "noise_options" not in frame.columns:
        frame = frame.assign(noise_options="")
    simulated = frame[(frame["source"] != "measured") & (frame["shots"] > 0)]
    out = []
    for _, row in frame[frame["source"] == "measured"].iterrows():
        decoder = str(row["decoder"]).removesuffix(DATA_WEIGHTS)
        twin = simulated[(simulated["decoder"] == decoder)
                         & pd.concat([simulated[k] == row[k] for k in _TWIN], axis=1).all(axis=1)]
        match = twin.iloc[0] if len(twin) else None
        out.append(MeasuredComparison(
            str(row["study"]), str(row["code"]), int(row["distance"]), int(row["rounds"]), str(row["basis"]),
            str(row["noise"]), float(row["p"]), str(row["decoder"]), int(row["shots"]), int(row["failures"]),
            _number(row["per_round_rate"]), _number(row["per_round_low"]), _number(row["per_round_high"]),
            None if match is None else _number(match["per_round_rate"]),
            None if match is None else _number(match["per_round_low"]),
            None if match is None else _number(match["per_round_high"])))
    return tuple(out)
