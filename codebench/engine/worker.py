"""What a worker does with one batch: sample, decode, count.

Everything heavy stays in the libraries: stim samples bit-packed detection
events and observables, the decoder decodes the whole batch, numpy compares.
Compiled circuits and decoders are cached per point key in the worker
process, so a point is compiled once per worker, not once per batch.
"""

from __future__ import annotations

import hashlib
import platform
import threading
import time
from collections import OrderedDict
from dataclasses import dataclass, replace
from functools import lru_cache
from importlib import metadata
from pathlib import Path
from typing import Any, Iterator

import numpy as np
import stim

from codebench.decoders import get_decoder
from codebench.decoders.base import Decoder
from codebench.decoders.plugins import is_spec
from codebench.engine.fault_sampling import FaultTable, fault_shots, sample_fault_sets
from codebench.engine.models import circuit_of, model_of, unpack_model
from codebench.errors import DecoderError
from codebench.records import BatchResult, BatchTask, Point, pack_failed

#: Compiled points a worker keeps (least recently used evicted first).
CACHE_SIZE = 8


@dataclass
class CompiledPoint:
    circuit: stim.Circuit
    decoder: Decoder
    num_detectors: int
    num_observables: int
    dem: stim.DetectorErrorModel
    #: As the point names it (a registered name or a plug-in spec), for messages.
    decoder_name: str = ""
    _faults: FaultTable | None = None

    @property
    def faults(self) -> FaultTable:
        """The detector error model's mechanisms as bit-packed rows (built on first use)."""
        if self._faults is None:
            self._faults = FaultTable.from_dem(self.dem)
        return self._faults


class _ThreadCache(threading.local):
    """One cache per worker thread: a decoder object is never shared by two threads."""

    def __init__(self) -> None:
        self.points: OrderedDict[str, CompiledPoint] = OrderedDict()


_cache = _ThreadCache()


def batch_seed(sweep_seed: int, point_key: str, batch_index: int, shots: int) -> int:
    """Seed of one batch, derived from the sweep seed, the point's stream and the batch.

    ``point_key``: the point's :meth:`~codebench.records.Point.sample_key` (the same for every
    decoder of one physical point). The batch size is part of it, so a batch re-cut after a budget
    change never reuses the random stream of a stored batch.
    """
    text = f"{sweep_seed}:{point_key}:{batch_index}:{shots}"
    return int.from_bytes(hashlib.sha256(text.encode()).digest()[:8], "little") >> 1


def compile_point(params: dict[str, Any], model: bytes | None = None) -> CompiledPoint:
    """Build the noisy circuit and compile the decoder for one point.

    ``model``: the point's detector error model as shipped by the coordinator
    (:func:`~codebench.engine.models.pack_model`); without it the model is
    derived from the circuit here.
    """
    point = Point.from_params(params)
    circuit = circuit_of(params)
    decoder_cls = get_decoder(point.decoder)
    dem = unpack_model(model) if model is not None else model_of(params, decoder_cls.wants_decomposed)
    decoder = compiled_decoder(point, dem)
    entry = CompiledPoint(circuit, decoder, circuit.num_detectors, circuit.num_observables, dem, point.decoder)
    if is_spec(point.decoder):
        check_deterministic(entry)
    return entry


def compiled_decoder(point: Point, dem: stim.DetectorErrorModel) -> Decoder:
    """The point's decoder compiled for ``dem``; whatever fails in its ``compile`` is a DecoderError naming it."""
    decoder = get_decoder(point.decoder)(**dict(point.decoder_options))
    try:
        decoder.compile(dem)
    except DecoderError:
        raise
    except Exception as exc:
        raise DecoderError(f"decoder {point.decoder!r} failed in compile: {type(exc).__name__}: {exc}") from exc
    return decoder


#: Shots of the batch a plug-in decoder must decode twice alike before its point runs.
DETERMINISM_SHOTS = 256


def check_deterministic(point: CompiledPoint) -> None:
    """Refuse a decoder that predicts differently when given the same batch twice.

    Counts for a seed must not depend on anything but the seed; a decoder with
    its own unseeded randomness (or state carried between calls) breaks that
    silently. Cheap: one small batch at a fixed seed, decoded twice.
    """
    sampler = point.circuit.compile_detector_sampler(seed=DETERMINISM_SHOTS)
    detectors, _ = sampler.sample(DETERMINISM_SHOTS, separate_observables=True, bit_packed=True)
    first = decode(point, detectors)
    second = decode(point, detectors)
    if not np.array_equal(first, second):
        differ = int(np.count_nonzero(np.any(first != second, axis=1)))
        raise DecoderError(f"decoder {point.decoder_name!r} is not deterministic: decoding the same "
                           f"{DETERMINISM_SHOTS} shots twice gave different predictions for {differ} of them; "
                           "counts for a seed would not be reproducible (seed its randomness from its options)")


