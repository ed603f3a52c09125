"""Shared checks of sweep-file values: keys, required values, numbers, the one-line problem."""

from __future__ import annotations

import math
import re
from collections.abc import Iterable
from typing import Any, TypeGuard

import numpy as np

from codebench.errors import ConfigError, not_allowed

#: Pattern a sweep name must match in full (it names an output folder); also how a key is written bare.
NAME_PATTERN = re.compile(r"[A-Za-z0-9][A-Za-z0-9_.-]*")

__all__ = ["NAME_PATTERN", "Problem", "check_keys", "is_int", "is_number", "quoted", "one_line", "one_of", "positive_int", "require"]


class Problem(ConfigError):
    """A rejected value, before the source is put in front of the message."""


def check_keys(table: dict[Any, Any], at: str, allowed: tuple[str, ...]) -> None:
    for key in table:
        if key not in allowed:
            path = f"{at}.{key}" if at else str(key)
            listed = ", ".join(allowed) if allowed else "(none)"
            raise Problem(f"{path} is not a known key; allowed keys: {listed}.")


def require(table: dict[str, Any], key: str, what: str, at: str = "") -> Any:
    if key not in table:
        path = f"{at}.{key}" if at else key
        raise Problem(f"{path} is required ({what}).")
    return table[key]


def positive_int(value: object, path: str, allowed: str) -> int:
    """A count >= 1; a float with an integer value counts (``shot_budget = 1e6`` is how people write it)."""
    count = value
    if isinstance(value, (float, np.floating)) and math.isfinite(value) and float(value).is_integer():
        count = int(value)
    if not is_int(count) or count < 1:
        raise Problem(not_allowed(path, value, allowed))
    return int(count)


def is_int(value: object) -> TypeGuard[int]:
    """An integer, but not a bool (numpy integers count, for dict input)."""
    return isinstance(value, (int, np.integer)) and not isinstance(value, bool)


def is_number(value: object) -> TypeGuard[float]:
    """An integer or a float, but not a bool."""
    return isinstance(value, (int, float, np.integer, np.floating)) and not isinstance(value, bool)


def quoted(items: Iterable[str]) -> str:
    """``'a', 'b', 'c'``."""
    return ", ".join(repr(n) for n in items)


def one_of(items: Iterable[str]) -> str:
    return "one of " + quoted(items)


def one_line(text: str) -> str:
    return " ".join(text.split())
