"""Decoders defined outside codebench, loaded by spec ("plugin_decoder:SingleFaultLookup").

``SingleFaultLookup`` is a small working decoder: it corrects every syndrome
that one fault of the detector error model explains (the most likely such
fault) and predicts no flip otherwise. The others break one conformance
property each, to show that the suite in ``codebench.testing`` catches it.
"""

from __future__ import annotations

import os
import signal
import threading
from typing import Any, ClassVar

import numpy as np
import stim

from codebench.decoders.base import Decoder, OptionSpec
from codebench.decoders.matching import Matching


class SingleFaultLookup(Decoder):
    """Lookup table from single-fault syndromes to their observable flips."""

    name = "single_fault_lookup"
    wants_decomposed = False
    option_specs: ClassVar[dict[str, OptionSpec]] = {
        "min_probability": OptionSpec("float", 0.0, "faults below this probability are left out", low=0.0, high=0.5),
    }

    def __init__(self, **options: Any) -> None:
        super().__init__(**options)
        self._table: dict[bytes, np.ndarray] = {}
        self._detectors = 0
        self._observables = 0

    def compile(self, dem: stim.DetectorErrorModel) -> None:
        self._detectors, self._observables = dem.num_detectors, dem.num_observables
        best: dict[bytes, tuple[float, np.ndarray]] = {}
        for inst in dem.flattened():
            if inst.type != "error" or inst.args_copy()[0] < self.options["min_probability"]:
                continue
            syndrome = np.zeros(self._detectors, dtype=bool)
            flips = np.zeros(self._observables, dtype=bool)
            for t in inst.targets_copy():
                if t.is_relative_detector_id():
                    syndrome[t.val] ^= True
                elif t.is_logical_observable_id():
                    flips[t.val] ^= True
            key = np.packbits(syndrome, bitorder="little").tobytes()
            p = inst.args_copy()[0]
            if syndrome.any() and (key not in best or best[key][0] < p):
                best[key] = (p, flips)
        self._table = {key: flips for key, (_, flips) in best.items()}

    def decode_batch(self, detection_events: np.ndarray, *, bit_packed: bool = True) -> np.ndarray:
        packed = detection_events if bit_packed else np.packbits(detection_events, axis=1, bitorder="little")
        out = np.zeros((len(packed), self._observables), dtype=bool)
        if len(packed):
            unique, inverse = np.unique(packed, axis=0, return_inverse=True)
            found = np.zeros((len(unique), self._observables), dtype=bool)
            for i, row in enumerate(unique):
                hit = self._table.get(row.tobytes())
                if hit is not None:
                    found[i] = hit
            out = found[inverse.reshape(-1)]
        return np.packbits(out, axis=1, bitorder="little") if bit_packed else out


class MutatesInput(SingleFaultLookup):
    """Clears the detection events it was given (in place)."""

    name = "mutates_input"

    def decode_batch(self, detection_events: np.ndarray, *, bit_packed: bool = True) -> np.ndarray:
        out = super().decode_batch(detection_events, bit_packed=bit_packed)
        detection_events[:] = 0
        return out


class OrderDependent(SingleFaultLookup):
    """Drops the correction of every other shot of a batch."""

    name = "order_dependent"

    def decode_batch(self, detection_events: np.ndarray, *, bit_packed: bool = True) -> np.ndarray:
        out = super().decode_batch(detection_events, bit_packed=bit_packed).copy()
        out[1::2] = 0
        return out


class Unpicklable(SingleFaultLookup):
    """Keeps a lock, which does not pickle."""

    name = "unpicklable"

    def __init__(self, **options: Any) -> None:
        super().__init__(**options)
        self._lock = threading.Lock()


class Unseeded(SingleFaultLookup):
    """Flips predictions at random, from an unseeded generator."""

    name = "unseeded"

    def decode_batch(self, detection_events: np.ndarray, *, bit_packed: bool = True) -> np.ndarray:
        out = super().decode_batch(detection_events, bit_packed=False)
        out = out ^ (np.random.default_rng().random(out.shape) < 0.3)
        return np.packbits(out, axis=1, bitorder="little") if bit_packed else out