def compiled(point_key: str, params: dict[str, Any], model: bytes | None = None) -> CompiledPoint:
    """The cached compiled point, compiling it on first use."""
    cache = _cache.points
    if point_key in cache:
        cache.move_to_end(point_key)
        return cache[point_key]
    entry = compile_point(params, model)
    cache[point_key] = entry
    while len(cache) > CACHE_SIZE:
        cache.popitem(last=False)
    return entry


def failed_shots(predicted: np.ndarray, actual: np.ndarray) -> np.ndarray:
    """Per shot: whether any bit-packed observable prediction differs from the truth."""
    failed: np.ndarray = np.any(predicted != actual, axis=1)
    return failed


def count_failures(predicted: np.ndarray, actual: np.ndarray) -> int:
    """Shots where any bit-packed observable prediction differs from the truth (both checked alike)."""
    return int(np.count_nonzero(failed_shots(predicted, actual)))


def decode(point: CompiledPoint, detectors: np.ndarray) -> np.ndarray:
    """The decoder's bit-packed predictions for ``detectors``, checked against its contract.

    Whatever a decoder does wrong ends here as a :class:`DecoderError` naming it, so no
    batch of a misbehaving decoder is ever counted or stored.
    """
    name = point.decoder_name
    detectors.flags.writeable = False  # a decoder must not change its input
    try:
        predicted = point.decoder.decode_batch(detectors, bit_packed=True)
    except DecoderError:
        raise
    except Exception as exc:
        raise DecoderError(f"decoder {name!r} failed in decode_batch: {type(exc).__name__}: {exc}") from exc
    check_predictions(name, predicted, len(detectors), point.num_observables)
    return predicted


def check_predictions(name: str, predicted: object, shots: int, observables: int) -> None:
    """Refuse predictions that are not ``uint8 (shots, ceil(observables / 8))`` with zero padding bits."""
    width = (observables + 7) // 8
    expected = f"a numpy uint8 array of shape ({shots}, {width}) (bit-packed predictions, one row per shot)"
    if not isinstance(predicted, np.ndarray):
        raise DecoderError(f"decoder {name!r} returned {type(predicted).__name__} for a batch of {shots} shots; "
                           f"expected {expected}")
    if predicted.dtype != np.uint8 or predicted.shape != (shots, width):
        raise DecoderError(f"decoder {name!r} returned a {predicted.dtype} array of shape {predicted.shape} for "
                           f"a batch of {shots} shots; expected {expected}")
    spare = observables % 8
    if spare and shots and np.any(predicted[:, -1] >> spare):
        raise DecoderError(f"decoder {name!r} set bits beyond its {observables} observables in its packed "
                           "predictions (little-endian bit order, padding bits zero)")


_warm_lock = threading.Lock()
_warmed = False


def _warm_up_sampler() -> None:
    """Sample a one-qubit circuit once per process, under a lock, before any batch.

    stim imports modules lazily on its first bit-packed sample; two threads
    doing that first sample at once deadlocked in the import machinery about
    half the time (seen with 4 threads of one Dask worker). After one sample
    in the process, concurrent sampling is safe.
    """
    global _warmed
    with _warm_lock:
        if not _warmed:
            tiny = stim.Circuit("X_ERROR(0.5) 0\nM 0\nDETECTOR rec[-1]\nOBSERVABLE_INCLUDE(0) rec[-1]")
            tiny.compile_detector_sampler(seed=0).sample(1, separate_observables=True, bit_packed=True)
            _warmed = True


def run_batch(task: BatchTask) -> BatchResult:
    """Sample one batch and decode it with the task's decoder and its partners'; pure function of the task.

    Partners are the same physical point under other decoders with the same seed and shots
    (:attr:`BatchTask.partners`): their shots are sampled once and decoded by each, and each result
    is exactly what the partner's batch would have given alone.
    """
    if not _warmed:
        _warm_up_sampler()
    tasks = (task, *task.partners)
    points = [compiled(t.point_key, t.params, t.model) for t in tasks]
    start = time.perf_counter()
    failed: list[list[np.ndarray]] = [[] for _ in tasks]
    decode_seconds = [0.0] * len(tasks)
    for detectors, observables in _shots(task, points[0]):
        for i, point in enumerate(points):
            decode_start = time.perf_counter()
            predicted = decode(point, detectors)
            decode_seconds[i] += time.perf_counter() - decode_start
            failed[i].append(failed_shots(predicted, observables))
    # Sampling is shared: each result carries an equal part of it beside its own decoding.
    sampling = (time.perf_counter() - start - sum(decode_seconds)) / len(tasks)
    results = [_result(t, np.concatenate(f) if f else np.zeros(0, dtype=bool), d, sampling)
               for t, f, d in zip(tasks, failed, decode_seconds)]
    return replace(results[0], partners=tuple(results[1:]))


def _result(task: BatchTask, failed: np.ndarray, decode_seconds: float, sampling: float = 0.0) -> BatchResult:
    return BatchResult(point_key=task.point_key, batch_index=task.batch_index, shots=task.shots,
                       failures=int(np.count_nonzero(failed)), seconds=decode_seconds + sampling,
                       decode_seconds=decode_seconds, seed=task.seed, failed=pack_failed(failed))


