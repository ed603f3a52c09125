"""Minimum-weight perfect matching decoders (pymatching).

``mwpm`` matches on the decomposed detector error model. ``mwpm_correlated``
uses pymatching's correlated matching, which re-weights edges after a first
pass using the hyperedge correlations kept in the model (X-Z correlations of
Y errors and two-qubit faults).
"""

from __future__ import annotations

from typing import Any, ClassVar

import numpy as np
import pymatching
import stim

from codebench.decoders.base import Decoder


class Matching(Decoder):
    """MWPM on the decomposed detector error model."""

    name = "mwpm"
    correlated: ClassVar[bool] = False

    def __init__(self, **options: Any) -> None:
        super().__init__(**options)
        self._matching: pymatching.Matching | None = None

    def compile(self, dem: stim.DetectorErrorModel) -> None:
        self._matching = pymatching.Matching.from_detector_error_model(dem, enable_correlations=self.correlated)

    def decode_batch(self, detection_events: np.ndarray, *, bit_packed: bool = True) -> np.ndarray:
        if self._matching is None:
            raise RuntimeError("compile() the decoder before decoding")
        result = self._matching.decode_batch(
            detection_events,
            bit_packed_shots=bit_packed,
            bit_packed_predictions=bit_packed,
            enable_correlations=self.correlated,
        )
        out: np.ndarray = result if bit_packed else result.astype(bool)
        return out

    def __getstate__(self) -> dict[str, Any]:
        # pymatching graphs do not pickle; workers recompile from the model.
        return {"options": self.options}

    def __setstate__(self, state: dict[str, Any]) -> None:
        self.options = state["options"]
        self._matching = None


class CorrelatedMatching(Matching):
    """MWPM with pymatching's correlated re-weighting."""

    name = "mwpm_correlated"
    relative_cost = 2.7
    correlated = True
