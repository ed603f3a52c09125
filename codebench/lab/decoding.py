"""Decode measured detection events with the model's weights or with weights learned from the data.

Decoding goes through the same path as a simulated batch (the decoder's ``compile`` and bit-packed
``decode_batch``, checked by :func:`codebench.engine.worker.decode`), so a measured point is decoded
exactly as the sampler's shots are. Data weights are never judged on the shots they were learned from:
the shots are cut into two halves (in the order they were taken), the graph is re-weighted from one
half and decodes the other, and the other way round (two-fold cross-fitting; every shot is decoded
once, by weights learned without it).
"""

from __future__ import annotations

import time
from dataclasses import dataclass

import numpy as np
import stim

from codebench.decoders import get_decoder
from codebench.engine.worker import CompiledPoint, compiled_decoder, decode
from codebench.lab.experiment import Experiment
from codebench.lab.graph import estimate_edges, model_graph, reweighted_model
from codebench.records import Point

WEIGHTS = ("model", "data")


@dataclass(frozen=True)
class Decoded:
    """Which shots failed (the prediction differs from the measured observable) and the decoding time."""

    failed: np.ndarray
    seconds: float

    @property
    def failures(self) -> int:
        return int(np.count_nonzero(self.failed))


def compile_decoder(point: Point, dem: stim.DetectorErrorModel, circuit: stim.Circuit) -> CompiledPoint:
    """The point's decoder compiled for ``dem``, as the engine's workers compile it."""
    return CompiledPoint(circuit, compiled_decoder(point, dem), dem.num_detectors, dem.num_observables, dem,
                         point.decoder)


def decode_events(compiled: CompiledPoint, dets: np.ndarray, obs: np.ndarray) -> Decoded:
    """Decode bool detection events; compare with bool observable flips."""
    packed = np.packbits(dets, axis=1, bitorder="little")
    start = time.perf_counter()
    predicted = decode(compiled, packed)
    seconds = time.perf_counter() - start
    actual = np.packbits(obs, axis=1, bitorder="little")
    return Decoded(np.any(predicted != actual, axis=1), seconds)


def model_weighted(experiment: Experiment, dets: np.ndarray, obs: np.ndarray) -> Decoded:
    """Decode with the model's detector error model (decomposed if the decoder asks for it)."""
    wants = get_decoder(experiment.point.decoder).wants_decomposed
    compiled = compile_decoder(experiment.point, experiment.model(wants), experiment.circuit)
    return decode_events(compiled, dets, obs)


def halves(shots: int) -> list[tuple[slice, slice]]:
    """(learn, decode) slices of the two-fold cross-fit: first half <-> second half.

    >>> halves(5)
    [(slice(0, 2, None), slice(2, 5, None)), (slice(2, 5, None), slice(0, 2, None))]
    """
    middle = shots // 2
    first, second = slice(0, middle), slice(middle, shots)
    return [(first, second), (second, first)]


def data_weighted(experiment: Experiment, dets: np.ndarray, obs: np.ndarray) -> Decoded:
    """Decode each half of the shots with the graph re-weighted from the other half."""
    graph = model_graph(experiment.model(True))
    failed = np.zeros(len(dets), dtype=bool)
    seconds = 0.0
    for learn, held_out in halves(len(dets)):
        dem = reweighted_model(estimate_edges(graph, dets[learn]))
        compiled = compile_decoder(experiment.point, dem, experiment.circuit)
        part = decode_events(compiled, dets[held_out], obs[held_out])
        failed[held_out] = part.failed
        seconds += part.seconds
    return Decoded(failed, seconds)


def decode_with(weights: str, experiment: Experiment, dets: np.ndarray, obs: np.ndarray) -> Decoded:
    return (model_weighted if weights == "model" else data_weighted)(experiment, dets, obs)
