"""Conformance checks for decoders, importable for your own.

Every registered decoder passes these checks (``tests/test_conformance.py``
runs them); run them on a decoder of your own before naming it in a sweep
file as ``"package.module:ClassName"``::

    from codebench.testing import check_decoder
    from mylab.decoders import UnionFind

    def test_union_find_conforms():
        check_decoder(UnionFind)                      # default circuit and options
        check_decoder(UnionFind, options={"growth": 2})

The checks (common practice for batch decoders, in the manner of estimator
check suites of scientific-Python libraries):

``options_round_trip``
    ``get_params()`` names the decoder, is plain JSON (it goes into the
    point key), and rebuilding from its options gives the same parameters.
``packed_and_unpacked_agree``
    ``decode_batch`` returns ``uint8 (shots, ceil(observables / 8))`` for
    bit-packed input and ``bool (shots, observables)`` otherwise, with the
    same predictions.
``batch_equals_one_by_one``
    Decoding a batch gives what decoding each shot alone gives.
``shot_order_does_not_matter``
    Permuting the shots permutes the predictions.
``inputs_not_mutated``
    The detection events are left as they were (they are passed read-only,
    so writing to them fails).
``pickle_round_trip``
    The decoder pickles before and after ``compile`` (it is shipped to
    workers); the copy has the same parameters and, compiled, predicts the
    same.
``seeded_reproducibility``
    The same batch seed and shot count give the same counts through
    :func:`codebench.engine.worker.run_batch`, from a fresh compile (another
    point key) and from the worker's cached decoder. This also checks that a
    worker can find the class: it must be registered or importable as
    ``module:ClassName`` (defined at module level).
``decodes_better_than_guessing``
    On the circuit, the decoder fails in fewer than half the shots in which
    predicting "no flip" fails (a working decoder at p = 1% on d = 3 fails in
    a few percent).

Each check raises :class:`AssertionError` with a message naming the decoder
and the check.
"""

from __future__ import annotations

import json
import pickle
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np
import stim

from codebench.build import noisy_circuit
from codebench.decoders import DECODERS, get_decoder
from codebench.decoders.base import Decoder
from codebench.engine.worker import batch_seed, run_batch
from codebench.errors import CodebenchError
from codebench.records import BatchTask, Point

__all__ = ["DECODER_CHECKS", "DEFAULT_POINT", "check_decoder", "decoder_checks", "run_decoder_check"]

#: The point the checks use unless a circuit is given: d = 3, 3 rounds, circuit noise p = 1%.
DEFAULT_POINT = Point("rotated_surface", 3, 3, "Z", "circuit_depolarizing", 0.01, "mwpm")


@dataclass
class _Subject:
    """One decoder class under test, its options and the circuit it is checked on."""

    cls: type[Decoder]
    options: dict[str, Any]
    circuit: stim.Circuit
    label: str

    def dem(self) -> stim.DetectorErrorModel:
        return self.circuit.detector_error_model(decompose_errors=self.cls.wants_decomposed)

    def compiled(self) -> Decoder:
        decoder = self.cls(**self.options)
        decoder.compile(self.dem())
        return decoder

    def events(self, shots: int, seed: int) -> tuple[np.ndarray, np.ndarray]:
        sampler = self.circuit.compile_detector_sampler(seed=seed)
        det, obs = sampler.sample(shots, separate_observables=True, bit_packed=True)
        return det, obs

    def fail(self, check: str, text: str) -> AssertionError:
        return AssertionError(f"decoder {self.label} fails {check}: {text}")


def _read_only(array: np.ndarray) -> np.ndarray:
    copy = np.array(array, copy=True)
    copy.flags.writeable = False
    return copy


def _decode(subject: _Subject, decoder: Decoder, check: str, events: np.ndarray, bit_packed: bool) -> np.ndarray:
    out = decoder.decode_batch(_read_only(events), bit_packed=bit_packed)
    if not isinstance(out, np.ndarray):
        raise subject.fail(check, f"decode_batch returned {type(out).__name__}, not a numpy array")
    return out


def _options_round_trip(subject: _Subject) -> None:
    check = "options_round_trip"
    params = subject.cls(**subject.options).get_params()
    if params.get("decoder") != subject.cls.name:
        raise subject.fail(check, f"get_params()['decoder'] is {params.get('decoder')!r}, not {subject.cls.name!r}")
    options = params.get("decoder_options")
    if not isinstance(options, dict):
        raise subject.fail(check, f"get_params()['decoder_options'] is {type(options).__name__}, not a dict")
    try:
        json.dumps(params, sort_keys=True, allow_nan=False)
    except (TypeError, ValueError) as exc:
        raise subject.fail(check, f"get_params() is not plain JSON ({exc})") from None
    rebuilt = subject.cls(**options).get_params()
    if rebuilt != params:
        raise subject.fail(check, f"rebuilding from get_params() gives {rebuilt}, not {params}")


