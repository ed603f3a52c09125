"""The decoder interface and its declared options.

A decoder is compiled once per point from the point's detector error model
and then only ever asked for :meth:`Decoder.decode_batch`. Constructors store
(and check) parameters; :meth:`Decoder.compile` does the work.

Options a decoder accepts are declared on the class as
``options: ClassVar[dict[str, OptionSpec]]``: each has a kind, a default and
its allowed values. The sweep file's ``[study.decoder_options.<decoder>]``
table is checked against them, with the same message template as every
other value (:func:`codebench.errors.not_allowed`), and the complete set
(defaults filled in) becomes part of the point key.
"""

from __future__ import annotations

import math
from abc import ABC, abstractmethod
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any, ClassVar, Literal

import numpy as np
import stim

from codebench.errors import not_allowed

__all__ = ["Decoder", "OptionSpec"]

OptionKind = Literal["choice", "int", "float"]


@dataclass(frozen=True)
class OptionSpec:
    """One declared decoder option.

    Parameters
    ----------
    kind : {"choice", "int", "float"}
        ``choice``: one of ``choices`` (strings, one spelling each); ``int``:
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


class Decoder(ABC):
    """Predicts logical observable flips from detection events.

    Subclasses set ``name``, ``wants_decomposed`` and, if they take
    options, ``options``; they implement :meth:`compile` and
    :meth:`decode_batch`. ``self.options`` holds every declared option
    (defaults filled in), checked by the constructor.
    """

    name: ClassVar[str]
    #: Whether the detector error model should be decomposed into graphlike parts.
    wants_decomposed: ClassVar[bool] = True
    #: Declared options: name -> spec (default and allowed values).
    option_specs: ClassVar[dict[str, OptionSpec]] = {}

    def __init__(self, **options: Any) -> None:
        self.options = self.resolve_options(options)

    @classmethod
    def resolve_options(cls, given: Mapping[str, Any], at: str | None = None) -> dict[str, Any]:
        """Every declared option: the given values checked, the others at their defaults.

        Parameters
        ----------
        given : mapping
            Option name -> value, as in the sweep file.
        at : str, optional
            Key path put in front of each option in messages (default: the
            decoder's name), such as ``study[0].decoder_options.bposd``.

        Raises
        ------
        TypeError, ValueError
            For an unknown option or a value that is not allowed, in the
            template of :func:`codebench.errors.not_allowed`.
        """
        prefix = at if at is not None else cls.name
        for key in given:
            if key not in cls.option_specs:
                listed = ", ".join(cls.option_specs) if cls.option_specs else "(none)"
                raise ValueError(f"{prefix}.{key} is not a known option of {cls.name}; allowed options: {listed}.")
        chosen = {
            key: spec.check(given[key], f"{prefix}.{key}", cls.name) if key in given else spec.default
            for key, spec in cls.option_specs.items()
        }
        return cls.combine_options(chosen, given, prefix)

    @classmethod
    def combine_options(cls, chosen: dict[str, Any], given: Mapping[str, Any], at: str) -> dict[str, Any]:
        """Hook for options that depend on each other (``ValueError`` if a combination is not allowed)."""
        return chosen

    def get_params(self) -> dict[str, Any]:
        return {"decoder": self.name, "decoder_options": dict(self.options)}

    @abstractmethod
    def compile(self, dem: stim.DetectorErrorModel) -> None:
        """Build the decoder's internal structures for ``dem``."""

    @abstractmethod
    def decode_batch(self, detection_events: np.ndarray, *, bit_packed: bool = True) -> np.ndarray:
        """Predicted observable flips for a batch of shots.

        Parameters
        ----------
        detection_events : numpy.ndarray
            ``uint8`` array of shape ``(shots, ceil(detectors / 8))`` when
            ``bit_packed`` (little-endian bit order, as stim writes it), else
            ``bool`` of shape ``(shots, detectors)``. Not modified.
        bit_packed : bool
            Layout of both the input and the returned array.

        Returns
        -------
        numpy.ndarray
            ``uint8`` of shape ``(shots, ceil(observables / 8))`` when
            ``bit_packed``, else ``bool`` of shape ``(shots, observables)``.
        """
