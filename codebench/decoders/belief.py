"""Belief propagation with a post-processing fallback (ldpc 2.x): ``bposd`` and ``bplsd``.

Both decode on the check matrix of the point's detector error model, not on
a matching graph, so they need no graphlike decomposition
(``wants_decomposed = False``) and apply to every code family and noise
model, hyperedges included:

- ``H`` (detectors x mechanisms) and ``L`` (observables x mechanisms): one
  column per distinct error mechanism of the flattened model. Mechanisms
  with the same detectors and the same observables are one column, their
  probabilities combined as independent flips, p = p1 (1 - p2) + p2 (1 - p1).
  Mechanisms that trigger no detector cannot be decoded and are left out (so
  are those of probability 0).
- For a syndrome s, BP looks for an error e with H e = s (mod 2) using the
  column probabilities as priors; when it does not converge, the fallback
  (OSD or LSD) takes over from BP's soft output. The prediction is L e (mod 2).

``bposd``: BP + ordered-statistics decoding, as applied to quantum codes by
Panteleev & Kalachev, Quantum 5, 585 (2021) and Roffe, White, Burton,
Campbell, Phys. Rev. Research 2, 043423 (2020) (OSD after Fossorier & Lin,
IEEE Trans. Inf. Theory 41, 1379 (1995)). ``bplsd``: BP + localised
statistics decoding, which runs OSD on independent clusters of the syndrome
(Hillmann et al., "Localized statistics decoding", arXiv:2406.18655 (2024),
from memory).

ldpc decodes one syndrome at a time. :meth:`BeliefDecoder.decode_batch`
therefore decodes each distinct syndrome of a batch once (rows made unique
with ``numpy.unique``) and skips the empty syndrome (prediction 0): at the
rates of interest most shots share a few syndromes, so the Python loop runs
over far fewer items than shots.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any, ClassVar

import numpy as np
import scipy.sparse as sp
import stim

from codebench.decoders.base import Decoder, OptionSpec
from codebench.errors import not_allowed

__all__ = ["BeliefLSD", "BeliefOSD", "CheckMatrices", "check_matrices"]

#: Largest order of exhaustive OSD/LSD (2^order candidates per syndrome).
MAX_EXHAUSTIVE_ORDER = 16


@dataclass(frozen=True)
class CheckMatrices:
    """The detector error model as a check matrix problem.

    Attributes
    ----------
    check : scipy.sparse.csc_matrix
        ``uint8``, shape ``(detectors, mechanisms)``: which detectors each mechanism flips.
    observables : scipy.sparse.csc_matrix
        ``uint8``, shape ``(observables, mechanisms)``: which observables it flips.
    priors : numpy.ndarray
        ``float64``, shape ``(mechanisms,)``: probability of each mechanism.
    """

    check: sp.csc_matrix
    observables: sp.csc_matrix
    priors: np.ndarray


def _xor(p: float, q: float) -> float:
    """Probability that exactly one of two independent flips happens."""
    return p * (1.0 - q) + q * (1.0 - p)


def check_matrices(dem: stim.DetectorErrorModel) -> CheckMatrices:
    """Check matrix, observable matrix and priors of ``dem``.

    Parameters
    ----------
    dem : stim.DetectorErrorModel
        Decomposed or not: the parts of a decomposed error (``^``) are
        combined again, since their symptoms add up mod 2.

    Examples
    --------
    >>> dem = stim.DetectorErrorModel('''
    ...     error(0.1) D0 D1
    ...     error(0.2) D0 D1
    ...     error(0.05) D1 L0
    ...     error(0.01) L0
    ... ''')
    >>> m = check_matrices(dem)
    >>> m.check.toarray().tolist(), m.observables.toarray().tolist()
    ([[1, 0], [1, 1]], [[0, 1]])
    >>> [round(float(p), 6) for p in m.priors]
    [0.26, 0.05]
    """
    if not isinstance(dem, stim.DetectorErrorModel):
        raise TypeError(f"dem must be a stim.DetectorErrorModel; got {type(dem).__name__}")
    columns: dict[tuple[tuple[int, ...], tuple[int, ...]], float] = {}
    for instruction in dem.flattened():
        if instruction.type != "error":
            continue
        p = float(instruction.args_copy()[0])
        detectors: set[int] = set()
        observables: set[int] = set()
        for target in instruction.targets_copy():
            if target.is_relative_detector_id():
                detectors ^= {target.val}
            elif target.is_logical_observable_id():
                observables ^= {target.val}
        if p <= 0.0 or not detectors:
            continue
        key = (tuple(sorted(detectors)), tuple(sorted(observables)))
        columns[key] = _xor(columns.get(key, 0.0), p)
    keys = list(columns)
    det_rows = [d for key in keys for d in key[0]]
    det_cols = [j for j, key in enumerate(keys) for _ in key[0]]
    obs_rows = [o for key in keys for o in key[1]]
    obs_cols = [j for j, key in enumerate(keys) for _ in key[1]]
    shape = len(keys)
    check = sp.csc_matrix(
        (np.ones(len(det_rows), dtype=np.uint8), (det_rows, det_cols)), shape=(dem.num_detectors, shape),
        dtype=np.uint8,
    )
    observables_matrix = sp.csc_matrix(
        (np.ones(len(obs_rows), dtype=np.uint8), (obs_rows, obs_cols)), shape=(dem.num_observables, shape),
        dtype=np.uint8,
    )
    priors = np.array([columns[k] for k in keys], dtype=np.float64)
    return CheckMatrices(check, observables_matrix, priors)


_BP_OPTIONS: dict[str, OptionSpec] = {
    "bp_method": OptionSpec(
        "choice", "minimum_sum", "message update rule of belief propagation",
        choices=("minimum_sum", "product_sum")),
    "max_iter": OptionSpec("int", 30, "BP iterations before the fallback takes over", low=1),
    "ms_scaling_factor": OptionSpec(
        "float", 0.625, "scaling of minimum-sum messages; 0 selects ldpc's adaptive factor; "
        "ignored by product_sum", low=0.0, high=1.0),
    "schedule": OptionSpec(
        "choice", "parallel", "order of the message updates (serial: in the fixed column order)",
        choices=("parallel", "serial")),
}


class BeliefDecoder(Decoder):
    """Shared part of ``bposd`` and ``bplsd``: matrices, batch strategy, pickling."""

    wants_decomposed = False
    #: The option that names the fallback method, its order option, and the method without an order.
    _method_key: ClassVar[str]
    _order_key: ClassVar[str]
    _orderless: ClassVar[str]
    _exhaustive: ClassVar[str]

    def __init__(self, **options: Any) -> None:
        super().__init__(**options)
        self._matrices: CheckMatrices | None = None
        self._decoder: Any = None
        self._observables: np.ndarray | None = None

    @classmethod
    def combine_options(cls, chosen: dict[str, Any], given: Mapping[str, Any], at: str) -> dict[str, Any]:
        method, order = chosen[cls._method_key], chosen[cls._order_key]
        path = f"{at}.{cls._order_key}"
        if method == cls._orderless:
            # The order means nothing without a search: one spelling per decoder, order 0.
            if cls._order_key in given and order != 0:
                allowed = f"0 with {cls._method_key} = {cls._orderless!r} for {cls.name}"
                raise ValueError(not_allowed(path, order, allowed))
            chosen[cls._order_key] = 0
        elif method == cls._exhaustive and order > MAX_EXHAUSTIVE_ORDER:
            raise ValueError(not_allowed(
                path, order, f"an integer in [0, {MAX_EXHAUSTIVE_ORDER}] with {cls._method_key} = "
                f"{cls._exhaustive!r} for {cls.name} (2^order candidates per syndrome)"))
        return chosen

    def _build(self, matrices: CheckMatrices) -> Any:
        raise NotImplementedError

    def compile(self, dem: stim.DetectorErrorModel) -> None:
        matrices = check_matrices(dem)
        self._matrices = matrices
        self._observables = matrices.observables.toarray().astype(bool)
        self._decoder = self._build(matrices) if matrices.priors.size else None

    def _bp_arguments(self, matrices: CheckMatrices) -> dict[str, Any]:
        return {
            "error_channel": [float(p) for p in np.clip(matrices.priors, 1e-15, 1.0 - 1e-15)],
            "max_iter": int(self.options["max_iter"]),
            "bp_method": str(self.options["bp_method"]),
            "ms_scaling_factor": float(self.options["ms_scaling_factor"]),
            "schedule": str(self.options["schedule"]),
        }

    def decode_batch(self, detection_events: np.ndarray, *, bit_packed: bool = True) -> np.ndarray:
        if self._matrices is None or self._observables is None:
            raise RuntimeError("compile() the decoder before decoding")
        num_detectors, num_mechanisms = self._matrices.check.shape
        num_observables = self._observables.shape[0]
        events = np.asarray(detection_events)
        width = (num_detectors + 7) // 8 if bit_packed else num_detectors
        if events.ndim != 2 or events.shape[1] != width:
            raise ValueError(f"detection_events must have shape (shots, {width}) "
                             f"({'bit-packed ' if bit_packed else ''}{num_detectors} detectors); got {events.shape}")
        packed = events if bit_packed else np.packbits(events.astype(bool), axis=1, bitorder="little")
        shots = events.shape[0]
        flips = np.zeros((shots, num_observables), dtype=bool)
        if shots and num_detectors and self._decoder is not None:
            unique, inverse = np.unique(packed, axis=0, return_inverse=True)
            syndromes = np.unpackbits(unique, axis=1, count=num_detectors, bitorder="little")
            unique_flips = np.zeros((len(unique), num_observables), dtype=bool)
            for row, syndrome in enumerate(syndromes):
                if not syndrome.any():
                    continue  # no detection event: no correction
                error = np.asarray(self._decoder.decode(syndrome), dtype=bool)
                unique_flips[row] = np.logical_xor.reduce(self._observables[:, error], axis=1)
            flips = unique_flips[inverse.reshape(-1)]
        return np.packbits(flips, axis=1, bitorder="little") if bit_packed else flips

    def __getstate__(self) -> dict[str, Any]:
        # ldpc decoders do not pickle; a worker compiles its own from the model.
        return {"options": self.options}

    def __setstate__(self, state: dict[str, Any]) -> None:
        self.options = state["options"]
        self._matrices = None
        self._decoder = None
        self._observables = None


class BeliefOSD(BeliefDecoder):
    """``bposd``: belief propagation, then ordered-statistics decoding where BP does not converge.

    Options (defaults first): ``bp_method`` ``"minimum_sum"`` | ``"product_sum"``;
    ``max_iter`` 30 (>= 1); ``ms_scaling_factor`` 0.625 (in [0, 1], 0: adaptive);
    ``schedule`` ``"parallel"`` | ``"serial"``; ``osd_method`` ``"osd_cs"``
    (combination sweep) | ``"osd_e"`` (exhaustive, order <= 16) | ``"osd0"``
    (order 0 only); ``osd_order`` 7 (>= 0).

    Examples
    --------
    >>> circuit = stim.Circuit.generated("repetition_code:memory", distance=3, rounds=2,
    ...                                  before_round_data_depolarization=0.05)
    >>> decoder = BeliefOSD(osd_order=2)
    >>> decoder.options["osd_method"], decoder.options["osd_order"]
    ('osd_cs', 2)
    >>> decoder.compile(circuit.detector_error_model())
    >>> det, obs = circuit.compile_detector_sampler(seed=3).sample(500, separate_observables=True, bit_packed=True)
    >>> bool((decoder.decode_batch(det) != obs).mean() < (obs != 0).mean())
    True
    """

    name = "bposd"
    relative_cost = 2300.0
    option_specs = {
        **_BP_OPTIONS,
        "osd_method": OptionSpec(
            "choice", "osd_cs", "OSD variant: combination sweep, exhaustive, or order 0",
            choices=("osd_cs", "osd_e", "osd0")),
        "osd_order": OptionSpec("int", 7, "OSD search depth (0 for osd0)", low=0),
    }
    _method_key, _order_key, _orderless, _exhaustive = "osd_method", "osd_order", "osd0", "osd_e"

    def _build(self, matrices: CheckMatrices) -> Any:
        from ldpc.bposd_decoder import (
            BpOsdDecoder,  # ldpc (and what it imports) only when used
        )

        return BpOsdDecoder(
            matrices.check, **self._bp_arguments(matrices),
            osd_method=str(self.options["osd_method"]), osd_order=int(self.options["osd_order"]),
        )


class BeliefLSD(BeliefDecoder):
    """``bplsd``: belief propagation, then localised statistics decoding where BP does not converge.

    Options (defaults first): the BP options of :class:`BeliefOSD`;
    ``lsd_method`` ``"lsd_cs"`` | ``"lsd_e"`` (order <= 16) | ``"lsd0"``
    (order 0 only); ``lsd_order`` 7 (>= 0), the OSD order within each
    cluster; ``bits_per_step`` 1 (>= 1), columns added to a cluster per growth step.
    """

    name = "bplsd"
    relative_cost = 400.0
    option_specs = {
        **_BP_OPTIONS,
        "lsd_method": OptionSpec(
            "choice", "lsd_cs", "OSD variant run on each cluster: combination sweep, exhaustive, or order 0",
            choices=("lsd_cs", "lsd_e", "lsd0")),
        "lsd_order": OptionSpec("int", 7, "OSD search depth within each cluster (0 for lsd0)", low=0),
        "bits_per_step": OptionSpec("int", 1, "columns added to a cluster per growth step", low=1),
    }
    _method_key, _order_key, _orderless, _exhaustive = "lsd_method", "lsd_order", "lsd0", "lsd_e"

    def _build(self, matrices: CheckMatrices) -> Any:
        from ldpc.bplsd_decoder import BpLsdDecoder

        return BpLsdDecoder(
            matrices.check, **self._bp_arguments(matrices),
            lsd_method=str(self.options["lsd_method"]), lsd_order=int(self.options["lsd_order"]),
            bits_per_step=int(self.options["bits_per_step"]),
        )
