"""Conformance checks for code families (registered or your own class).

``check_code_family(MyFamily())`` runs them all at the family's smallest
allowed distance from 3 up; each raises :class:`AssertionError` naming the
family and the check:

``layouts_validate``
    The layout of every basis passes :meth:`~codebench.layout.Layout.validate`,
    is the same when built twice, and has ``qubit_count(d)`` qubits.
``logicals_commute_with_checks``
    The Z logical commutes with every X check and the X logical with every Z
    check, and the two logicals anticommute (stabilizer formalism: Gottesman,
    PhD thesis, Caltech (1997)).
``noiseless_circuit_is_quiet``
    The family's own ideal circuit, in both gate sets, gives no detection
    event and no observable flip without noise.
``sampled_circuit_is_the_ideal_one``
    The circuit the engine samples (:func:`codebench.build.family_ideal_circuit`
    decorated by a noise model) has the ideal circuit's detectors and
    observables: a check of one is a check of the other.
``circuit_distance_is_d``
    Under circuit-level depolarizing noise the smallest undetectable logical
    error has weight d (stim's ``search_for_undetectable_logical_errors``;
    Gidney, Quantum 5, 497 (2021)).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

from codebench.build import family_ideal_circuit
from codebench.codes import get_code_family
from codebench.codes.base import CodeFamily
from codebench.noise.standard import CircuitDepolarizing

__all__ = ["CODE_FAMILY_CHECKS", "check_code_family", "code_family_checks", "run_code_family_check"]

#: Bounds of the distance search (hyperedges explored, so hook errors would show).
_SEARCH = dict(dont_explore_detection_event_sets_with_size_above=4, dont_explore_edges_with_degree_above=4,
               dont_explore_edges_increasing_symptom_degree=False)


@dataclass
class _Subject:
    family: CodeFamily
    distance: int

    def fail(self, check: str, text: str) -> AssertionError:
        return AssertionError(f"code family {self.family.name!r} at d = {self.distance} fails {check}: {text}")


def _layouts_validate(subject: _Subject) -> None:
    family, d = subject.family, subject.distance
    for basis in family.bases:
        first, second = family.layout(d, basis), family.layout(d, basis)
        try:
            first.validate()
        except ValueError as exc:
            raise subject.fail("layouts_validate", f"{basis} layout: {exc}") from None
        if first != second:
            raise subject.fail("layouts_validate", f"two {basis} layouts differ")
        if family.qubit_count(d) != len(first.qubits):
            raise subject.fail("layouts_validate", f"qubit_count {family.qubit_count(d)} but the {basis} layout "
                                                   f"has {len(first.qubits)} qubits")


def _logicals_commute_with_checks(subject: _Subject) -> None:
    for basis in subject.family.bases:
        layout = subject.family.layout(subject.distance, basis)
        z_support, x_support = set(layout.logical_z), set(layout.logical_x)
        for check in layout.checks:
            other = z_support if check.basis == "X" else x_support
            if len(other & set(check.support)) % 2:
                raise subject.fail("logicals_commute_with_checks", f"{check.basis} check on {check.support} "
                                                                   "anticommutes with a logical")
        if len(z_support & x_support) % 2 != 1:
            raise subject.fail("logicals_commute_with_checks", "the Z and X logicals commute")


def _noiseless_circuit_is_quiet(subject: _Subject) -> None:
    gate_sets: tuple[str, ...] = ("cx", "cz")
    for basis in subject.family.bases:
        for gate_set in gate_sets:
            circuit = subject.family.ideal_circuit(subject.distance, 2, basis, "cx" if gate_set == "cx" else "cz")
            if circuit.to_stim().compile_detector_sampler(seed=1).sample(50, append_observables=True).any():
                raise subject.fail("noiseless_circuit_is_quiet", f"detection events without noise ({basis}, "
                                                                 f"{gate_set})")


def _sampled_circuit_is_the_ideal_one(subject: _Subject) -> None:
    model = CircuitDepolarizing(0.0)
    for basis in subject.family.bases:
        ideal = family_ideal_circuit(subject.family, model, subject.distance, 2, basis)
        sampled, plain = model.decorate(ideal), ideal.to_stim()
        if (sampled.num_detectors, sampled.num_observables) != (plain.num_detectors, plain.num_observables):
            raise subject.fail("sampled_circuit_is_the_ideal_one", f"{sampled.num_detectors} detectors sampled, "
                                                                   f"{plain.num_detectors} in the ideal circuit")
        if sampled.compile_detector_sampler(seed=1).sample(50, append_observables=True).any():
            raise subject.fail("sampled_circuit_is_the_ideal_one", "detection events at rate 0")


def _circuit_distance_is_d(subject: _Subject) -> None:
    model = CircuitDepolarizing(0.001)
    for basis in subject.family.bases:
        circuit = model.decorate(family_ideal_circuit(subject.family, model, subject.distance, subject.distance, basis))
        weight = len(circuit.search_for_undetectable_logical_errors(**_SEARCH))
        if weight != subject.distance:
            raise subject.fail("circuit_distance_is_d", f"smallest undetectable logical error has weight {weight} "
                                                        f"({basis} basis)")


CODE_FAMILY_CHECKS: dict[str, Callable[[_Subject], None]] = {
    "layouts_validate": _layouts_validate,
    "logicals_commute_with_checks": _logicals_commute_with_checks,
    "noiseless_circuit_is_quiet": _noiseless_circuit_is_quiet,
    "sampled_circuit_is_the_ideal_one": _sampled_circuit_is_the_ideal_one,
    "circuit_distance_is_d": _circuit_distance_is_d,
}


def _subject(family: CodeFamily | str, distance: int | None) -> _Subject:
    chosen = get_code_family(family) if isinstance(family, str) else family
    if not isinstance(chosen, CodeFamily):
        raise TypeError(f"family must be a CodeFamily instance or a registered name; got {family!r}")
    if distance is None:
        distance = next((d for d in range(3, 32) if chosen.distance_problem(d) is None), None)
        if distance is None:
            raise ValueError(f"code family {chosen.name!r} allows no distance from 3 to 31")
    return _Subject(chosen, distance)


def code_family_checks() -> list[str]:
    """Names of the checks, in the order :func:`check_code_family` runs them."""
    return list(CODE_FAMILY_CHECKS)


def run_code_family_check(check: str, family: CodeFamily | str, distance: int | None = None) -> None:
    """Run one check (a name from :func:`code_family_checks`); ``AssertionError`` if it fails."""
    if check not in CODE_FAMILY_CHECKS:
        raise ValueError(f"check must be one of {', '.join(map(repr, CODE_FAMILY_CHECKS))}; got {check!r}")
    CODE_FAMILY_CHECKS[check](_subject(family, distance))


def check_code_family(family: CodeFamily | str, distance: int | None = None) -> None:
    """Run every code-family check on ``family`` at ``distance`` (default: its smallest from 3).

    >>> check_code_family("repetition")
    """
    subject = _subject(family, distance)
    for check in CODE_FAMILY_CHECKS.values():
        check(subject)
