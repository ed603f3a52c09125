"""The decoder interface.

A decoder is compiled once per point from the point's detector error model
and then only ever asked for :meth:`Decoder.decode_batch`. Constructors store
parameters; :meth:`Decoder.compile` does the work.
"""

from __future__ import annotations

from abc import ABC, abstractmethod
from typing import Any, ClassVar

import numpy as np
import stim


class Decoder(ABC):
    """Predicts logical observable flips from detection events."""

    name: ClassVar[str]
    #: Whether the detector error model should be decomposed into graphlike parts.
    wants_decomposed: ClassVar[bool] = True

    def __init__(self, **options: Any) -> None:
        self.options = dict(options)

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
