"""Conformance checks for noise models (registered or your own class).

``check_noise_model(MyModel, options={...})`` runs them all; each raises
:class:`AssertionError` naming the model and the check. The checks (common
practice for circuit noise models; the noiseless and valid-channel checks are
the physics floor every model must clear):

``params_round_trip``
    ``get_params()`` names the model, carries the rate and every declared
    option (plain JSON: it goes into the point key), and rebuilding from it
    gives the same parameters.
``declarations``
    The rate meaning, option specs and clock are declared consistently: the
    rate key and axis label are non-empty, every option's default is allowed
    by its own spec (or the model reads it from its source file), and
    ``round_duration_ns`` is a positive number exactly when
    ``has_round_duration`` says so.
``zero_noise_is_noiseless``
    At rate 0 the circuit has no error mechanism at all (so a noiseless
    circuit gives no detection events).
``largest_rate_gives_valid_channels``
    At ``p_max`` every channel probability is valid (stim refuses others).
``declared_gate_set_used``
    The two-qubit gates of the circuit are those of ``circuit_gate_set()``.
``more_noise_more_errors``
    Doubling the rate does not lower any error mechanism's total
    probability (a model whose rate means anything must be monotone).
"""

from __future__ import annotations

import json
from collections.abc import Callable, Mapping
from dataclasses import dataclass

import stim

from codebench.build import family_ideal_circuit
from codebench.codes import get_code_family
from codebench.noise import get_noise_model
from codebench.noise.base import NoiseModel

__all__ = ["NOISE_MODEL_CHECKS", "check_noise_model", "noise_model_checks", "run_noise_model_check"]

#: The rate every check but the two extremes uses.
CHECK_RATE = 0.001


@dataclass
class _Subject:
    cls: type[NoiseModel]
    options: dict[str, str]
    label: str

    def model(self, p: float) -> NoiseModel:
        return self.cls(p, **self.options)

    def circuit(self, p: float, code: str = "rotated_surface", basis: str = "X", rounds: int = 2) -> stim.Circuit:
        model = self.model(p)
        ideal = family_ideal_circuit(get_code_family(code), model, 3, rounds, "X" if basis == "X" else "Z")
        return model.decorate(ideal)

    def fail(self, check: str, text: str) -> AssertionError:
        return AssertionError(f"noise model {self.label} fails {check}: {text}")


def _params_round_trip(subject: _Subject) -> None:
    params = subject.model(CHECK_RATE).get_params()
    if params.get("noise") != subject.cls.name or params.get("p") != CHECK_RATE:
        raise subject.fail("params_round_trip", f"get_params() = {params} does not name the model and rate")
    options = params.get("noise_options")
    if not isinstance(options, dict) or set(options) != set(subject.cls.option_specs):
        raise subject.fail("params_round_trip", f"noise_options {options} are not the declared options "
                                                f"{sorted(subject.cls.option_specs)}")
    try:
        json.dumps(params, sort_keys=True)
    except TypeError as exc:
        raise subject.fail("params_round_trip", f"get_params() is not plain JSON ({exc})") from None
    rebuilt = subject.cls(params["p"], **options).get_params()
    if rebuilt != params:
        raise subject.fail("params_round_trip", f"rebuilt from its parameters it gives {rebuilt}, not {params}")


def _declarations(subject: _Subject) -> None:
    cls = subject.cls
    if not cls.rate.key or not cls.rate.axis_label or not cls.rate.short:
        raise subject.fail("declarations", f"rate meaning {cls.rate} has an empty field")
    if cls.source_key is None:
        for name, spec in cls.option_specs.items():
            try:
                spec.check(spec.default, name, cls.name)
            except (TypeError, ValueError) as exc:
                raise subject.fail("declarations", f"the default of option {name!r} is not allowed: {exc}") from None
    model = subject.model(CHECK_RATE)
    ideal = family_ideal_circuit(get_code_family("rotated_surface"), model, 3, 3, "Z")
    duration = model.round_duration_ns(ideal)
    if cls.has_round_duration != (duration is not None):
        raise subject.fail("declarations", f"has_round_duration is {cls.has_round_duration} but "
                                           f"round_duration_ns gives {duration}")
    if duration is not None and not duration > 0:
        raise subject.fail("declarations", f"a round lasts {duration} ns")


