"""Families of points: the curves a fit runs over.

A family shares (code, basis, noise model and options, decoder, rounds
rule). The rounds rule is ``"d"``, ``"2d"``, ... when every point runs
rounds = k d, else the fixed number of rounds (``"1"``, ``"5"``, ...). A row
can belong to a multiple-of-d family and to a fixed-rounds family at once
(rounds = 3 at d = 3 is both); each family is a view of the results table.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

IDENTITY = ("code", "basis", "noise", "noise_options", "decoder")
#: The ``source`` of rows from stores and CSVs written before measured points existed.
DEFAULT_SOURCE = "simulated"


def with_source(frame: pd.DataFrame) -> pd.DataFrame:
    """``frame`` with its ``source`` column (``simulated`` where it is missing or empty).

    >>> list(with_source(pd.DataFrame({"p": [0.1]}))["source"])
    ['simulated']
    """
    if "source" not in frame.columns:
        return frame.assign(source=DEFAULT_SOURCE)
    return frame.assign(source=frame["source"].fillna(DEFAULT_SOURCE).astype(str))


@dataclass(frozen=True)
class FamilyId:
    """Who a result record belongs to: the family's code, basis, noise model, decoder and rounds rule.

    ``noise_options`` (the options' canonical ``name=value`` text) tells apart families that differ only there; it is not
    part of a record's JSON, which starts with the five other keys (:meth:`to_json`). ``source`` is
    ``measured`` for a family of points decoded from measured records (``codebench lab decode``); only
    then does the JSON carry it (``"source": "measured"`` after the five keys), so simulated records read
    as before.
    """

    code: str
    basis: str
    noise: str
    decoder: str
    rounds: str
    noise_options: str = ""
    source: str = DEFAULT_SOURCE

    def to_json(self) -> dict[str, Any]:
        """The keys every JSON record of the family starts with (as :meth:`Family.identity`)."""
        out = {"code": self.code, "basis": self.basis, "noise": self.noise, "decoder": self.decoder,
               "rounds": self.rounds}
        if self.source != DEFAULT_SOURCE:
            out["source"] = self.source
        return out

    def describe(self) -> str:
        text = f"{self.code} {self.basis} {self.noise} {self.decoder} rounds={self.rounds}"
        return text if self.source == DEFAULT_SOURCE else f"{text} ({self.source})"


@dataclass(frozen=True)
class Family:
    """Points of one curve family, sorted by distance then p."""

    code: str
    basis: str
    noise: str
    noise_options: str
    decoder: str
    rounds_rule: str
    frame: pd.DataFrame
    source: str = DEFAULT_SOURCE

    @property
    def distances(self) -> list[int]:
        return sorted(int(d) for d in self.frame["distance"].unique())

    @property
    def rates(self) -> list[float]:
        """The sampled values of ``p`` (the noise model's base rate or scale factor)."""
        return sorted(float(p) for p in self.frame["p"].unique())

    @property
    def id(self) -> FamilyId:
        """The family's identity, as its result records carry it."""
        return FamilyId(self.code, self.basis, self.noise, self.decoder, self.rounds_rule, self.noise_options,
                        self.source)

    def identity(self) -> dict[str, Any]:
        """The keys every result record of this family starts with."""
        return self.id.to_json()

    def describe(self) -> str:
        return self.id.describe()

    def at_distance(self, distance: int) -> pd.DataFrame:
        return self.frame[self.frame["distance"] == distance].sort_values("p")

    def at_rate(self, p: float) -> pd.DataFrame:
        return self.frame[np.isclose(self.frame["p"], p, rtol=1e-9, atol=0)].sort_values("distance")


def _usable(frame: pd.DataFrame) -> pd.DataFrame:
    """Points with at least one shot."""
    return frame[frame["shots"] > 0]


def group_families(frame: pd.DataFrame) -> list[Family]:
    """Every family with at least two distances, in a stable order."""
    frame = with_source(_usable(frame))
    if "noise_options" not in frame.columns:
        frame = frame.assign(noise_options="")
    families: list[Family] = []
    # Simulated families first, in the order they always had; measured ones after them.
    for source in sorted(frame["source"].unique(), key=lambda s: (s != DEFAULT_SOURCE, s)):
        for ident, group in frame[frame["source"] == source].groupby(list(IDENTITY), sort=True):
            code, basis, noise, options, decoder = (str(x) for x in ident)
            ratio = group["rounds"] / group["distance"]
            for k in sorted({int(r) for r in ratio if float(r).is_integer()}):
                part = group[ratio == k]
                if part["distance"].nunique() >= 2:
                    rule = "d" if k == 1 else f"{k}d"
                    families.append(Family(code, basis, noise, options, decoder, rule, _sorted(part), source))
            for rounds, part in group.groupby("rounds", sort=True):
                if part["distance"].nunique() >= 2:
                    families.append(Family(code, basis, noise, options, decoder, str(rounds), _sorted(part),
                                           source))
    return families


def _sorted(frame: pd.DataFrame) -> pd.DataFrame:
    return frame.sort_values(["distance", "p"]).reset_index(drop=True)
