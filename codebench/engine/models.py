"""A point's circuit and detector error model: built once per process, shipped instead of rebuilt.

The coordinator already builds each point's circuit (to size its batches);
the in-process worker reuses it from :func:`circuit_of`'s cache. Remote
workers receive the detector error model with their batches, compressed
(:func:`pack_model`: its text, which stim parses back to an equal model in a
few per cent of the time the circuit-to-model analysis takes), so with
several workers the analysis runs once, in the coordinator, not once per
worker. Both caches are small LRU caches shared by a process's threads; the
objects in them are never mutated.
"""

from __future__ import annotations

import json
import threading
import zlib
from collections import OrderedDict
from typing import Any

import stim

from codebench.build import noisy_circuit
from codebench.records import Point

__all__ = ["circuit_of", "model_of", "pack_model", "unpack_model"]

#: Circuits and models a process always keeps (least recently used evicted first) ...
CACHE_SIZE = 8
#: ... and more while their total size stays under this many units (a unit is one qubit in one
#: tick, one detector, one measurement or one error mechanism: a few bytes of stim's memory). The
#: coordinator describes every point before the first batch runs; a sweep of many small points
#: then finds them all still built when it runs them, while a few large ones stay bounded.
CACHE_UNITS = 2_000_000

_lock = threading.Lock()
_circuits: OrderedDict[str, stim.Circuit] = OrderedDict()
_models: OrderedDict[tuple[str, bool], stim.DetectorErrorModel] = OrderedDict()


def _units(item: stim.Circuit | stim.DetectorErrorModel) -> int:
    if isinstance(item, stim.Circuit):
        return int(item.num_qubits * (item.num_ticks + 1) + item.num_measurements + item.num_detectors)
    return int(item.num_errors + item.num_detectors)


def _remember(cache: OrderedDict[Any, Any], key: Any, value: Any) -> None:
    cache[key] = value
    cache.move_to_end(key)
    total = sum(_units(item) for item in cache.values())
    while len(cache) > CACHE_SIZE and total > CACHE_UNITS:
        _, evicted = cache.popitem(last=False)
        total -= _units(evicted)


def _identity(params: dict[str, Any]) -> str:
    return json.dumps(params, sort_keys=True, separators=(",", ":"))


def circuit_of(params: dict[str, Any]) -> stim.Circuit:
    """The noisy circuit of the point with ``params`` (cached; do not modify it)."""
    key = _identity(params)
    with _lock:
        if key in _circuits:
            _circuits.move_to_end(key)
            return _circuits[key]
    circuit = noisy_circuit(Point.from_params(params))
    with _lock:
        _remember(_circuits, key, circuit)
    return circuit


def model_of(params: dict[str, Any], decomposed: bool) -> stim.DetectorErrorModel:
    """The detector error model of the point (decomposed into graphlike parts if asked; cached)."""
    key = (_identity(params), decomposed)
    with _lock:
        if key in _models:
            _models.move_to_end(key)
            return _models[key]
    model = circuit_of(params).detector_error_model(decompose_errors=decomposed)
    with _lock:
        _remember(_models, key, model)
    return model


def pack_model(model: stim.DetectorErrorModel) -> bytes:
    """``model`` as compressed text, to travel with a batch (exact: it parses back to an equal model)."""
    return zlib.compress(str(model).encode(), 1)


def unpack_model(data: bytes) -> stim.DetectorErrorModel:
    return stim.DetectorErrorModel(zlib.decompress(data).decode())