def _packed_and_unpacked_agree(subject: _Subject) -> None:
    check = "packed_and_unpacked_agree"
    decoder = subject.compiled()
    det, _ = subject.events(200, seed=2)
    detectors, observables = subject.circuit.num_detectors, subject.circuit.num_observables
    unpacked = np.unpackbits(det, axis=1, count=detectors, bitorder="little").astype(bool)
    packed_pred = _decode(subject, decoder, check, det, True)
    plain_pred = _decode(subject, decoder, check, unpacked, False)
    want_packed = (len(det), (observables + 7) // 8)
    if packed_pred.dtype != np.uint8 or packed_pred.shape != want_packed:
        raise subject.fail(check, f"bit-packed predictions are {packed_pred.dtype} {packed_pred.shape}, "
                                  f"not uint8 {want_packed}")
    if plain_pred.dtype != np.bool_ or plain_pred.shape != (len(det), observables):
        raise subject.fail(check, f"unpacked predictions are {plain_pred.dtype} {plain_pred.shape}, "
                                  f"not bool {(len(det), observables)}")
    repacked = np.packbits(plain_pred, axis=1, bitorder="little")
    differ = np.flatnonzero(np.any(repacked != packed_pred, axis=1))
    if differ.size:
        raise subject.fail(check, f"{differ.size} of {len(det)} shots differ between bit-packed and unpacked "
                                  f"input (first: shot {differ[0]})")


def _batch_equals_one_by_one(subject: _Subject) -> None:
    check = "batch_equals_one_by_one"
    decoder = subject.compiled()
    det, _ = subject.events(200, seed=1)
    batch = _decode(subject, decoder, check, det, True)
    singles = np.concatenate([_decode(subject, decoder, check, det[i: i + 1], True) for i in range(len(det))])
    differ = np.flatnonzero(np.any(batch != singles, axis=1))
    if differ.size:
        raise subject.fail(check, f"{differ.size} of {len(det)} shots decode differently alone than in the "
                                  f"batch (first: shot {differ[0]})")


def _shot_order_does_not_matter(subject: _Subject) -> None:
    check = "shot_order_does_not_matter"
    decoder = subject.compiled()
    det, _ = subject.events(300, seed=3)
    order = np.random.default_rng(0).permutation(len(det))
    forward = _decode(subject, decoder, check, det, True)[order]
    permuted = _decode(subject, decoder, check, det[order], True)
    differ = np.flatnonzero(np.any(forward != permuted, axis=1))
    if differ.size:
        raise subject.fail(check, f"{differ.size} of {len(det)} predictions change when the shots are reordered")


def _inputs_not_mutated(subject: _Subject) -> None:
    check = "inputs_not_mutated"
    decoder = subject.compiled()
    det, _ = subject.events(100, seed=4)
    unpacked = np.unpackbits(det, axis=1, count=subject.circuit.num_detectors, bitorder="little").astype(bool)
    for events, packed in ((det, True), (unpacked, False)):
        layout = "bit-packed" if packed else "unpacked"
        before = events.copy()
        try:
            decoder.decode_batch(_read_only(events), bit_packed=packed)
            decoder.decode_batch(events, bit_packed=packed)
        except ValueError as exc:
            if "read-only" in str(exc):
                raise subject.fail(check, f"decode_batch writes to its {layout} input ({exc})") from None
            raise
        if not np.array_equal(events, before):
            raise subject.fail(check, f"decode_batch modified its {layout} input")


def _pickle_round_trip(subject: _Subject) -> None:
    check = "pickle_round_trip"
    fresh = subject.cls(**subject.options)
    decoder = subject.compiled()
    det, _ = subject.events(200, seed=5)
    expected = _decode(subject, decoder, check, det, True)
    for state, original in (("before compile()", fresh), ("after compile()", decoder)):
        try:
            clone = pickle.loads(pickle.dumps(original))
        except Exception as exc:  # noqa: BLE001 - any failure to pickle is the finding
            raise subject.fail(check, f"pickling {state} fails ({type(exc).__name__}: {exc})") from None
        if clone.get_params() != original.get_params():
            raise subject.fail(check, f"the copy pickled {state} has parameters {clone.get_params()}, "
                                      f"not {original.get_params()}")
        clone.compile(subject.dem())
        if not np.array_equal(_decode(subject, clone, check, det, True), expected):
            raise subject.fail(check, f"the copy pickled {state} and compiled predicts differently")


def _worker_name(cls: type[Decoder]) -> str | None:
    """What a point must hold for a worker to find ``cls``: its registered name or ``module:ClassName``."""
    if DECODERS.get(cls.name) is cls:
        return cls.name
    spec = f"{cls.__module__}:{cls.__qualname__}"
    try:
        return spec if get_decoder(spec) is cls else None
    except CodebenchError:
        return None


def _seeded_reproducibility(subject: _Subject) -> None:
    check = "seeded_reproducibility"
    name = _worker_name(subject.cls)
    if name is None:
        raise subject.fail(check, f"a worker cannot find the class: it is not registered and "
                                  f"{subject.cls.__module__}:{subject.cls.__qualname__} does not import it "
                                  "(define it at module level in an importable module)")
    base = DEFAULT_POINT
    point = Point(base.code, base.distance, base.rounds, base.basis, base.noise, base.p, name,
                  decoder_options=tuple(sorted(subject.options.items())))
    shots = 2000
    seed = batch_seed(11, point.key(11), 0, shots)
    try:
        results = [
            run_batch(BatchTask(point.key(sweep_seed), point.params(), 0, shots, seed))
            for sweep_seed in (11, 12, 12)  # 12 twice: the second run uses the worker's cached decoder
        ]
    except CodebenchError as exc:  # the worker refused it (for a plug-in: not deterministic)
        raise subject.fail(check, str(exc)) from None
    counts = [r.failures for r in results]
    if len(set(counts)) != 1:
        raise subject.fail(check, f"the same batch seed and {shots} shots gave failure counts {counts} "
                                  "(fresh compile, fresh compile, cached decoder)")
    if any(r.shots != shots or not r.decode_seconds >= 0 for r in results):
        raise subject.fail(check, "run_batch reported wrong shots or a negative decode time")


def _decodes_better_than_guessing(subject: _Subject) -> None:
    check = "decodes_better_than_guessing"
    decoder = subject.compiled()
    det, obs = subject.events(4000, seed=6)
    failures = float(np.any(_decode(subject, decoder, check, det, True) != obs, axis=1).mean())
    guess = float(obs.any(axis=1).mean())
    if not failures < 0.5 * guess:
        raise subject.fail(check, f"it fails in {failures:.4f} of the shots; predicting no flip fails in "
                                  f"{guess:.4f}")


#: The checks by name, in the order :func:`check_decoder` runs them.
DECODER_CHECKS: dict[str, Callable[[_Subject], None]] = {
    "options_round_trip": _options_round_trip,
    "packed_and_unpacked_agree": _packed_and_unpacked_agree,
    "batch_equals_one_by_one": _batch_equals_one_by_one,
    "shot_order_does_not_matter": _shot_order_does_not_matter,
    "inputs_not_mutated": _inputs_not_mutated,
    "pickle_round_trip": _pickle_round_trip,
    "seeded_reproducibility": _seeded_reproducibility,
    "decodes_better_than_guessing": _decodes_better_than_guessing,
}


def _subject(decoder: type[Decoder] | str, circuit: stim.Circuit | None,
             options: Mapping[str, Any] | None) -> _Subject:
    if isinstance(decoder, str):
        cls = get_decoder(decoder)
    elif isinstance(decoder, type) and issubclass(decoder, Decoder):
        cls = decoder
    else:
        raise TypeError(f"decoder must be a Decoder subclass, a registered name or 'module:ClassName'; "
                        f"got {decoder!r}")
    if circuit is None:
        circuit = noisy_circuit(DEFAULT_POINT)
    elif not isinstance(circuit, stim.Circuit):
        raise TypeError(f"circuit must be a stim.Circuit; got {type(circuit).__name__}")
    resolved = cls.resolve_options(dict(options or {}))
    label = f"{cls.name!r}" + (f" with {dict(options)}" if options else "")
    return _Subject(cls, resolved, circuit, label)


def decoder_checks() -> list[str]:
    """Names of the checks, in the order :func:`check_decoder` runs them."""
    return list(DECODER_CHECKS)


def run_decoder_check(check: str, decoder: type[Decoder] | str, circuit: stim.Circuit | None = None, *,
                      options: Mapping[str, Any] | None = None) -> None:
    """Run one check (a name from :func:`decoder_checks`) on ``decoder``; ``AssertionError`` if it fails."""
    if check not in DECODER_CHECKS:
        raise ValueError(f"check must be one of {', '.join(map(repr, DECODER_CHECKS))}; got {check!r}")
    DECODER_CHECKS[check](_subject(decoder, circuit, options))


def check_decoder(decoder: type[Decoder] | str, circuit: stim.Circuit | None = None, *,
                  options: Mapping[str, Any] | None = None, skip: tuple[str, ...] = ()) -> None:
    """Run every conformance check on ``decoder``.

    Parameters
    ----------
    decoder : Decoder subclass or str
        The class, a registered name or a plug-in spec ``"package.module:ClassName"``.
    circuit : stim.Circuit, optional
        What to sample and decode (default: :data:`DEFAULT_POINT`'s circuit,
        the rotated surface code at d = 3, 3 rounds, ``circuit_depolarizing``
        at p = 0.01). ``seeded_reproducibility`` always runs on that point.
    options : mapping, optional
        Decoder options, as in the sweep file's ``decoder_options``.
    skip : tuple of str
        Checks not to run (for example ``("decodes_better_than_guessing",)``
        for a decoder meant for other circuits).

    Raises
    ------
    AssertionError
        At the first failing check, naming the decoder and the check.

    Examples
    --------
    >>> check_decoder("mwpm")
    """
    unknown = [name for name in skip if name not in DECODER_CHECKS]
    if unknown:
        raise ValueError(f"skip must name checks from {', '.join(map(repr, DECODER_CHECKS))}; got {unknown}")
    subject = _subject(decoder, circuit, options)
    for name, check in DECODER_CHECKS.items():
        if name not in skip:
            check(subject)
