"""Typed options of every plug-in kind (decoders, noise models, executors).

A plug-in declares ``option_specs: dict[str, OptionSpec]``; values from a
sweep file or the command line are checked against them with the same
message template as every other value (:func:`codebench.errors.not_allowed`).
"""

from __future__ import annotations

import json
import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any, Literal

import numpy as np

from codebench.errors import not_allowed

__all__ = ["OptionKind", "OptionSpec", "resolve_options"]

OptionKind = Literal["choice", "int", "float", "text"]


@dataclass(frozen=True)
class OptionSpec:
    """One declared decoder option.

    Parameters
    ----------
    kind : {"choice", "int", "float", "text"}
        ``choice``: one of ``choices`` (strings, one spelling each); ``text``: any
        non-empty string (for example a canonical JSON document); ``int``:
        an integer (not a bool) in ``[low, high]``; ``float``: a number in the
        interval given by ``low``/``high`` and ``low_open``/``high_open``.
    default : str, int or float
        Used when the sweep file does not set the option.
    description : str
        One line for the documentation.
    choices : tuple of str
        Allowed values of a ``choice`` option.
    low, high : float, optional
        Bounds of a number (``None``: unbounded).
    low_open, high_open : bool
        Whether the bound itself is excluded.
    """

    kind: OptionKind
    default: str | int | float
    description: str = ""
    choices: tuple[str, ...] = ()
    low: float | None = None
    high: float | None = None
    low_open: bool = False
    high_open: bool = False

    def allowed(self) -> str:
        """The allowed values as message text, e.g. ``an integer >= 0``."""
        if self.kind == "choice":
            return "one of " + ", ".join(repr(c) for c in self.choices)
        if self.kind == "text":
            return "a non-empty string"
        noun = "an integer" if self.kind == "int" else "a number"
        if self.low is not None and self.high is not None:
            left = "(" if self.low_open else "["
            right = ")" if self.high_open else "]"
            return f"{noun} in {left}{self.low:g}, {self.high:g}{right}"
        if self.low is not None:
            return f"{noun} {'>' if self.low_open else '>='} {self.low:g}"
        if self.high is not None:
            return f"{noun} {'<' if self.high_open else '<='} {self.high:g}"
        return noun

    def check(self, value: object, path: str, owner: str = "") -> str | int | float:
        """``value`` in its canonical type, or ``TypeError``/``ValueError`` in the shared template.

        ``owner`` (a decoder name) is named after the allowed values.

        >>> OptionSpec("int", 7, low=0).check(3, "osd_order")
        3
        >>> OptionSpec("float", 0.5, low=0, high=1).check(1, "x")
        1.0
        >>> OptionSpec("int", 7, low=0).check(-1, "osd_order", "bposd")
        Traceback (most recent call last):
        ...
        ValueError: osd_order must be an integer >= 0 for bposd; got -1.
        """
        allowed = self.allowed() + (f" for {owner}" if owner else "")
        if self.kind == "choice":
            if not isinstance(value, str):
                raise TypeError(not_allowed(path, value, allowed))
            if value not in self.choices:
                raise ValueError(not_allowed(path, value, allowed))
            return value
        if self.kind == "text":
            if not isinstance(value, str) or not value:
                raise TypeError(not_allowed(path, value, allowed))
            return value
        if self.kind == "int":
            if not isinstance(value, (int, np.integer)) or isinstance(value, bool):
                raise TypeError(not_allowed(path, value, allowed))
            number: float = int(value)
        else:
            if not isinstance(value, (int, float, np.integer, np.floating)) or isinstance(value, bool):
                raise TypeError(not_allowed(path, value, allowed))
            number = float(value)
            if not math.isfinite(number):
                raise ValueError(not_allowed(path, value, allowed))
        if self.low is not None and (number < self.low or (self.low_open and number == self.low)):
            raise ValueError(not_allowed(path, value, allowed))
        if self.high is not None and (number > self.high or (self.high_open and number == self.high)):
            raise ValueError(not_allowed(path, value, allowed))
        return int(number) if self.kind == "int" else float(number)


def resolve_options(specs: Mapping[str, OptionSpec], given: Mapping[str, Any], at: str, owner: str) -> dict[str, Any]:
    """Every declared option: the given values checked, the others at their defaults.

    ``KeyError`` names an undeclared option; ``TypeError``/``ValueError`` a bad value.
    Each message is one line in the shared template, with ``at`` in front.
    """
    unknown = sorted(set(given) - set(specs))
    if unknown:
        allowed = ", ".join(repr(k) for k in specs) or "no options"
        raise KeyError(not_allowed(f"{at}.{unknown[0]}" if at else unknown[0], given[unknown[0]],
                                   f"a declared option of {owner} ({allowed})"))
    return {name: spec.check(given[name], f"{at}.{name}" if at else name, owner) if name in given else spec.default
            for name, spec in specs.items()}


def options_text(options: Mapping[str, Any]) -> str:
    """Options as a person reads them: ``name=value`` pairs sorted by name, joined by ``"; "``.

    ``""`` when there are none. Values are written with ``str`` (a device document by its name and
    digest, as its noise model shows it).

    >>> options_text({"osd_order": 2, "bp_method": "minimum_sum"})
    'bp_method=minimum_sum; osd_order=2'
    >>> parse_options_text(options_text({"device": "chip.toml@1a2b", "scale_t1": 0.5}))
    {'device': 'chip.toml@1a2b', 'scale_t1': '0.5'}
    """
    return "; ".join(f"{name}={options[name]}" for name in sorted(options))


def parse_options_text(text: str) -> dict[str, str]:
    """The options of :func:`options_text` back as text values (``{}`` for ``""``).

    A JSON object (how tables written before this format held options) reads too.
    """
    text = str(text)
    if text.startswith("{"):
        try:
            found = json.loads(text)
        except ValueError:
            found = None
        if isinstance(found, dict):
            return {str(k): str(v) for k, v in found.items()}
    out: dict[str, str] = {}
    for pair in str(text).split("; ") if text else []:
        name, _, value = pair.partition("=")
        out[name] = value
    return out
