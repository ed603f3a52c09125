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

from abc import ABC, abstractmethod
from collections.abc import Mapping
from typing import Any, ClassVar

import numpy as np
import stim

from codebench.options import OptionSpec

__all__ = ["Decoder", "OptionSpec"]

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
    #: Decoding CPU time per detector-shot relative to ``mwpm``, measured once (rotated surface or
    #: heavy-hexagon code, d = 5, SI1000 p = 1e-3, on the 2-core reference machine). A forecast turns
    #: its time budget into counted work with it, so the plan stays a function of its inputs alone.
    relative_cost: ClassVar[float] = 1.0

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
