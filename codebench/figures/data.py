"""What the figures read: the analysis as plain records, a family's curves, the threshold to draw."""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any, Iterable, Sequence

import numpy as np

from codebench.analysis.families import DEFAULT_SOURCE, Family
from codebench.figures.style import finite

#: The record lists of an analysis.
SECTIONS = ("thresholds", "pseudo_thresholds", "lambdas", "lambda_pairs", "scaling_laws", "projections",
            "per_round_crossings")
#: The columns a curve plots: per-round rate, or the failure probability of the whole experiment.
QUANTITY_COLUMNS = {"per_round": ("per_round_rate", "per_round_low", "per_round_high"),
                    "whole": ("failure_rate", "failure_rate_low", "failure_rate_high")}


def _plain(value: Any) -> Any:
    if isinstance(value, Mapping):
        return dict(value)
    to_json = getattr(value, "to_json", None)
    if callable(to_json):
        return to_json()
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        return dataclasses.asdict(value)
    return value


def _plain_record(record: Any) -> Any:
    plain = _plain(record)
    family = getattr(record, "family", None)
    options = getattr(family, "noise_options", None)
    if isinstance(plain, dict) and options is not None and "noise_options" not in plain:
        # A typed record keeps its family's options beside its JSON; matching needs them.
        plain["noise_options"] = str(options)
    return plain


def plain_analysis(analysis: Any) -> dict[str, Any]:
    """The analysis as JSON-ready dicts, whether :func:`~codebench.analysis.analyze` gave dicts or typed records.

    The one place presentation reads the analysis' shape; everything after it sees
    ``{section: [record dicts], "notes": [...], "settings": {...}}``.
    """
    if analysis is None:
        return {key: [] for key in (*SECTIONS, "notes")} | {"settings": {}}

    def part(key: str) -> Any:
        return analysis.get(key) if isinstance(analysis, Mapping) else getattr(analysis, key, None)

    out: dict[str, Any] = dict(analysis) if isinstance(analysis, Mapping) else {}
    for key in SECTIONS:
        out[key] = [_plain_record(record) for record in part(key) or []]
    out["notes"] = [str(note) for note in part("notes") or []]
    for optional in ("measured", "decoder_comparisons"):
        found = part(optional)
        if found:
            out[optional] = [_plain(record) for record in found]
    settings = _plain(part("settings"))
    out["settings"] = settings if isinstance(settings, dict) else {}
    return out


def _matches(record: dict[str, Any], family: Family) -> bool:
    """Whether an analysis record belongs to ``family`` (identity, and noise options if recorded)."""
    identity = family.identity()
    if any(str(record.get(key)) != str(value) for key, value in identity.items()):
        return False
    if str(record.get("source", DEFAULT_SOURCE)) != family.source:
        return False
    options = record.get("noise_options")
    return options is None or str(options) == family.noise_options


def family_records(analysis: dict[str, Any], section: str, family: Family) -> list[dict[str, Any]]:
    """The records of ``section`` that belong to ``family``."""
    records = analysis.get(section) or []
    return [r for r in records if isinstance(r, dict) and _matches(r, family)]


def chosen_threshold(records: Sequence[dict[str, Any]]) -> dict[str, Any] | None:
    """The threshold estimate to draw: finite-size scaling if present, else the crossing of the largest distances."""
    usable = [r for r in records if finite(r.get("threshold")) is not None]
    fss = [r for r in usable if r.get("method") == "finite_size_scaling"]
    if fss:
        return fss[0]
    crossings = [r for r in usable if r.get("method") == "crossing"]
    if not crossings:
        return usable[0] if usable else None

    def size(record: dict[str, Any]) -> tuple[int, int]:
        distances = [int(d) for d in record.get("distances") or [0]]
        return min(distances), max(distances)

    return max(crossings, key=size)


def method_name(record: dict[str, Any], short: bool = True) -> str:
    """How a threshold was estimated, in words (``FSS``, ``crossing d = 5/7``)."""
    method = str(record.get("method") or "estimate")
    if method == "finite_size_scaling":
        return "FSS" if short else "finite-size scaling"
    if method == "crossing":
        distances = record.get("distances") or []
        return "crossing d = " + "/".join(str(int(d)) for d in distances) if distances else "crossing"
    return method.replace("_", " ")


@dataclass(frozen=True)
class Curve:
    """One distance of one family, sorted by p: the plotted arrays."""

    distance: int
    p: np.ndarray
    rate: np.ndarray
    low: np.ndarray
    high: np.ndarray
    failures: np.ndarray


def curves(family: Family, quantity: str = "per_round") -> list[Curve]:
    """The curves of ``family`` that have at least one finite rate (``quantity``: a key of QUANTITY_COLUMNS)."""
    rate_column, low_column, high_column = QUANTITY_COLUMNS[quantity]
    out = []
    for distance in family.distances:
        part = family.at_distance(distance)
        part = part[part["shots"] > 0]
        rate = part[rate_column].to_numpy(dtype=float)
        keep = np.isfinite(rate)
        if not keep.any():
            continue
        out.append(Curve(
            distance,
            part["p"].to_numpy(dtype=float)[keep],
            rate[keep],
            part[low_column].to_numpy(dtype=float)[keep],
            part[high_column].to_numpy(dtype=float)[keep],
            part["failures"].to_numpy(dtype=float)[keep],
        ))
    return out


def spans_decades(values: Iterable[float]) -> bool:
    """Whether the positive values span a factor of ten (then the axis is logarithmic)."""
    positive = [v for v in values if math.isfinite(v) and v > 0]
    return len(positive) >= 2 and max(positive) / min(positive) >= 10.0


def y_range(curves: Sequence[Curve]) -> tuple[float, float] | None:
    """Positive limits holding every rate and band (a zero-failure point shows its upper end)."""
    values: list[float] = []
    for curve in curves:
        values += [float(v) for v in curve.rate if v > 0]
        values += [float(v) for v in curve.low if math.isfinite(v) and v > 0]
        values += [float(v) for v in curve.high if math.isfinite(v) and v > 0]
    if not values:
        return None
    return min(values), max(values)
