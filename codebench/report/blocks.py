"""The report's vocabulary: tables, badges and cautions as both renderers see them, and number formats."""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Callable

import pandas as pd

DASH = "\u2013"


@dataclass(frozen=True)
class Badge:
    """A short flag shown as a coloured tag (bold in Markdown)."""

    text: str
    kind: str


Cell = str | Badge


@dataclass
class Table:
    """A table as both renderers see it."""

    key: str
    title: str
    intro: str
    headers: list[str]
    rows: list[list[Cell]] = field(default_factory=list)
    numeric: set[int] = field(default_factory=set)
    row_classes: list[str] = field(default_factory=list)
    empty: str = "none"


@dataclass(frozen=True)
class Caution:
    """One caution: a title, its text (lines), an optional table; ``ok`` when nothing needs attention."""

    title: str
    text: str
    table: Table | None = None
    ok: bool = False


def row_dicts(frame: pd.DataFrame) -> list[dict[str, Any]]:
    """The rows of ``frame`` as dicts with string keys."""
    return [{str(k): v for k, v in row.items()} for row in frame.to_dict(orient="records")]


# number formats ------------------------------------------------------------


def finite(value: Any) -> float | None:
    """``value`` as a finite float; ``None`` for anything else, booleans included."""
    if value is None or isinstance(value, bool):
        return None
    try:
        number = float(value)
    except (TypeError, ValueError):
        return None
    return number if math.isfinite(number) else None


def g(value: Any, digits: int = 4) -> str:
    """``digits`` significant digits, a dash when missing.

    >>> g(0.0123456), g(None)
    ('0.01235', '–')
    """
    number = finite(value)
    return DASH if number is None else f"{number:.{digits}g}"


def e(value: Any) -> str:
    """Scientific notation with four significant digits, a dash when missing."""
    number = finite(value)
    return DASH if number is None else f"{number:.3e}"


def integer(value: Any) -> str:
    """A rounded integer with thousands separators, a dash when missing.

    >>> integer(12345.6)
    '12,346'
    """
    number = finite(value)
    return DASH if number is None else f"{int(round(number)):,}"


def with_interval(value: Any, low: Any, high: Any, fmt: Callable[[Any], str] = g) -> str:
    """``value [low, high]``; the value alone when neither end is known."""
    if finite(value) is None:
        return DASH
    if finite(low) is None and finite(high) is None:
        return fmt(value)
    return f"{fmt(value)} [{fmt(low)}, {fmt(high)}]"


def list_text(values: Any) -> str:
    """A list as comma-separated text."""
    if not values:
        return DASH
    if isinstance(values, (list, tuple)):
        return ", ".join(g(v) if isinstance(v, float) else str(v) for v in values)
    return str(values)


def family_text(record: dict[str, Any]) -> str:
    """The family a record belongs to, in one line."""
    text = (f"{record.get('code')} {record.get('basis')} {record.get('noise')} {record.get('decoder')} "
            f"r={record.get('rounds')}")
    return f"{text} ({record['source']})" if record.get("source") else text
