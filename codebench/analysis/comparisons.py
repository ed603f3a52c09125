"""Two decoders compared on the same shots: the paired difference of their failure rates.

Decoders of one physical point decode identical shots (:mod:`codebench.results.pairing`), so their
difference is measured shot by shot: only the shots where exactly one of them fails carry
information about it. The interval is Newcombe's paired hybrid score interval
(:func:`codebench.stats.paired_difference_interval`); beside it, the interval the same counts would
give had each decoder had shots of its own (same sizes, phi = 0), to show what the pairing buys,
and the exact McNemar test of "both fail equally often".
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, fields
from typing import Any, Iterable, Mapping

import pandas as pd

from codebench.results.export import PAIRS_ATTR
from codebench.results.pairing import PairedCounts
from codebench.stats import exact_mcnemar_p, paired_difference_interval, per_round


@dataclass(frozen=True, kw_only=True)
class DecoderComparison(PairedCounts):
    """``first`` minus ``second``: difference of whole-experiment failure rates on ``shots`` shared shots."""

    difference: float
    low: float
    high: float
    unpaired_low: float
    unpaired_high: float
    mcnemar_p: float

    @property
    def narrowing(self) -> float | None:
        """Width of the unpaired interval over the paired one (how much narrower the pairing makes it)."""
        width = self.high - self.low
        return (self.unpaired_high - self.unpaired_low) / width if width > 0 else None

    def per_round_rates(self) -> tuple[float, float]:
        """Both decoders' per-round logical error on the shared shots."""
        if self.shots <= 0:
            return math.nan, math.nan
        return (per_round(self.first_failures / self.shots, self.rounds),
                per_round(self.second_failures / self.shots, self.rounds))

    def to_json(self) -> dict[str, Any]:
        first_round, second_round = self.per_round_rates()
        return {
            "study": self.study, "code": self.code, "distance": self.distance, "rounds": self.rounds,
            "basis": self.basis, "noise": self.noise, "p": self.p, "first": self.first, "second": self.second,
            "shots": self.shots, "first_failures": self.first_failures, "second_failures": self.second_failures,
            "both": self.both, "first_only": self.first_only, "second_only": self.second_only,
            "quantity": "failure probability of the whole memory experiment, first minus second",
            "difference": _finite(self.difference), "low": self.low, "high": self.high,
            "unpaired_low": self.unpaired_low, "unpaired_high": self.unpaired_high,
            "narrowing": self.narrowing, "mcnemar_p": self.mcnemar_p,
            "first_per_round": _finite(first_round), "second_per_round": _finite(second_round),
            "method": "Newcombe paired hybrid score (method 10), 95%",
        }


def _finite(value: float) -> float | None:
    return value if math.isfinite(value) else None


def compare_decoders(records: Iterable[Mapping[str, Any]]) -> tuple[DecoderComparison, ...]:
    """One comparison per paired-count record (:class:`~codebench.results.pairing.PairedCounts` as JSON)."""
    out = []
    for r in records:
        counts = PairedCounts(**{name: r[name] for name in _COUNT_FIELDS if name in r})
        neither = counts.shots - counts.both - counts.first_only - counts.second_only
        cells = (counts.both, counts.first_only, counts.second_only, neither)
        difference, low, high = paired_difference_interval(*cells)
        _, unpaired_low, unpaired_high = paired_difference_interval(*cells, correlated=False)
        out.append(DecoderComparison(**asdict(counts), difference=difference, low=low, high=high,
                                     unpaired_low=unpaired_low, unpaired_high=unpaired_high,
                                     mcnemar_p=exact_mcnemar_p(counts.first_only, counts.second_only)))
    return tuple(out)


_COUNT_FIELDS = tuple(f.name for f in fields(PairedCounts))
_ROW = ("code", "distance", "rounds", "basis", "noise", "p")


def decoder_comparisons(frame: pd.DataFrame) -> tuple[DecoderComparison, ...]:
    """The comparisons of a results table (its paired counts travel in ``frame.attrs``).

    Only pairs whose two rows are in ``frame``: a table cut down (``frame[frame.distance == 3]``)
    keeps pandas' attrs, not its comparisons of rows it no longer holds.
    """
    records = frame.attrs.get(PAIRS_ATTR, ())
    if not records or frame.empty:
        return ()
    columns = [frame[name].map(_plain) for name in (*_ROW, "decoder")]
    present = set(zip(*columns))
    kept = [r for r in records
            if all(tuple(_plain(r[name]) for name in _ROW) + (r.get(f"{which}_decoder") or r[which],) in present
                   for which in ("first", "second"))]
    return compare_decoders(kept)


def _plain(value: Any) -> Any:
    """Row values and record values alike (numpy numbers as Python numbers)."""
    return value.item() if hasattr(value, "item") else value
