"""The experiment measured records belong to: its point, its description, its model circuit.

An experiment is named by a description file (``codebench qasm`` writes it beside the program), or by
the originating sweep point, or both; then they must agree (same measurements, detectors and
observables), else the records would be read against another circuit. Detection events and observable
flips come from stim's measurement-to-detection converter on the point's circuit: XOR of each
detector's bits, relative to the noiseless reference (all zero for codebench experiments).
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field
from functools import cached_property

import numpy as np
import stim

from codebench.build import noisy_circuit
from codebench.decoders import get_decoder
from codebench.errors import ConfigError, DataError, DecoderError, not_allowed
from codebench.qasm.description import Description
from codebench.qasm.writer import description_of
from codebench.records import Point

#: Fewest shots the lab commands take (two halves of ten blocks of at least one shot).
MIN_SHOTS = 20


@dataclass
class Experiment:
    point: Point
    description: Description
    _models: dict[bool, stim.DetectorErrorModel] = field(default_factory=dict, repr=False, compare=False)

    @cached_property
    def circuit(self) -> stim.Circuit:
        """The model's noisy circuit of the point (what the model predicts and decodes with)."""
        return noisy_circuit(self.point)

    def model(self, decomposed: bool) -> stim.DetectorErrorModel:
        """The model's detector error model (decomposed into graphlike parts or not), derived once."""
        if decomposed not in self._models:
            self._models[decomposed] = self.circuit.detector_error_model(decompose_errors=decomposed)
        return self._models[decomposed]

    @property
    def bits(self) -> int:
        return self.description.measurements

    def events(self, records: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """(detection events, observable flips) of the records, bool, one row per shot."""
        if len(records) < MIN_SHOTS:
            raise DataError(f"{len(records)} shots are too few to analyse; give at least {MIN_SHOTS} (data weights "
                            "and standard errors cut the shots into halves and blocks).")
        converter = self.circuit.compile_m2d_converter()
        dets, obs = converter.convert(measurements=records.astype(bool), separate_observables=True)
        return np.asarray(dets, dtype=bool), np.asarray(obs, dtype=bool)


def with_decoder(point: Point, decoder: str | None) -> Point:
    """``point`` decoded by ``decoder`` (its default options), or as it is."""
    if decoder is None or decoder == point.decoder:
        return point
    try:
        cls = get_decoder(decoder)
    except KeyError:
        from codebench.decoders import DECODERS

        raise ConfigError(not_allowed("--decoder", decoder, " | ".join(sorted(DECODERS)) + " or a plug-in "
                                      "'package.module:ClassName'")) from None
    except DecoderError as exc:
        raise ConfigError(f"--decoder: {exc}") from None
    options = tuple(sorted(cls.resolve_options({}, at="--decoder").items()))
    return dataclasses.replace(point, decoder=decoder, decoder_options=options)


def experiment_of(point: Point | None, description: Description | None, source: str = "the description") \
        -> Experiment:
    """The experiment of a point and/or a description; they must describe the same circuit."""
    if point is None and description is None:
        raise ConfigError("name the experiment: --description FILE, or a sweep file and --point N, or the "
                          "point's options (--code, --distance, ...).")
    if point is None:
        assert description is not None
        point = description.point
        own = description_of(point)
        if not own.same_experiment(description):
            raise DataError(f"{source} does not describe the circuit of its own point ({point.label()}): "
                            f"{_first_difference(own, description)}.")
        return Experiment(point, description)
    own = description_of(point)
    if description is not None and not own.same_experiment(description):
        raise DataError(f"{source} describes another circuit than {point.label()}: "
                        f"{_first_difference(own, description)}.")
    return Experiment(point, own)


def _first_difference(ours: Description, theirs: Description) -> str:
    if ours.measurements != theirs.measurements:
        return f"{theirs.measurements} measurement bits, the point's circuit has {ours.measurements}"
    if len(ours.detectors) != len(theirs.detectors):
        return f"{len(theirs.detectors)} detectors, the point's circuit has {len(ours.detectors)}"
    for k, (a, b) in enumerate(zip(ours.detectors, theirs.detectors)):
        if a != b:
            return f"detector {k} combines bits {list(b[0])}, the point's circuit bits {list(a[0])}"
    return "the observables or the measured qubits differ"