def _zero_noise_is_noiseless(subject: _Subject) -> None:
    for code in ("repetition", "rotated_surface"):
        for basis in ("Z", "X"):
            circuit = subject.circuit(0.0, code, basis, rounds=3)
            errors = circuit.detector_error_model(allow_gauge_detectors=False).num_errors
            if errors:
                raise subject.fail("zero_noise_is_noiseless", f"{errors} error mechanisms at rate 0 ({code}, {basis})")
            if circuit.compile_detector_sampler(seed=1).sample(20, append_observables=True).any():
                raise subject.fail("zero_noise_is_noiseless", f"detection events at rate 0 ({code}, {basis})")


def _largest_rate_gives_valid_channels(subject: _Subject) -> None:
    try:
        circuit = subject.circuit(subject.cls.p_max)
        circuit.detector_error_model(approximate_disjoint_errors=True)
    except ValueError as exc:
        raise subject.fail("largest_rate_gives_valid_channels", f"at p_max = {subject.cls.p_max}: {exc}") from None


def _declared_gate_set_used(subject: _Subject) -> None:
    model = subject.model(CHECK_RATE)
    gates = {inst.name for inst in subject.circuit(CHECK_RATE).flattened()}
    expected = {"CX"} if model.circuit_gate_set() == "cx" else {"CZ"}
    if {"CX", "CZ"} & gates != expected:
        raise subject.fail("declared_gate_set_used", f"two-qubit gates {sorted({'CX', 'CZ'} & gates)}, "
                                                     f"declared {model.circuit_gate_set()!r}")


def _more_noise_more_errors(subject: _Subject) -> None:
    def totals(p: float) -> dict[str, float]:
        out: dict[str, float] = {}
        dem = subject.circuit(p).detector_error_model(approximate_disjoint_errors=True)
        for inst in dem.flattened():
            if inst.type == "error":
                key = " ".join(str(t) for t in inst.targets_copy())
                out[key] = out.get(key, 0.0) + inst.args_copy()[0]
        return out

    low, high = totals(CHECK_RATE), totals(2 * CHECK_RATE)
    lowered = [key for key, value in low.items() if high.get(key, 0.0) < value * (1 - 1e-9)]
    if lowered:
        raise subject.fail("more_noise_more_errors", f"doubling the rate lowers mechanism {lowered[0]!r}")


NOISE_MODEL_CHECKS: dict[str, Callable[[_Subject], None]] = {
    "params_round_trip": _params_round_trip,
    "declarations": _declarations,
    "zero_noise_is_noiseless": _zero_noise_is_noiseless,
    "largest_rate_gives_valid_channels": _largest_rate_gives_valid_channels,
    "declared_gate_set_used": _declared_gate_set_used,
    "more_noise_more_errors": _more_noise_more_errors,
}


def _subject(model: type[NoiseModel] | str, options: Mapping[str, str] | None) -> _Subject:
    cls = get_noise_model(model) if isinstance(model, str) else model
    if not (isinstance(cls, type) and issubclass(cls, NoiseModel)):
        raise TypeError(f"model must be a NoiseModel subclass or a registered name; got {model!r}")
    return _Subject(cls, dict(options or {}), repr(cls.name))


def noise_model_checks() -> list[str]:
    """Names of the checks, in the order :func:`check_noise_model` runs them."""
    return list(NOISE_MODEL_CHECKS)


def run_noise_model_check(check: str, model: type[NoiseModel] | str, options: Mapping[str, str] | None = None) -> None:
    """Run one check (a name from :func:`noise_model_checks`); ``AssertionError`` if it fails."""
    if check not in NOISE_MODEL_CHECKS:
        raise ValueError(f"check must be one of {', '.join(map(repr, NOISE_MODEL_CHECKS))}; got {check!r}")
    NOISE_MODEL_CHECKS[check](_subject(model, options))


def check_noise_model(model: type[NoiseModel] | str, options: Mapping[str, str] | None = None) -> None:
    """Run every noise-model check on ``model`` (a class or a registered name) built with ``options``.

    >>> check_noise_model("si1000")
    """
    subject = _subject(model, options)
    for check in NOISE_MODEL_CHECKS.values():
        check(subject)