def _shots(task: BatchTask, point: CompiledPoint) -> Iterator[tuple[np.ndarray, np.ndarray]]:
    """The batch's bit-packed detection events and observables, chunk by chunk.

    Sampled shots come from one seeded sampler drawn in chunks: stim reuses its buffers from chunk
    to chunk (a fresh large allocation per call was measurably slower), and a batch's memory stays
    bounded by the chunk, not the batch. With ``task.faults`` set, every shot has exactly that many
    faults of the detector error model instead.
    """
    chunks = _chunks(task.shots, chunk_shots(point.num_detectors, point.circuit.num_measurements))
    if task.faults is not None:
        table = point.faults
        rng = np.random.default_rng(task.seed)
        for chunk in chunks:
            yield fault_shots(table, sample_fault_sets(table.odds, task.faults, chunk, rng))
        return
    sampler = point.circuit.compile_detector_sampler(seed=task.seed)
    for chunk in chunks:
        yield sampler.sample(chunk, separate_observables=True, bit_packed=True)


#: Packages whose versions decide the counts of a batch.
COUNTING_PACKAGES = ("stim", "pymatching", "ldpc", "numpy")


@lru_cache(maxsize=1)
def environment() -> dict[str, str]:
    """What decides a batch's counts besides its task: library versions and codebench's own source.

    The source digest catches a worker whose codebench differs from the
    coordinator's though its version number is the same (an edited checkout).
    """
    out = {"python": ".".join(platform.python_version_tuple()[:2])}
    for package in COUNTING_PACKAGES:
        try:
            out[package] = metadata.version(package)
        except metadata.PackageNotFoundError:
            out[package] = "missing"
    digest = hashlib.sha256()
    root = Path(__file__).resolve().parents[1]
    for path in sorted(root.rglob("*.py")):
        digest.update(path.relative_to(root).as_posix().encode())
        digest.update(path.read_bytes())
    out["codebench"] = digest.hexdigest()[:16]
    return out


class EnvironmentMismatch(Exception):
    """A worker's libraries or codebench source differ from the coordinator's."""


def run_batch_checked(task: BatchTask, expected: dict[str, str]) -> BatchResult:
    """:func:`run_batch`, refused on a worker whose :func:`environment` is not ``expected``.

    Used where workers are other machines: a batch drawn with another stim or
    decoder version would silently give other counts for the same seed.
    """
    details = environment_difference(environment(), expected)
    if details:
        raise EnvironmentMismatch(f"worker on {platform.node()} differs from the coordinator: {details}")
    decoder = str(task.params.get("decoder", ""))
    if is_spec(decoder):
        try:
            get_decoder(decoder)
        except DecoderError as exc:  # importable on the coordinator (the sweep file was accepted), not here
            raise PluginMissing(f"the Dask worker on {platform.node()} cannot load the plug-in decoder "
                                f"{decoder!r} ({exc}); it loads on the coordinator: install it in the workers' "
                                "environment too") from None
    return run_batch(task)


class PluginMissing(DecoderError):
    """A plug-in decoder the coordinator loads is missing on a worker."""


def environment_difference(worker: dict[str, str], coordinator: dict[str, str]) -> str:
    """What differs between two :func:`environment` answers, readably; ``''`` when nothing does.

    >>> environment_difference({"stim": "1.15"}, {"stim": "1.16"})
    'stim 1.15 (coordinator: 1.16)'
    """
    differing = sorted(k for k in set(worker) | set(coordinator) if worker.get(k) != coordinator.get(k))
    return ", ".join(f"{k} {worker.get(k, 'missing')} (coordinator: {coordinator.get(k, 'missing')})"
                     for k in differing)


#: Shots drawn from the sampler at once, at most (fewer for large circuits).
CHUNK_SHOTS = 16384
#: Bit-packed detection events one chunk may hold.
CHUNK_BYTES = 8 * 1024 * 1024
#: Bits of measurement record one chunk may hold. stim samples the whole record of a
#: chunk at once; once that outgrows the core's cache, sampling slows down by up to 2x
#: (measured at d = 15: 11 us/shot at 2,048 shots per call, 20 us/shot at 8,192).
CHUNK_RECORD_BYTES = 1024 * 1024
#: Chunks are whole multiples of this many shots (stim's widest bit-packed word).
CHUNK_GRAIN = 256


def chunk_shots(num_detectors: int, num_measurements: int) -> int:
    """Shots per sampler call for a circuit of this size.

    >>> chunk_shots(24, 33), chunk_shots(3360, 3585)
    (16384, 2304)
    """
    by_events = CHUNK_BYTES // max(1, (num_detectors + 7) // 8)
    by_record = CHUNK_RECORD_BYTES * 8 // max(1, num_measurements)
    shots = min(CHUNK_SHOTS, by_events, by_record)
    return max(CHUNK_GRAIN, shots // CHUNK_GRAIN * CHUNK_GRAIN)


def _chunks(total: int, size: int) -> list[int]:
    """Split ``total`` shots into chunks of ``size`` (the last one shorter)."""
    full, rest = divmod(total, size)
    return [size] * full + ([rest] if rest else [])