class DiesOnce(Matching):
    """MWPM whose process kills itself (SIGKILL) in the first batch it decodes, once per marker file.

    The worker is then certainly inside a batch when it dies, whatever the
    machine's load: the scheduler's view of the lost batch does not depend on
    timing. ``CODEBENCH_TEST_DIE_MARKER`` names the marker; unset, it decodes
    like ``mwpm``.
    """

    name = "dies_once"

    def decode_batch(self, detection_events: np.ndarray, *, bit_packed: bool = True) -> np.ndarray:
        marker = os.environ.get("CODEBENCH_TEST_DIE_MARKER")
        if marker:
            try:
                os.close(os.open(marker, os.O_CREAT | os.O_EXCL | os.O_WRONLY))
            except FileExistsError:
                pass
            else:
                os.kill(os.getpid(), signal.SIGKILL)
        return super().decode_batch(detection_events, bit_packed=bit_packed)


class _Broken(SingleFaultLookup):
    """Base of decoders that break the output contract in one way each (``shape_of`` what they return)."""

    def decode_batch(self, detection_events: np.ndarray, *, bit_packed: bool = True) -> Any:
        good = super().decode_batch(detection_events, bit_packed=bit_packed)
        return self.spoil(good, len(detection_events))

    def spoil(self, good: np.ndarray, shots: int) -> Any:
        return good


class WideOutput(_Broken):
    name = "wide_output"

    def spoil(self, good: np.ndarray, shots: int) -> Any:
        return np.zeros((shots, 5), dtype=np.uint8)


class FlatOutput(_Broken):
    name = "flat_output"

    def spoil(self, good: np.ndarray, shots: int) -> Any:
        return good[:, 0]


class TinyOutput(_Broken):
    name = "tiny_output"

    def spoil(self, good: np.ndarray, shots: int) -> Any:
        return np.zeros((1, 1), dtype=np.uint8)


class FloatOutput(_Broken):
    name = "float_output"

    def spoil(self, good: np.ndarray, shots: int) -> Any:
        return good.astype(float)


class UnpackedOutput(_Broken):
    name = "unpacked_output"

    def spoil(self, good: np.ndarray, shots: int) -> Any:
        return np.unpackbits(good, axis=1, bitorder="little").astype(bool)


class PaddingBitsSet(_Broken):
    name = "padding_bits_set"

    def spoil(self, good: np.ndarray, shots: int) -> Any:
        return good | np.uint8(0x80)


class NoOutput(_Broken):
    name = "no_output"

    def spoil(self, good: np.ndarray, shots: int) -> Any:
        return None


class RaisesInDecode(_Broken):
    name = "raises_in_decode"

    def spoil(self, good: np.ndarray, shots: int) -> Any:
        raise ValueError("lookup table exhausted")


class RaisesInCompile(SingleFaultLookup):
    name = "raises_in_compile"

    def compile(self, dem: stim.DetectorErrorModel) -> None:
        raise RuntimeError("cannot build the graph")


class CrashesOnThirdBatch(Matching):
    """MWPM whose process dies (``CODEBENCH_TEST_CRASH`` = ``segfault`` or ``exit``) on a 4,096-shot batch.

    Batches 0 and 1 (1,024 and 2,048 shots) finish first, so a crash leaves stored batches to resume
    from. Unset, it decodes like ``mwpm``: the "fixed" decoder of a rerun.
    """

    name = "crashes_on_third_batch"

    def decode_batch(self, detection_events: np.ndarray, *, bit_packed: bool = True) -> np.ndarray:
        how = os.environ.get("CODEBENCH_TEST_CRASH")
        if how and len(detection_events) == 4096:
            if how == "segfault":
                os.kill(os.getpid(), signal.SIGSEGV)
            os._exit(3)
        return super().decode_batch(detection_events, bit_packed=bit_packed)
